"""``railrig replay`` of recordings that are not what they were: differing, cut short,
or crafted to write outside the replay's own folder."""

from __future__ import annotations

import copy
import shutil
from pathlib import Path

import numpy as np
import pytest

from emulator.recording.recorder import Recorder, read_recording
from emulator.scenario.texts import UnsafeTextsError, rebuild

from .test_run import ROOT, SHORT, _railrig


@pytest.fixture(scope="module")
def recorded(tmp_path_factory) -> Path:
    """A recording of the short scenario made by ``railrig run --record``."""
    where = tmp_path_factory.mktemp("replay")
    scenario = where / "short.toml"
    scenario.write_text(SHORT.format(trainset=ROOT / "profiles/trainsets/tern-25kv.toml")
                        .replace("duration_s = 5.0", "duration_s = 3.5"))
    rec = where / "run.rrec"
    done = _railrig("run", str(scenario), "--record", str(rec), cwd=where)
    assert done.returncode == 1, done.stderr  # the check that fails on purpose
    return rec


def _rewrite(src: Path, dst: Path, meta=None, data=None) -> Path:
    rec = read_recording(src)
    out = Recorder(dst, rec.columns, rec.meta if meta is None else meta)
    for row in rec.data if data is None else data:
        out.append(row)
    out.close()
    return dst


def test_a_differing_recording_exits_1_naming_the_frame(recorded, tmp_path) -> None:
    rec = read_recording(recorded)
    data = rec.data.copy()
    data[1200, 1] += 1.0  # the first measurement column, one frame
    other = _rewrite(recorded, tmp_path / "other.rrec", data=data)
    done = _railrig("replay", str(other), cwd=tmp_path)
    assert done.returncode == 1, done.stdout + done.stderr
    assert "differs from frame 1200" in done.stdout


def test_a_truncated_recording_exits_1_saying_so(recorded, tmp_path) -> None:
    cut = tmp_path / "cut.rrec"
    raw = recorded.read_bytes()
    cut.write_bytes(raw[:len(raw) * 2 // 3])  # a run killed mid-chunk
    rec = read_recording(cut)
    assert not rec.complete
    # what the cut file still holds is the whole recording's beginning, row for row, and
    # less than all of its 3500 frames: the frames the replay then finds the same
    whole = read_recording(recorded).data
    assert len(whole) == 3500 and 0 < len(rec.data) < 3500
    assert np.array_equal(rec.data, whole[:len(rec.data)], equal_nan=True)
    done = _railrig("replay", str(cut), cwd=tmp_path)
    assert done.returncode == 1, done.stdout + done.stderr
    assert f"same first {len(rec.data)} frames" in done.stdout


@pytest.mark.parametrize("relative", [
    "/tmp/railrig-replay-escape/evil.toml",  # absolute
    "../machines/../../../../../../../tmp/railrig-replay-escape/evil.toml",  # up after a name
    "machines/../../../../../../tmp/railrig-replay-escape/evil.toml",
    "../" * 12 + "tmp/railrig-replay-escape/evil.toml",  # more folders up than any profile
    "..",
])
def test_a_crafted_machine_path_is_refused(recorded, tmp_path, relative: str) -> None:
    escape = Path("/tmp/railrig-replay-escape")
    shutil.rmtree(escape, ignore_errors=True)
    meta = copy.deepcopy(read_recording(recorded).meta)
    meta["machine"]["relative"] = relative
    crafted = _rewrite(recorded, tmp_path / "crafted.rrec", meta=meta)
    done = _railrig("replay", str(crafted), cwd=tmp_path)
    assert done.returncode == 2, done.stdout + done.stderr
    assert "cannot replay" in done.stderr and "refus" in done.stderr
    assert not escape.exists()


@pytest.mark.parametrize(("key", "path"), [("trainset", "/x/.."), ("scenario", ".."),
                                           ("scenario", "")])
def test_crafted_file_names_are_refused(recorded, tmp_path, key: str, path: str) -> None:
    meta = copy.deepcopy(read_recording(recorded).meta)
    meta[key]["path"] = path
    where = tmp_path / "rebuilt"
    where.mkdir()
    with pytest.raises(UnsafeTextsError, match="file name"):
        rebuild(meta, where)


def test_the_shipped_layout_rebuilds_inside_the_folder(recorded, tmp_path) -> None:
    meta = read_recording(recorded).meta
    assert meta["machine"]["relative"].startswith("../")  # trainsets/ -> machines/
    where = tmp_path / "rebuilt"
    where.mkdir()
    scenario, _trainset = rebuild(meta, where)
    written = sorted(p for p in where.rglob("*") if p.is_file())
    assert len(written) == 3
    assert all(p.resolve().is_relative_to(where.resolve()) for p in written)
    assert scenario.read_text() == meta["scenario"]["text"]


@pytest.mark.parametrize("seed", [None, "7", 1.5])
def test_a_recording_without_a_usable_seed_exits_2(recorded, tmp_path, seed) -> None:
    meta = copy.deepcopy(read_recording(recorded).meta)
    if seed is None:
        del meta["seed"]
    else:
        meta["seed"] = seed
    crafted = _rewrite(recorded, tmp_path / "seedless.rrec", meta=meta)
    done = _railrig("replay", str(crafted), cwd=tmp_path)
    assert done.returncode == 2, done.stdout + done.stderr
    assert "cannot replay" in done.stderr and "seed" in done.stderr
    assert "Traceback" not in done.stderr
