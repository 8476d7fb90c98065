"""results.csv read back for --resume: a row cut short by a kill is dropped (and said), any
other row that does not fit is an error naming the line, and nothing is rewritten then;
what was written before is kept beside as .bak when the file is rewritten."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

from emulator.campaign.results import (
    CHECKS,
    RESULTS,
    ResultsFileError,
    ResultsWriter,
    read_rows,
    results_columns,
)


def _result(run: int, verdict: str = "pass", reason: str = "") -> dict:
    return {"run": run, "scenario": "start", "trainset": "tern-15kv", "seed": 1,
            "values": {"adhesion[wet rail].factor": 0.6}, "verdict": verdict,
            "failed_checks": [], "checks": [{"name": "gets away", "passed": True,
                                              "measured": "at 1 s", "value": 1.0}],
            "wall_s": 1.0, "realtime_factor": 5.0, "digest": f"d{run}",
            "recording_digest": "", "recording": None, "reason": reason, "worker": "w"}


def _written(out: Path, n: int, **kw) -> Path:
    writer = ResultsWriter(out, ["adhesion[wet rail].factor"], resume=False)
    for k in range(1, n + 1):
        writer.add(_result(k, **kw))
    writer.close()
    return out / RESULTS


def test_a_last_row_cut_short_is_dropped_and_said(tmp_path: Path) -> None:
    path = _written(tmp_path, 3)
    text = path.read_text(encoding="utf-8")
    path.write_text(text[:-20], encoding="utf-8")  # the kill came mid-row
    rows, cut = read_rows(path)
    assert [r["run"] for r in rows] == ["1", "2"] and cut == 1
    writer = ResultsWriter(tmp_path, ["adhesion[wet rail].factor"], resume=True)
    assert writer.done == {"d1", "d2"} and writer.cut == 1
    writer.close()
    assert (tmp_path / "results.csv.bak").read_text(encoding="utf-8") == text[:-20]
    # rewritten: the header and the two whole rows, as they were written
    assert path.read_text(encoding="utf-8") == "".join(text.splitlines(keepends=True)[:3])
    # and the checks of the runs kept, none of the run cut short (run 3 will run again),
    # each as _result gave it
    with (tmp_path / CHECKS).open(newline="", encoding="utf-8") as fh:
        checks = list(csv.DictReader(fh))
    assert checks == [{"run": str(k), "digest": f"d{k}", "check": "gets away",
                       "passed": "True", "measured": "at 1 s", "value": "1.0"}
                      for k in (1, 2)]


def test_an_edited_row_is_an_error_naming_its_line_and_nothing_is_rewritten(
        tmp_path: Path) -> None:
    path = _written(tmp_path, 3)
    lines = path.read_bytes().splitlines(keepends=True)
    lines[2] = lines[2].rstrip(b"\r\n") + b",a note\r\n"  # the second run's row
    edited = b"".join(lines)
    path.write_bytes(edited)
    with pytest.raises(ResultsFileError, match=r"results.csv:3: the row does not have"):
        ResultsWriter(tmp_path, ["adhesion[wet rail].factor"], resume=True)
    assert path.read_bytes() == edited


@pytest.mark.parametrize(("change", "says"), [
    (lambda t: t.replace("digest", "hash", 1), "no column 'digest'"),
    (lambda t: t.encode("utf-16"), "UTF-8"),
])
def test_another_file_in_its_place_is_an_error(tmp_path: Path, change, says) -> None:
    path = _written(tmp_path, 1)
    changed = change(path.read_text(encoding="utf-8"))
    (path.write_bytes if isinstance(changed, bytes) else path.write_text)(changed)
    with pytest.raises(ResultsFileError, match=says):
        read_rows(path)


def test_a_long_reason_reads_back(tmp_path: Path) -> None:
    path = _written(tmp_path, 1, verdict="error", reason="x" * 300_000)
    (row,), cut = read_rows(path)
    assert cut == 0 and len(row["reason"]) == 300_000
    assert list(row) == results_columns(["adhesion[wet rail].factor"])
