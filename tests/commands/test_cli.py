"""The railrig command as a user types it."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest

from emulator.cli import main


def railrig(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "emulator.cli", *args], capture_output=True,
                          text=True, timeout=300)


def test_protocol_json_lists_both_directions() -> None:
    out = railrig("protocol", "--json")
    assert out.returncode == 0
    sm = json.loads(out.stdout)
    assert sm["header"][:2] == ["protocol_version", "sequence"]
    names = [s["name"] for s in sm["commands"]]
    assert "INV-A1.duty_a" in names and "INV-B2.gates_enabled" in names
    assert any(s["name"].endswith("encoder_count") for s in sm["measurements"])


def test_protocol_table_for_the_other_variant() -> None:
    out = railrig("protocol", "--profile", "trainsets/tern-15kv")
    assert out.returncode == 0 and "16.7 Hz" in out.stdout


@pytest.mark.parametrize(("args", "words"), [
    (["serve", "--link", "tcp://x"], "unknown link scheme"),
    (["serve", "--link", "udp://127.0.0.1:5000"], "peer=HOST:PORT"),
    (["serve", "--link", "udp://10.1.2.3:5000?peer=127.0.0.1:5001"], "not loopback"),
    (["serve", "--link", "serial:///dev/ttyUSB0?baud=fast"], "baud"),
    (["serve", "--link", "loop://a", "--period-ms", "20"], "period"),
    (["serve", "--link", "loop://a", "--command-delay", "9"], "command delay"),
    (["serve", "--profile", "nonexistent.toml", "--link", "loop://a"], "no such profile"),
])
def test_bad_settings_give_a_clear_error_and_exit_2(args, words, capsys) -> None:
    assert main(args) == 2
    assert words in " ".join(capsys.readouterr().err.split())


@pytest.mark.long
def test_throughput_bench_json_has_the_documented_keys() -> None:
    """Three short demo runs (2 s of plant time each, one plain run each way): the
    figures are there and are numbers a run can give; their values are benchmarks, not
    checked."""
    out = railrig("bench", "--throughput", "--json", "--plant-seconds", "2", "--runs", "1")
    assert out.returncode == 0, out.stderr
    figures = json.loads(out.stdout)
    for key in ("inprocess_realtime_factor", "udp_realtime_factor",
                "frame_us_instrumented"):
        assert math.isfinite(figures[key]) and figures[key] > 0, key
    # the median of one run is that run
    assert figures["inprocess_runs"] == [figures["inprocess_realtime_factor"]]
    assert figures["udp_runs"] == [figures["udp_realtime_factor"]]
    # the 2 s asked for, in the demo trainset's 1 ms frames: 2000 frames, no more
    assert figures["plant_time_s"] == 2.0
    assert figures["frames"] == 2000
    stages = figures["stage_us"]
    assert set(stages) == {"plant", "sampling", "codec", "controller", "program",
                           "recording", "monitor", "rig_rest"}
    # every stage ran and was timed (the instrumented run records, and has a client)
    assert all(stages[k] > 0 for k in ("plant", "sampling", "codec", "controller",
                                       "program", "recording", "monitor"))
    # the rest is the frame less the timed stages: never negative (a stage counted twice
    # shows only where it costs more than the rest; the stages' figures are not checked)
    assert stages["rig_rest"] >= 0


def test_throughput_bench_refuses_no_runs() -> None:
    out = railrig("bench", "--throughput", "--runs", "0")
    assert out.returncode == 2
    assert "--runs must be at least 1" in out.stdout + out.stderr


def test_bench_json_has_the_documented_keys() -> None:
    out = railrig("bench", "--json", "--frames", "300")
    assert out.returncode == 0
    figures = json.loads(out.stdout)
    for key in ("plant_frame_us_median", "plant_frame_us_p99", "frame_fraction",
                "motors_in_10pct", "solve_ivp_ratio", "machines_frame_us_median",
                "solve_ivp_machines_ratio", "machines_apart_ours",
                "machines_apart_solve_ivp"):
        value = figures[key]  # (a busy host may fit no motor in 10 %: zero allowed there)
        assert type(value) in (int, float) and math.isfinite(value), key
        assert value > 0 or (key == "motors_in_10pct" and value == 0), key
