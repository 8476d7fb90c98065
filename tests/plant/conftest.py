"""Fakes and helpers for the plant tests: machines on a test bench."""

from __future__ import annotations

import math

import pytest

from emulator.plant import Plant
from emulator.profile import PROFILES_DIR, load_machine, load_trainset

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def machine_profile(name: str):
    """A shipped machine profile by name."""
    return load_machine(PROFILES_DIR / "machines" / f"{name}.toml")


def steady_on_dynamometer(plant: Plant, slip: float, f_hz: float, settle_s: float) -> None:
    """Hold motor 0 at the speed of a slip and run until the transients have died out."""
    pole_pairs = plant.params.machine.pole_pairs
    plant.impose_speed(0, (1 - slip) * 2 * math.pi * f_hz / pole_pairs)
    for _ in range(round(settle_s / plant.params.frame_s)):
        plant.advance(None)


@pytest.fixture(scope="session")
def trainset_params():
    """The demo trainset's parameters."""
    return load_trainset(TRAINSET)
