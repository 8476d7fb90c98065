"""``railrig run`` and ``railrig replay`` as a user calls them: exit codes, JUnit XML
(parsed back with the standard library), the plotted report, a bit-for-bit replay."""

from __future__ import annotations

import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

ROOT = Path(__file__).parents[2]
SHORT = '''
[scenario]
name = "short start"
trainset = "{trainset}"
duration_s = 5.0
[driver]
[[driver.step]]
mode = "off"
name = "switch-on"
for_s = 2.0
[[driver.step]]
mode = "accelerate"
name = "go"
to_kmh = 30.0
[[fault]]
name = "sensor-offset"
target = "DC-A.voltage_v"
params = {{ offset = 50.0 }}
at_s = 3.0
until_s = 4.0
label = "offset"
[[check]]
name = "moves"
signal = "train.speed_kmh"
rises_to = 0.5
by_s = 3.0
after = "go"
[[check]]
name = "impossible on purpose"
signal = "train.speed_kmh"
min = 100.0
after = "go"
'''


def _railrig(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "emulator.cli", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=600)


def test_run_junit_report_and_replay(tmp_path: Path) -> None:
    scenario = tmp_path / "short.toml"
    scenario.write_text(SHORT.format(trainset=ROOT / "profiles/trainsets/tern-25kv.toml"))
    rec, junit, report = tmp_path / "run.rrec", tmp_path / "junit.xml", tmp_path / "report"
    done = _railrig("run", str(scenario), "--record", str(rec), "--junit", str(junit),
                    "--report", str(report), cwd=tmp_path)
    assert done.returncode == 1, done.stderr  # one check fails on purpose
    assert "FAIL" in done.stdout and "impossible on purpose" in done.stdout
    suite = ET.parse(junit).getroot().find("testsuite")
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == ["moves", "impossible on purpose"]
    assert cases[0].find("failure") is None and cases[1].find("failure") is not None
    assert suite.get("failures") == "1"
    for png in ("speed_effort.png", "currents.png", "dc_link.png", "line.png", "creep.png",
                "checks.png"):
        assert (report / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    index = (report / "index.html").read_text()
    assert "impossible on purpose" in index and "offset" in index
    replay = _railrig("replay", str(rec), cwd=tmp_path)
    assert replay.returncode == 0, replay.stdout + replay.stderr
    assert "identical, bit for bit: 5000 frames" in replay.stdout


def test_bad_file_exits_2_naming_the_line(tmp_path: Path) -> None:
    scenario = tmp_path / "bad.toml"
    text = SHORT.format(trainset=ROOT / "profiles/trainsets/tern-25kv.toml")
    bad = text.replace('signal = "train.speed_kmh"\nmin', 'signal = "train.sped"\nmin')
    scenario.write_text(bad)
    done = _railrig("run", str(scenario), cwd=tmp_path)
    assert done.returncode == 2
    # the signal is looked up when the run starts, against what is recorded: the error
    # names the check (the line its table starts on) and its key
    line = next(i for i, row in enumerate(bad.splitlines(), 1)
                if row == 'name = "impossible on purpose"')
    assert f"bad.toml:{line}: [check] signal:" in done.stderr
    assert "no recorded signal named 'train.sped'" in done.stderr


def test_no_controller_exits_2(tmp_path: Path) -> None:
    scenario = tmp_path / "short.toml"
    scenario.write_text(SHORT.format(trainset=ROOT / "profiles/trainsets/tern-25kv.toml"))
    done = _railrig("run", str(scenario), "--controller", "carrier-pigeon://nest", cwd=tmp_path)
    assert done.returncode == 2
    assert "controller link" in done.stderr


def test_the_summary_prints_names_with_brackets_as_written() -> None:
    # a check or scenario name may hold square brackets (a TOML table's name, an axle
    # index); rich would take "[...]" for markup and drop it
    from types import SimpleNamespace as Ns

    from rich.console import Console

    from emulator.commands.run import summary

    check = Ns(passed=False, spec=Ns(name="creep [axle 1]"), measured="0 .. 36",
               detail="[over]", window=(0.0, 1.0))
    run = Ns(scenario=Ns(name="start[tern-15kv]"), passed=False, results=[check])
    console = Console(width=120, record=True)
    console.print(summary(run))
    text = console.export_text()
    assert "start[tern-15kv]: FAILED" in text
    assert "creep [axle 1]" in text and "0 .. 36 [over]" in text and "FAIL" in text
