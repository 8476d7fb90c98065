"""Fakes and helpers for the plant tests: machines on a test bench."""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.profiles.reader import PROFILES_DIR, load_machine, load_trainset
from emulator.rig.open_loop import SlipFrequencyVf

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def wheel_radii(params) -> np.ndarray:
    """Each motored axle's wheel radius, m, in the plant's motor order."""
    return np.array([d / 2 for c in params.converters for d in c.wheel_diameters_m])


def windage_coefficient(machine) -> float:
    """c_fw of the motor's friction and windage, a drag c_fw w_m on the rotor that takes
    the profile's P_fw at the synchronous speed of the rated frequency: P_fw / w_sync^2
    (the profile's definition)."""
    w_sync = 2 * math.pi * machine.rated_frequency_hz / machine.pole_pairs
    return machine.friction_windage_w / w_sync ** 2


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


class SlipFrequencyDrive:
    """The open-loop slip-frequency V/f source fed from the plant's own speed and link."""

    def __init__(self, plant: Plant, slip_hz: float, volts_per_hz: float,
                 boost_v: float = 20.0) -> None:
        self.plant = plant
        self.slip_hz = slip_hz
        # an open-loop source switched on at speed at full voltage draws an inrush past
        # the gate drivers' hardware trip, as it would on a real drive; these tests are
        # about the machines and the books, the trip has its own (test_protection.py)
        plant.ipar[:, L.IP_HW_ON] = 0.0
        self.vf = SlipFrequencyVf(plant.n_inverters, plant.params.machine.pole_pairs,
                                  volts_per_hz, boost_v, max_modulation=0.95)

    def commands(self) -> Commands:
        p = self.plant
        duty = self.vf.step(float(np.mean(p.read("motor.speed_rad_s"))), self.slip_hz,
                            float(p.read("dc_link.voltage_v")[0]), p.params.frame_s)
        return Commands(duty.copy(), np.ones(p.n_inverters, dtype=bool))
