"""Recordings: round trip, damaged tails, a killed writer, exports.

CRC-32 check value 0xCBF43926 over "123456789" (RevEng catalogue, REFERENCES.md): zlib's
crc32 is the reference implementation used here.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import zlib

import numpy as np
import pytest

from emulator.recording.recorder import (
    Recorder,
    RecordingError,
    export_csv,
    export_npz,
    read_recording,
)


def test_crc32_check_value() -> None:
    assert zlib.crc32(b"123456789") == 0xCBF43926


def test_round_trip(tmp_path) -> None:
    rows = np.random.default_rng(0).normal(size=(1000, 3))
    with Recorder(tmp_path / "r.rrec", ["t", "a.b", "c"], {"seed": 7}, chunk_rows=64) as rec:
        for row in rows:
            rec.append(row)
    back = read_recording(tmp_path / "r.rrec")
    assert back.complete and back.meta == {"seed": 7}
    assert np.array_equal(back.data, rows)
    assert np.array_equal(back.column("a.b"), rows[:, 1])


def test_damaged_tail_reads_up_to_the_last_good_chunk(tmp_path) -> None:
    path = tmp_path / "r.rrec"
    with Recorder(path, ["x"], {}, chunk_rows=10) as rec:
        for i in range(100):
            rec.append(np.array([i]))
    raw = bytearray(path.read_bytes())
    truncated = tmp_path / "cut.rrec"
    truncated.write_bytes(raw[:-7])
    back = read_recording(truncated)
    assert not back.complete and "truncated" in back.note
    assert list(back.column("x")) == list(range(90))
    raw[-3] ^= 0xFF  # corrupt the last chunk's payload
    corrupt = tmp_path / "bad.rrec"
    corrupt.write_bytes(raw)
    back = read_recording(corrupt)
    assert not back.complete and "CRC" in back.note and len(back.data) == 90


def test_not_a_recording(tmp_path) -> None:
    path = tmp_path / "x.rrec"
    path.write_bytes(b"hello world, not ours")
    with pytest.raises(RecordingError):
        read_recording(path)


def test_a_killed_writer_leaves_a_readable_file(tmp_path) -> None:
    path = tmp_path / "k.rrec"
    script = (
        "import sys, time, numpy as np\n"
        "from emulator.recording.recorder import Recorder\n"
        "rec = Recorder(sys.argv[1], ['i'], {'run': 'killed'}, chunk_rows=100000, flush_s=0.1)\n"
        "i = 0\n"
        "while True:\n"
        "    rec.append(np.array([i])); i += 1; time.sleep(0.0005)\n")
    proc = subprocess.Popen([sys.executable, "-c", script, str(path)])
    time.sleep(2.0)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    back = read_recording(path)
    assert back.meta == {"run": "killed"}
    assert len(back.data) > 100  # flushed by time, not by a full buffer
    assert np.array_equal(back.column("i"), np.arange(len(back.data)))


def test_exports(tmp_path) -> None:
    with Recorder(tmp_path / "r.rrec", ["t", "v.mps"], {"seed": 1}) as rec:
        for i in range(10):
            rec.append(np.array([i * 1e-3, 2.0 * i]))
    back = read_recording(tmp_path / "r.rrec")
    export_csv(back, tmp_path / "r.csv")
    lines = (tmp_path / "r.csv").read_text().splitlines()
    assert lines[0] == "t,v.mps" and lines[3] == "0.002,4"
    export_npz(back, tmp_path / "r.npz")
    z = np.load(tmp_path / "r.npz")
    assert np.array_equal(z["v__mps"], back.column("v.mps"))


def test_rig_records_frames_and_export_command(tmp_path, params) -> None:
    import asyncio

    from emulator.cli import main
    from tests.link.conftest import command, make_rig

    async def go():
        rig, _ = await make_rig(params, lambda r, m: command(r, m[1]), ideal_dc_links=True)
        rig.recorder = Recorder(tmp_path / "run.rrec", rig.record_columns(), {"seed": 0})
        await rig.run(frames=300)
        rig.recorder.close()
        return rig
    rig = asyncio.run(go())
    back = read_recording(tmp_path / "run.rrec")
    assert back.complete and len(back.data) == 300
    assert back.column("time_s")[-1] == pytest.approx(0.3)
    assert np.all(back.column("y.DC-A.voltage_v")[1:] > 1700)
    assert np.all(back.column("u.INV-A1.duty_a")[1:] == pytest.approx(0.5))
    assert main(["export", str(tmp_path / "run.rrec"), "--csv"]) == 0
    assert (tmp_path / "run.csv").read_text().startswith("time_s,y.")
    assert rig.frame == 300
