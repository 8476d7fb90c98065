"""The friction brake acts per axle: a torque at the wheelset through the wheel-rail
contact, after the brake cylinder's lag; it can lock a wheel and slide it."""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET
from .test_energy_balance import balance


def test_cylinder_follows_the_demand_with_its_first_order_lag() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    tau = plant.params.train.brake_cylinder_time_constant_s
    axles = plant.params.train.axle_count
    plant.set_brake_force(160e3)
    for _ in range(round(tau / 1e-3)):
        plant.advance(None)
    # a first-order lag reaches 1 - 1/e of a step after one time constant (exactly: the
    # kernel steps the lag's own solution)
    share = 160e3 / axles
    assert plant.read("motor.brake_force_n") == pytest.approx(share * (1 - math.exp(-1)),
                                                               rel=1e-9)


def test_braking_on_dry_rail_the_wheels_roll_and_the_books_close() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(20.0)
    e0 = plant.energy()
    plant.set_brake_force(150e3)  # 0.77 m/s^2 of a 195 t train: far inside dry adhesion
    for _ in range(4000):
        plant.advance(None)
    creep = plant.read("motor.creep_velocity_mps")
    assert np.all(np.abs(creep) < 0.05)  # rolling, a small braking creep
    assert np.all(creep < 0)
    e_in, e_out = balance(plant)
    assert e_out - e0.kinetic_stored == pytest.approx(e_in, abs=5e-3 * e0.kinetic_stored)
    # 8 of the 16 axles are motored: half the brake's work is done at their wheels (less
    # their creep's share, w / v < 0.3 %), half on the unmotored axles
    at_wheels = plant.ms[:, L.MS_E_BRAKE].sum()
    assert at_wheels == pytest.approx(plant.ts[L.TS_E_BRAKE], rel=1e-2)


def test_on_a_contaminated_rail_a_braked_wheel_locks_and_slides() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "contaminated")  # mu 0.04-0.05 at this speed
    plant.set_speed(20.0)
    e0 = plant.energy()
    plant.set_brake_force(300e3)  # 18.75 kN an axle: mu 0.16 needed, 0.05 offered
    for _ in range(3000):
        plant.advance(None)
    wheel = plant.read("motor.wheelset_speed_rad_s")
    assert np.all(wheel == 0.0)  # locked
    assert plant.read("train.speed_mps") > 5.0  # and sliding along the rail
    e_in, e_out = balance(plant)
    assert e_out - e0.kinetic_stored == pytest.approx(e_in, abs=5e-3 * e0.kinetic_stored)
