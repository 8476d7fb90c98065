"""Friction braking on a contaminated rail through the train's brake unit: without
wheel-slide protection the braked wheels lock and slide; with it they keep turning and
brake harder than a sliding wheel can (the point of a WSP; EN 15595 sets its test
conditions, the bounds here are common practice with no source)."""

from __future__ import annotations

import numpy as np

from emulator.plant import Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.drivetrain import RAIL_CONDITIONS, creep_curve_peak, polach_force
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.scenario.brake_unit import BrakeUnit

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
DEMAND = 300e3  # 18.75 kN an axle: mu 0.16 asked of a rail giving about 0.05


def _brake(mode: str) -> tuple[np.ndarray, np.ndarray, Plant]:
    """5 s of braking from 25 m/s: mode 'wsp' (the unit as shipped), 'off' (protection
    disabled) or 'vent' (every motored cylinder vented: a protection that only lets go)."""
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "contaminated")
    plant.set_speed(25.0)
    unit = BrakeUnit(plant, 1e-3, enabled=mode == "wsp")
    locked, forces = [], []
    for _ in range(5000):
        if mode == "vent":
            plant.set_brake_force(DEMAND, np.ones(plant.n_motors))
        else:
            unit.apply(DEMAND)
        plant.advance(None)
        locked.append(plant.read("motor.wheelset_speed_rad_s") == 0.0)
        forces.append(-plant.read("motor.creep_force_n"))
    return np.array(locked), np.array(forces), plant


def _sliding_and_peak(plant: Plant) -> tuple[float, float]:
    """A locked wheel's force (the contact law at a slip of -v) and the creep curve's peak
    at the present speed, N, on the static axle load."""
    dt = plant.params.drivetrain
    v = plant.read("train.speed_mps")
    q = dt.axle_load_n
    sliding = -polach_force(-v, v, q, dt.kalker_coefficient_n,
                            *RAIL_CONDITIONS["contaminated"], dt.creep_reference_speed_mps)[0]
    peak = creep_curve_peak("contaminated", v, q, dt.kalker_coefficient_n,
                            dt.creep_reference_speed_mps)[0] * q
    return sliding, peak


def test_without_protection_the_wheels_lock() -> None:
    locked, _, plant = _brake("off")
    assert plant.read("train.speed_mps") > 3.0
    assert locked[-1000:].all()


def test_with_protection_the_wheels_turn_and_brake_harder_than_sliding() -> None:
    locked, forces, plant = _brake("wsp")
    assert not locked.any()
    sliding, peak = _sliding_and_peak(plant)
    achieved = forces[2000:].mean()  # the motored axles over the last 3 s
    assert achieved > 1.1 * sliding
    assert achieved > 0.5 * peak
    _, _, vented = _brake("vent")
    # and the train stops sooner than with the motored brakes let go altogether
    assert plant.read("train.speed_mps") < vented.read("train.speed_mps") - 0.3


def test_a_release_after_braking_lets_go_and_a_second_release_keeps_it_so() -> None:
    # The unit skips a release that follows a release (the driver releases every frame
    # it does not brake): the one after braking must still zero every cylinder's demand
    # and close the valves, and a brake after it must apply again.
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(25.0)
    unit = BrakeUnit(plant, 1e-3)
    demands = plant.mu[:, L.MU_BRAKE_DEMAND]  # per motored axle
    for force in (DEMAND, 0.0, 0.0, DEMAND, 0.0):
        unit.apply(force)
        expected = DEMAND / max(plant.params.train.axle_count, plant.n_motors)
        assert np.all(demands == (expected if force else 0.0)), force
        if force:
            unit.vent[0] = 1.0  # as if an axle had slid: the release closes its valve
        else:
            assert not unit.vent.any() and unit.v_ref is None
