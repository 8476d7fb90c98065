"""Train dynamics: Davis resistance, gradient, standstill and roll-back."""

from __future__ import annotations

import pytest
from scipy import constants

from emulator.plant import Plant
from emulator.plant.train import davis_passenger_imperial_n_per_t, davis_resistance
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, SlipFrequencyDrive


def test_davis_imperial_form_converted_with_scipy_constants() -> None:
    # Davis (General Electric Review 29, 1926), passenger form in lbf per short ton.
    # Unit conversion checked against scipy.constants, not against our own constant.
    w, n, area, v_mph = 15.0, 4, 110.0, 60.0
    lbf_per_ton = 1.3 + 29 / w + 0.03 * v_mph + 0.00034 * area * v_mph**2 / (w * n)
    n_per_tonne = lbf_per_ton * constants.pound_force / (constants.short_ton / 1000)
    assert davis_passenger_imperial_n_per_t(v_mph, w, n, area) == pytest.approx(n_per_tonne)


def test_davis_abc_form() -> None:
    assert davis_resistance(-10.0, 2000.0, 30.0, 5.0) == pytest.approx(2000 + 300 + 500)


def test_no_creeping_drift_at_zero_effort_on_the_level() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for _ in range(2000):
        plant.advance(None)
    assert plant.read("train.speed_mps") == 0.0
    assert plant.read("train.position_m") == 0.0


def test_rolls_back_on_a_gradient_with_brakes_off_and_holds_with_brakes_on() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_gradient(0.03)  # 30 per mille uphill: m g 0.03 >> Davis A
    plant.set_brake_force(100e3)
    for _ in range(1000):
        plant.advance(None)
    assert plant.read("train.speed_mps") == 0.0
    plant.set_brake_force(0.0)
    for _ in range(2000):
        plant.advance(None)
    mass = plant.params.train.mass_kg
    expected_accel = -(mass * 9.80665 * 0.03 / (1 + 0.03**2) ** 0.5
                       - plant.params.train.davis_a_n) / (mass * 1.025)
    assert plant.read("train.speed_mps") < 0.0
    # rotating wheelsets add a little inertia beyond the allowance: within 6 %
    assert plant.read("train.acceleration_mps2") == pytest.approx(expected_accel, rel=0.06)
    creep = plant.read("motor.creep_velocity_mps")
    assert abs(creep).max() < 0.01  # the wheels roll back with the train, no sliding


def test_start_from_standstill_at_the_default_substep_is_stable() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(3000):
        plant.advance(drive.commands())
    v = plant.read("train.speed_mps")
    creep = plant.read("motor.creep_velocity_mps")
    assert 0.5 < v < 10.0
    assert abs(creep).max() < 0.2  # dry rail, moderate effort: micro-slip only
