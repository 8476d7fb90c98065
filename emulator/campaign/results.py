"""A campaign's results on disk: ``results.csv``, ``checks.csv``, ``junit.xml``, recordings.

``results.csv`` has one row a run, written and flushed as each run ends, so an
interrupted campaign leaves a valid file of the runs that ended; ``checks.csv`` has one
row a check of a run (its verdict, what was measured and the figure as a number, for
plotting against the sweeps). ``--resume`` reads both back (after a copy of each, .bak)
and runs only the digests that have no row; a last row cut short by a kill is dropped
and said, any other row that does not fit is an error naming its line.
"""

from __future__ import annotations

import contextlib
import csv
import os
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

RESULTS, CHECKS, JUNIT, RECORDINGS = "results.csv", "checks.csv", "junit.xml", "recordings"
HEAD = ["run", "scenario", "trainset", "seed"]
TAIL = ["verdict", "failed_checks", "wall_s", "realtime_factor", "digest",
        "recording_digest", "recording", "reason", "worker"]
CHECK_COLUMNS = ["run", "digest", "check", "passed", "measured", "value"]


def results_columns(addresses: list[str]) -> list[str]:
    """The columns of results.csv: the run, its varied values, its outcome."""
    return HEAD + addresses + TAIL


class ResultsFileError(ValueError):
    """A results file that cannot be read back as written (edited, or another file)."""


#: a field may hold a run's whole reason (its controller's last lines): above csv's default
csv.field_size_limit(16 * 1024 * 1024)
REQUIRED = ("run", "digest", "verdict", "scenario")


def read_rows(path: Path, required: tuple[str, ...] = REQUIRED
              ) -> tuple[list[dict[str, str]], int]:
    """The rows of a CSV file with a header, and how many were cut short: only a last
    line with no line end (a kill mid-write) is; any other row that does not fit the
    header is a ResultsFileError naming the file and the line (nothing is rewritten)."""
    if not path.is_file():
        return [], 0
    try:
        text = path.read_text(encoding="utf-8")
    except (UnicodeDecodeError, OSError) as exc:
        raise ResultsFileError(f"{path}: cannot read it as UTF-8 text: {exc}") from None
    cut = 0
    if text and not text.endswith("\n"):
        text = text[:text.rfind("\n") + 1]
        cut = 1
    reader = csv.DictReader(text.splitlines(keepends=True))
    rows = []
    try:
        for row in reader:
            if None in row or None in row.values():
                raise ResultsFileError(f"{path}:{reader.line_num}: the row does not have "
                                       "the header's columns (edited?)")
            rows.append(row)
    except csv.Error as exc:
        raise ResultsFileError(f"{path}:{reader.line_num}: {exc}") from None
    missing = [c for c in required if c not in (reader.fieldnames or [])]
    if missing:
        raise ResultsFileError(f"{path}:1: no column {missing[0]!r}: not a railrig "
                               "campaign's file")
    return rows, cut


class ResultsWriter:
    """Appends rows to results.csv and checks.csv, flushing each run's rows to the OS."""

    def __init__(self, out: Path, addresses: list[str], *, resume: bool) -> None:
        self.out = out
        self.columns = results_columns(addresses)
        self.rows: list[dict[str, Any]] = []
        self.cut = 0
        out.mkdir(parents=True, exist_ok=True)
        (out / RECORDINGS).mkdir(exist_ok=True)
        results, checks = out / RESULTS, out / CHECKS
        if resume:
            rows, self.cut = read_rows(results)
            old_checks, cut = read_rows(checks, ("run", "digest", "check"))
            self.cut += cut
            known = {r["digest"] for r in rows}
            # columns of an earlier campaign file kept: nothing recorded is dropped
            extra = [k for r in rows for k in r if k not in self.columns]
            self.columns = self.columns[:-len(TAIL)] + list(dict.fromkeys(extra)) + TAIL
            self.rows = [{c: r.get(c, "") for c in self.columns} for r in rows]
            for f in (results, checks):  # as they were, beside: a rewrite loses nothing
                if f.exists():
                    shutil.copyfile(f, f.with_suffix(".csv.bak"))
            _rewrite(results, self.columns, self.rows)
            _rewrite(checks, CHECK_COLUMNS, [c for c in old_checks if c["digest"] in known])
        else:
            for f in (results, checks):
                if f.exists():
                    raise FileExistsError(f"{f} exists: --resume continues that campaign, "
                                          "or give another --out")
            _rewrite(results, self.columns, [])
            _rewrite(checks, CHECK_COLUMNS, [])
        self._results = results.open("a", newline="", encoding="utf-8")
        self._checks = checks.open("a", newline="", encoding="utf-8")
        self._rw = csv.DictWriter(self._results, self.columns, extrasaction="ignore")
        self._cw = csv.DictWriter(self._checks, CHECK_COLUMNS)

    @property
    def done(self) -> set[str]:
        """Digests that have a result."""
        return {r["digest"] for r in self.rows}

    def add(self, result: dict[str, Any]) -> dict[str, Any]:
        """Write one run's rows (and its recording, if it came back); the row written."""
        recording = ""
        if result.get("recording"):
            name = f"run-{result['run']:04d}-{result['scenario']}-{result['digest'][:8]}.rrec"
            path = self.out / RECORDINGS / name
            path.write_bytes(result["recording"])
            recording = f"{RECORDINGS}/{name}"
        row = {"run": result["run"], "scenario": result["scenario"],
               "trainset": result["trainset"], "seed": result["seed"],
               **{k: v for k, v in result["values"].items()},
               "verdict": result["verdict"],
               "failed_checks": "; ".join(result["failed_checks"]),
               "wall_s": f"{result['wall_s']:.3f}",
               "realtime_factor": f"{result['realtime_factor']:.3f}",
               "digest": result["digest"], "recording_digest": result["recording_digest"],
               "recording": recording, "reason": result["reason"],
               "worker": result.get("worker", "")}
        for c in result["checks"]:
            self._cw.writerow({"run": result["run"], "digest": result["digest"],
                               "check": c["name"], "passed": c["passed"],
                               "measured": c["measured"],
                               "value": "" if c["value"] is None else repr(c["value"])})
        self._rw.writerow(row)
        for fh in (self._checks, self._results):  # checks first: a row in results.csv
            fh.flush()  # means its checks are on disk too
            os.fsync(fh.fileno())
        self.rows.append({k: str(v) for k, v in row.items()})
        return row

    def close(self) -> None:
        self._results.close()
        self._checks.close()

    def remove(self) -> None:
        """Take away the empty files this writer made (a campaign that never started)."""
        for f in (self.out / RESULTS, self.out / CHECKS):
            f.unlink(missing_ok=True)
        with contextlib.suppress(OSError):
            (self.out / RECORDINGS).rmdir()
            self.out.rmdir()


def _rewrite(path: Path, columns: list[str], rows: list[dict]) -> None:
    """Write a whole CSV file through a temporary one (a kill leaves the old or the new)."""
    tmp = path.with_suffix(".csv.part")
    with tmp.open("w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, columns, extrasaction="ignore")
        w.writeheader()
        w.writerows(rows)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)


def write_junit(name: str, rows: list[dict[str, str]], labels: dict[str, str],
                path: Path) -> None:
    """JUnit XML (testsuites / testsuite / testcase, as CI servers read it): one test case
    a run, named by its scenario, trainset, seed and varied values; a failed run is a
    failure, an error or a timeout an error."""
    root = ET.Element("testsuites", name=f"railrig campaign {name}")
    suite = ET.SubElement(root, "testsuite", name=name, tests=str(len(rows)))
    counts = {"fail": 0, "error": 0, "timeout": 0}
    for r in sorted(rows, key=lambda r: (len(r["run"]), r["run"])):
        case = ET.SubElement(suite, "testcase", classname=f"railrig.campaign.{r['scenario']}",
                             name=labels.get(r["digest"], f"run {r['run']}"),
                             time=r.get("wall_s", "0"))
        verdict = r["verdict"]
        counts[verdict] = counts.get(verdict, 0) + 1
        if verdict == "fail":
            el = ET.SubElement(case, "failure", message=r["failed_checks"], type="check")
            el.text = f"failed: {r['failed_checks']}\nrecording: {r['recording'] or '-'}"
        elif verdict in ("error", "timeout"):
            el = ET.SubElement(case, "error", message=r["reason"].splitlines()[0]
                               if r["reason"] else verdict, type=verdict)
            el.text = r["reason"]
    suite.set("failures", str(counts["fail"]))
    suite.set("errors", str(counts["error"] + counts["timeout"]))
    root.set("tests", str(len(rows)))
    root.set("failures", str(counts["fail"]))
    root.set("errors", str(counts["error"] + counts["timeout"]))
    ET.indent(root)
    ET.ElementTree(root).write(path, encoding="utf-8", xml_declaration=True)
