"""Inverter average model, blocked gates and command validation."""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import CommandError, Commands, Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, SlipFrequencyDrive


def applied_voltage(plant: Plant) -> complex:
    return complex(plant.read("inverter.voltage_alpha_v")[0],
                   plant.read("inverter.voltage_beta_v")[0])


def test_applied_voltage_is_clarke_of_leg_voltages_at_zero_current() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    duty = np.array([[0.8, 0.4, 0.3]] * plant.n_inverters)
    plant.advance(Commands(duty, np.ones(plant.n_inverters, dtype=bool)), 50e-6)
    udc = 1800.0
    v = (duty[0] - 0.5) * udc  # no current yet: no dead-time or drop term
    expected = complex((2 * v[0] - v[1] - v[2]) / 3, (v[1] - v[2]) / math.sqrt(3))
    got = applied_voltage(plant)
    assert got == pytest.approx(expected, rel=1e-12)


def test_dead_time_reduces_the_voltage_against_the_current() -> None:
    # dead-time error t_d f_sw U_dc per leg against sgn(i) (common practice, REFERENCES.md)
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(500):
        plant.advance(drive.commands())
    cmd = drive.commands()
    i_a = plant.read("inverter.phase_current_a_a")[0]
    plant.advance(cmd, 50e-6)
    u_ideal = (cmd.duty[0] - 0.5) * 1800.0
    ideal = complex((2 * u_ideal[0] - u_ideal[1] - u_ideal[2]) / 3,
                    (u_ideal[1] - u_ideal[2]) / math.sqrt(3))
    got = applied_voltage(plant)
    assert abs(i_a) > 20
    assert np.sign((got - ideal).real) == -np.sign(i_a) or abs((got - ideal).real) < 1.0


def test_blocked_gates_stop_the_current_at_zero_without_chatter() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(1500):
        plant.advance(drive.commands())
    assert abs(plant.read("inverter.phase_current_a_a")).max() > 50
    blocked = Commands.blocked(plant.n_inverters)
    peaks = []
    for _ in range(200):
        plant.advance(blocked)
        peaks.append(max(abs(plant.read(f"inverter.phase_current_{x}_a")).max() for x in "abc"))
    assert max(peaks[50:]) < 1e-6  # decayed to zero and stays there
    assert np.all(np.isfinite(plant.read("motor.torque_nm")))


def test_back_emf_above_the_link_drives_current_into_it() -> None:
    # a fluxed machine spinning fast with blocked gates and a low link: uncontrolled
    # rectification through the freewheeling diodes
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(40.0)
    drive = SlipFrequencyDrive(plant, slip_hz=0.0, volts_per_hz=15.8)
    for _ in range(300):
        plant.advance(drive.commands())
    plant.set_dc_link_voltage(0, 300.0)
    plant.advance(Commands.blocked(plant.n_inverters))
    assert plant.read("dc_link.current_a")[0] < -10.0


@pytest.mark.parametrize("bad", [np.nan, np.inf, -0.1, 1.5])
def test_non_finite_or_out_of_range_duty_is_rejected(bad: float) -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    cmd = Commands.blocked(plant.n_inverters)
    cmd.duty[1, 2] = bad
    before = plant.ms.copy()
    with pytest.raises(CommandError):
        plant.advance(cmd)
    assert np.array_equal(plant.ms, before)  # nothing entered the state


def test_wrong_shape_and_bad_inputs_are_rejected() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    with pytest.raises(CommandError):
        plant.advance(Commands(np.full((2, 3), 0.5), np.ones(2, dtype=bool)))
    with pytest.raises(CommandError):
        plant.set_gradient(float("nan"))
    with pytest.raises(CommandError):
        plant.advance(None, float("inf"))
