"""``railrig characteristic``: the reference controller's effort against the trainset's curve.

The train is held at each speed by the rig (a dynamometer) and the controller, with the
rig's one-frame command delay, is given full demand in motoring and braking. Checks (the
issue's targets for the reference controller): the force at the rail within 5 % of the
specified curve below base speed (about 72 km/h) and 10 % above it, no protective trip,
line power factor at least 0.95 above 20 % of rated power (a PWM four-quadrant converter
runs near unity power factor: common practice, REFERENCES.md); the DC links within 5 % of
nominal peak to peak (a ripple budget of a few percent: common practice, no source; a
drive that rings its link's filter fails it, tests/scenario/test_link_damping.py).
"""

from __future__ import annotations

import asyncio
import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from emulator.profiles.reader import PROFILES_DIR
from emulator.scenario.characteristic import measure

ROOT = Path(__file__).parents[2]
BASE_KMH = 72.0  # the Tern's base speed at 62 Hz, 1.24 % slip, gear 4.1, wheel 0.85 m
LINK_V = 1800.0  # both Terns' links, nominal (their profiles)


def _check(points: list[dict]) -> None:
    for p in points:
        tolerance = 0.05 if p["speed_kmh"] < BASE_KMH else 0.10
        assert p["share_of_limit"] == pytest.approx(1.0, abs=tolerance), p
        assert not p["trips"], p
        assert p["dc_link_swing_v"] <= 0.05 * LINK_V, p
        if abs(p["rail_force_kn"] * p["speed_kmh"] / 3.6) > 0.2 * 8 * 310.0:  # kW
            # signed as the power: drawn in motoring, returned to the line in braking
            assert p["line_power_factor"] * math.copysign(1.0, p["demand"]) >= 0.95, p


@pytest.mark.long
def test_vector_control_meets_the_curve_as_a_user_measures_it(tmp_path) -> None:
    out = subprocess.run(
        [sys.executable, "-m", "emulator.cli", "characteristic", "--profile",
         "trainsets/tern-15kv", "--speeds-kmh", "20,70,160", "--demands", "1,-1", "--json",
         "--report", str(tmp_path)], cwd=ROOT, capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr
    points = json.loads(out.stdout)
    assert [(p["speed_kmh"], p["demand"]) for p in points] == [
        (20.0, 1.0), (20.0, -1.0), (70.0, 1.0), (70.0, -1.0), (160.0, 1.0), (160.0, -1.0)]
    _check(points)
    assert (tmp_path / "characteristic.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert json.loads((tmp_path / "characteristic.json").read_text()) == points


@pytest.mark.parametrize(("trainset", "control"), [
    ("tern-25kv", "scalar"), ("tern-25kv", "vector"), ("tern-15kv", "scalar")])
def test_each_trainset_and_control_meets_the_curve(trainset: str, control: str) -> None:
    # constant effort, constant power and the natural characteristic (above 130 km/h);
    # 30 km/h after 20: the drives, released while the speed moves on, start again on
    # motors whose rotor flux has not died away (the V/f drives drew 1.2 kA there and
    # tripped, and fell 5.7 % short of the curve at 30 km/h)
    points = asyncio.run(measure(PROFILES_DIR / "trainsets" / f"{trainset}.toml",
                                 [20.0, 30.0, 70.0, 120.0, 160.0], [1.0, -1.0],
                                 control=control))
    _check([dict(p.__dict__, share_of_limit=p.share_of_limit) for p in points])


@pytest.mark.xfail(strict=True, reason="94.8 % of the curve: at 25.6 Hz the flux trim's "
                   "weight has fallen to 0.17 and the slip trim learns from 31 Hz up "
                   "(DEVELOPERS.md)")
def test_a_v_f_point_measured_on_its_own_meets_the_curve() -> None:
    # as a user measures one point: the drive starts at 30 km/h, with no trim learnt at a
    # lower speed before (25.6 Hz, under half the rated frequency); measured after 20 km/h,
    # as test_each_trainset_and_control_meets_the_curve does, it gives 98.8 %
    points = asyncio.run(measure(PROFILES_DIR / "trainsets" / "tern-25kv.toml",
                                 [30.0], [1.0, -1.0], control="scalar"))
    _check([dict(p.__dict__, share_of_limit=p.share_of_limit) for p in points])


@pytest.mark.long
def test_a_controller_under_test_is_measured_over_its_link(tmp_path) -> None:
    # the reference controller in a process of its own on loopback UDP stands for a board:
    # the command reaches it by URL as a user's firmware would be reached
    from emulator.controller.process import spawn_controller, stop_controller

    profile = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
    url, board = spawn_controller(profile, quiet=True)
    try:
        out = subprocess.run(
            [sys.executable, "-m", "emulator.cli", "characteristic", "--profile",
             "trainsets/tern-25kv", "--controller", url, "--speeds-kmh", "70",
             "--demands", "1", "--json"], cwd=ROOT, capture_output=True, text=True,
            timeout=600)
    finally:
        stop_controller(board)
    assert out.returncode == 0, out.stderr
    points = json.loads(out.stdout)
    _check(points)
    # the controller's own account of its effort came back in its replies: estimated from
    # its measured currents, within 5 % of the rail (common practice, no source: what a
    # drive without a torque sensor is expected to know of its torque)
    assert points[0]["reported_kn"] == pytest.approx(points[0]["rail_force_kn"], rel=0.05)


def test_the_motor_control_is_chosen_for_the_reference_only() -> None:
    out = subprocess.run(
        [sys.executable, "-m", "emulator.cli", "characteristic", "--controller",
         "udp://127.0.0.1:9?peer=127.0.0.1:9", "--control", "vf", "--speeds-kmh", "20"],
        cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert out.returncode == 2
    assert "reference controller only" in out.stderr
