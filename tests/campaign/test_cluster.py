"""Campaigns through Dask, as a user starts them: ``railrig campaign`` on a local cluster,
on a scheduler and workers started as processes of their own, with a worker killed, and
interrupted with Ctrl-C then resumed.

What a campaign's runs must give comes from the runs one by one: each of the 2 x 2 runs
(the wet rail's factor x the seed) written as a scenario file of its own, by text, not
by the campaign's code, and run as ``railrig run --seed --record`` runs it (its
``run_scenario`` with the reference controller, here in the test's process: the command
itself is tests/commands/test_run.py's). The verdicts and the recordings' frame digests
must be the same (lockstep with the reference controller is deterministic).
"""

from __future__ import annotations

import asyncio
import csv
import os
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from emulator.recording.recorder import read_recording
from emulator.scenario import load_scenario, run_scenario

from .conftest import CAMPAIGN, short_start

pytestmark = pytest.mark.long

FACTORS, SEEDS = (1.0, 0.6), (1, 2)
DASK = Path(sys.executable).parent / "dask"


def _railrig(*args: str, cwd: Path, timeout: float = 600) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "emulator.cli", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=timeout)


def _rows(out: Path) -> list[dict[str, str]]:
    with (out / "results.csv").open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def one_by_one(tmp_path_factory) -> dict[tuple[float, int], tuple[str, str]]:
    """(factor, seed) -> (verdict, frame digest) of each run alone."""
    where = tmp_path_factory.mktemp("one-by-one")
    found = {}
    for factor in FACTORS:
        scenario = where / f"start-{factor}.toml"
        scenario.write_text(short_start(factor), encoding="utf-8")
        for seed in SEEDS:
            rec = where / f"{factor}-{seed}.rrec"
            run = asyncio.run(run_scenario(load_scenario(scenario), controller="reference",
                                           seed=seed, record=rec))
            found[factor, seed] = ("pass" if run.passed else "fail",
                                   read_recording(rec).frames_digest())
    # both verdicts occur, so agreeing with them is not agreeing with a constant
    assert {v for v, _ in found.values()} == {"pass", "fail"}
    return found


def _same_as_one_by_one(rows, one_by_one) -> None:
    keys = sorted((float(r["adhesion[wet rail].factor"]), int(r["seed"])) for r in rows)
    assert keys == sorted(one_by_one)  # each run once: none twice, none missing
    for r in rows:
        key = (float(r["adhesion[wet rail].factor"]), int(r["seed"]))
        assert (r["verdict"], r["recording_digest"]) == one_by_one[key], r


def test_a_local_cluster_gives_what_the_runs_give_one_by_one(campaign_dir, one_by_one
                                                             ) -> None:
    out = campaign_dir / "out"
    done = _railrig("campaign", "two.toml", "--workers", "2", "--out", str(out),
                    cwd=campaign_dir)
    assert done.returncode == 1, done.stderr  # a run fails (factor 0.6), on purpose
    rows = _rows(out)
    _same_as_one_by_one(rows, one_by_one)
    assert len({r["worker"] for r in rows}) == 2  # both workers took runs
    for r in rows:  # record = "all": each recording kept holds the frames it reported
        assert read_recording(out / r["recording"]).frames_digest() == r["recording_digest"]
    suite = ET.parse(out / "junit.xml").getroot().find("testsuite")
    cases = suite.findall("testcase")
    assert len(cases) == 4 and suite.get("failures") == str(
        sum(r["verdict"] == "fail" for r in rows))
    # each run's case by its name, failed where its run failed (one by one's verdict)
    failed = {c.get("name"): c.find("failure") is not None for c in cases}
    assert failed == {
        f"start[tern-15kv, seed={s}, adhesion[wet rail].factor={f:g}]":
            one_by_one[f, s][0] == "fail" for f in FACTORS for s in SEEDS}
    page = (out / "index.html").read_text(encoding="utf-8")
    assert "2/2 passed" in page and "0/2 passed" in page
    assert len(list((out / "plots").glob("*.png"))) == 1  # one plotted check, one swept value
    assert "runs an hour" in done.stdout


@pytest.fixture
def dask_cluster(tmp_path: Path):
    """A scheduler and two workers, each a process (group) of its own, as on a cluster.
    Yields (address, [worker processes])."""
    info = tmp_path / "scheduler.json"
    env = dict(os.environ, DASK_DISTRIBUTED__SCHEDULER__ALLOWED_FAILURES="1")
    procs = [subprocess.Popen([str(DASK), "scheduler", "--port", "0", "--no-dashboard",
                               "--scheduler-file", str(info)], cwd=tmp_path, env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                              start_new_session=True)]
    try:
        deadline = time.monotonic() + 60
        while not info.exists() or not info.read_text():
            assert time.monotonic() < deadline, "the scheduler did not start"
            time.sleep(0.2)
        import json

        address = json.loads(info.read_text())["address"]
        workers = [subprocess.Popen([str(DASK), "worker", address, "--nthreads", "1",
                                     "--no-dashboard"], cwd=tmp_path, env=env,
                                    stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                    start_new_session=True) for _ in range(2)]
        procs += workers
        from distributed import Client

        with Client(address, timeout=30) as client:
            client.wait_for_workers(2, timeout=120)
        yield address, workers
    finally:
        for p in procs:
            if p.poll() is None:
                os.killpg(p.pid, signal.SIGKILL)
                p.wait(10)


def test_a_scheduler_and_workers_of_their_own_give_the_same_and_survive_a_death(
        campaign_dir, one_by_one, dask_cluster) -> None:
    address, workers = dask_cluster
    out = campaign_dir / "out"
    done = _railrig("campaign", "two.toml", "--scheduler", address, "--out", str(out),
                    cwd=campaign_dir)
    assert done.returncode == 1, done.stderr
    _same_as_one_by_one(_rows(out), one_by_one)
    # a longer campaign; one worker (nanny and all) killed once the first run has ended
    (campaign_dir / "eight.toml").write_text(
        CAMPAIGN.replace("seeds = [1, 2]", "seeds = [1, 2, 3, 4]")
        .replace('record = "all"', 'record = "none"'), encoding="utf-8")
    out8 = campaign_dir / "out8"
    run = subprocess.Popen([sys.executable, "-m", "emulator.cli", "campaign", "eight.toml",
                            "--scheduler", address, "--out", str(out8)], cwd=campaign_dir,
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 300
    while not (out8 / "results.csv").exists() or len(_rows(out8)) < 1:
        assert time.monotonic() < deadline and run.poll() is None, run.communicate()
        time.sleep(0.05)
    killed_after = len(_rows(out8))
    os.killpg(workers[0].pid, signal.SIGKILL)
    _, stderr = run.communicate(timeout=600)
    assert run.returncode == 1, stderr
    rows = _rows(out8)
    assert killed_after < 8  # the kill came mid-campaign
    assert sorted((float(r["adhesion[wet rail].factor"]), int(r["seed"])) for r in rows) == \
        sorted((f, s) for f in FACTORS for s in (1, 2, 3, 4))  # every run accounted for
    assert {r["verdict"] for r in rows} <= {"pass", "fail"}, [r["reason"] for r in rows]
    _same_as_one_by_one([r for r in rows if int(r["seed"]) in SEEDS], one_by_one)


def test_ctrl_c_leaves_valid_results_and_resume_runs_only_the_rest(campaign_dir, one_by_one
                                                                  ) -> None:
    (campaign_dir / "six.toml").write_text(
        CAMPAIGN.replace("seeds = [1, 2]", "seeds = [1, 2, 3]")
        .replace('record = "all"', 'record = "failed"'), encoding="utf-8")
    out = campaign_dir / "out"
    args = [sys.executable, "-m", "emulator.cli", "campaign", "six.toml", "--workers", "1",
            "--out", str(out)]
    # started as from a terminal, where Ctrl-C reaches it: a test run started in the
    # background of a shell (a CI job may be) has SIGINT ignored, and a process inherits
    # that, so the campaign would never see the interrupt (DEVELOPERS.md, "Campaigns")
    before = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        run = subprocess.Popen(args, cwd=campaign_dir, stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True, start_new_session=True)
    finally:
        signal.signal(signal.SIGINT, before)
    deadline = time.monotonic() + 300
    while not (out / "results.csv").exists() or len(_rows(out)) < 1:
        assert time.monotonic() < deadline and run.poll() is None, run.communicate()
        time.sleep(0.05)
    at_kill = len(_rows(out))
    os.killpg(run.pid, signal.SIGINT)  # as a terminal's Ctrl-C: the whole group
    _, stderr = run.communicate(timeout=120)
    assert run.returncode == 2, (f"{at_kill} row(s) when interrupted, "
                                 f"{len(_rows(out))} at the end", stderr)
    before = _rows(out)
    assert len(before) >= 1  # a run had ended when the interrupt came
    assert len(before) < 6  # and not all of them
    assert "--resume runs the rest" in " ".join(stderr.split())
    done = _railrig("campaign", "six.toml", "--workers", "1", "--out", str(out),
                    "--resume", cwd=campaign_dir)
    assert done.returncode == 1, done.stderr
    assert f"{len(before)} with results in {out}, {6 - len(before)} to run" in " ".join(
        done.stderr.split())
    after = _rows(out)
    assert after[:len(before)] == before
    assert len(after) == 6 and len({r["digest"] for r in after}) == 6
    # no run got a verdict from the interruption: each is what it is when run alone
    assert {r["verdict"] for r in after} <= {"pass", "fail"}, [r["reason"] for r in after]
    _same_as_one_by_one([r for r in after if int(r["seed"]) in SEEDS], one_by_one)
    # without --resume the folder is not written over
    again = _railrig("campaign", "six.toml", "--out", str(out), cwd=campaign_dir)
    assert again.returncode == 2 and "--resume" in again.stderr
    assert _rows(out) == after


def test_a_run_that_kills_its_worker_is_retried_once_then_an_error(campaign_dir) -> None:
    """The run's controller process kills the worker process that started it, on every
    attempt: the scheduler gives the run to a worker once more, then the run is an
    error with the reason (and the campaign goes on)."""
    (campaign_dir / "killer.toml").write_text('''[campaign]
name = "worker killer"
scenarios = ["start.toml"]
seeds = [1]
controller = "udp://{rig}?peer={bind}"
controller_command = "sh -c 'kill -9 $PPID; sleep 30'"
''', encoding="utf-8")
    out = campaign_dir / "out"
    done = _railrig("campaign", "killer.toml", "--workers", "2", "--out", str(out),
                    "--timeout-s", "120", cwd=campaign_dir)
    assert done.returncode == 1, done.stderr
    (row,) = _rows(out)
    assert row["verdict"] == "error"
    assert "died, and again on its retry" in row["reason"] and "KilledWorker" in row["reason"]
    suite = ET.parse(out / "junit.xml").getroot().find("testsuite")
    assert suite.get("errors") == "1"
    (case,) = suite.findall("testcase")
    assert case.find("error").get("type") == "error"


def test_a_fixed_controller_address_runs_one_at_a_time(campaign_dir) -> None:
    (campaign_dir / "board.toml").write_text(
        CAMPAIGN.replace('controller = "reference"',
                         'controller = "udp://127.0.0.1:5000?peer=127.0.0.1:5001"'),
        encoding="utf-8")
    done = _railrig("campaign", "board.toml", "--workers", "2", "--out", "o",
                    cwd=campaign_dir, timeout=120)
    assert done.returncode == 2
    assert "one at a time: give --workers 1" in " ".join(done.stderr.split())
    assert not (campaign_dir / "o").exists()
