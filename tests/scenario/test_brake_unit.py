"""Friction braking on a contaminated rail: without wheel-slide protection the braked
wheels lock and slide; with it they keep turning (common practice of WSP: no wheel stays
locked while the train moves)."""

from __future__ import annotations

import numpy as np

from emulator.plant import Plant
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.scenario.brake_unit import BrakeUnit

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def _brake(enabled: bool) -> tuple[np.ndarray, float]:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "contaminated")
    plant.set_speed(25.0)
    unit = BrakeUnit(plant, 1e-3, enabled=enabled)
    locked = []
    for _ in range(5000):
        unit.apply(300e3)  # 18.75 kN an axle: mu 0.16 asked of a rail giving 0.05
        plant.advance(None)
        locked.append(plant.read("motor.wheelset_speed_rad_s") == 0.0)
    return np.array(locked), plant.read("train.speed_mps")


def test_without_protection_the_wheels_lock() -> None:
    locked, v = _brake(enabled=False)
    assert v > 3.0
    assert locked[-1000:].all()


def test_with_protection_no_wheel_stays_locked() -> None:
    locked, v = _brake(enabled=True)
    assert v > 3.0
    assert not locked.any()  # against locked for good without protection
    assert v < 24.0  # and the brake still works
