"""An open stator phase against scipy's ODE solver on the single-phased machine.

Reference: scipy.integrate.solve_ivp (DOP853) on the machine equations with the open
phase's current held at zero (tests/oracles.py, written independently of the plant's
projection). The 3 hp textbook machine on a 220 V 60 Hz source, shaft held at 3 % slip,
phase a open from the start. Textbook signature (Fitzgerald, Kingsley and Umans,
single-phasing): no current in the open phase, torque pulsating at twice the supply
frequency.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from emulator.plant import Plant
from tests.oracles import single_phased_machine_rhs

from .conftest import machine_profile

DURATION_S = 0.5
F_HZ = 60.0
SLIP = 0.03


@pytest.fixture(scope="module")
def runs():
    machine = machine_profile("textbook-3hp")
    amp = 220 * math.sqrt(2 / 3)
    omega_m = (1 - SLIP) * 2 * math.pi * F_HZ / machine.pole_pairs
    plant = Plant.test_bench(machine, refresh_each_substep=True)
    plant.drive_from_sine(0, amp, F_HZ)
    plant.impose_speed(0, omega_m)
    plant.set_open_phase(0, 0)
    times, current, torque = [], [], []
    for _ in range(round(DURATION_S / plant.params.frame_s)):
        plant.advance(None)
        times.append(plant.time_s)
        current.append(plant.stator_current(0))
        torque.append(float(plant.read("motor.torque_nm")[0]))
    lm = machine.magnetising_h
    rhs, currents = single_phased_machine_rhs(
        machine.stator_leakage_h + lm, machine.rotor_leakage_h + lm, lm,
        machine.stator_resistance_ohm, machine.rotor_resistance_ohm, machine.pole_pairs,
        omega_m, lambda t: amp * math.sin(2 * math.pi * F_HZ * t))
    ref = solve_ivp(rhs, (0, DURATION_S), [0.0, 0.0, 0.0], method="DOP853", rtol=1e-10,
                    atol=1e-12, t_eval=np.array(times))
    assert ref.success
    ref_current, ref_torque = currents(ref.y)
    return np.array(times), np.array(current), np.array(torque), ref_current, ref_torque


def test_open_phase_carries_no_current(runs) -> None:
    _, current, _, _, _ = runs
    # i_a = Re(i_s) in the amplitude-invariant Clarke transform
    assert np.abs(current.real).max() <= 1e-9 * np.abs(current).max()


def test_remaining_phases_follow_the_single_phased_machine(runs) -> None:
    _, current, _, ref_current, _ = runs
    assert np.abs(current.imag - ref_current).max() <= 0.01 * np.abs(ref_current).max()


def test_torque_follows_and_pulsates_at_twice_the_supply_frequency(runs) -> None:
    times, _, torque, _, ref_torque = runs
    assert np.abs(torque - ref_torque).max() <= 0.02 * np.abs(ref_torque).max()
    last = times > DURATION_S - 0.25  # steady: a whole number of supply periods
    spectrum = np.abs(np.fft.rfft(torque[last] - torque[last].mean()))
    freqs = np.fft.rfftfreq(int(last.sum()), times[1] - times[0])
    assert freqs[np.argmax(spectrum)] == pytest.approx(2 * F_HZ, abs=4.0)
