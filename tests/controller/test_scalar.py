"""Scalar (V/f) control: speed regulation under rated load.

Common practice (no single source): open-loop V/f holds the speed within about 2-3 % of
rated speed under rated load; slip compensation does better.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.motor_scalar import ScalarControl
from emulator.plant import Commands, Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET


def speed_drop(compensate: bool) -> float:
    """(synchronous - loaded speed) / rated speed at 50 Hz with rated load torque."""
    cfg = config_from_profile(TRAINSET)
    machine = load_trainset(TRAINSET).machine
    plant = Plant.test_bench(machine, dc_link_v=cfg.link_nominal_v, refresh_each_substep=False,
                             frame_s=cfg.period_s, substep_s=125e-6)
    ctl = ScalarControl(cfg, 1)
    f_cmd, n_frames = 50.0, 6000
    for k in range(n_frames):
        f = min(f_cmd, f_cmd * k / 2000)  # ramp up in 2 s
        load = cfg.rated_torque_nm * min(max((k - 2500) / 1000, 0.0), 1.0)
        plant.free_shaft(0, load)
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        duties, _ = ctl.step(0.0, float(plant.read("motor.speed_rad_s")[0]), cfg.link_nominal_v,
                             f_command_hz=f, phase_currents=currents if compensate else None)
        plant.advance(Commands(np.array([duties]), np.array([True])))
    n = float(plant.read("motor.speed_rad_s")[0]) * 60 / (2 * math.pi)
    n_sync = 120 * f_cmd / (2 * cfg.pole_pairs)
    n_rated = 120 * cfg.rated_frequency_hz / (2 * cfg.pole_pairs) * (1 - cfg.rated_slip)
    torque = float(plant.read("motor.torque_nm")[0])
    assert torque == pytest.approx(cfg.rated_torque_nm, rel=0.02)  # it really carries the load
    return (n_sync - n) / n_rated


def test_vf_regulation_within_common_practice() -> None:
    drop = speed_drop(compensate=False)
    assert 0.0 < drop <= 0.03


def test_slip_compensation_does_better() -> None:
    plain = speed_drop(compensate=False)
    compensated = speed_drop(compensate=True)
    assert abs(compensated) < 0.5 * plain
