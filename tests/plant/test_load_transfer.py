"""Axle-load transfer: Delta Q = F h / a (bogie pitch) and F_car (h_c - h_b) / L (car-body
pitch), from the moment balances of rigid bodies on their suspension (Iwnicki (ed.),
*Handbook of Railway Vehicle Dynamics*, traction chapter; any locomotive text on weight
transfer). Positions are measured behind the train's front end; a force F > 0 pushes the
train forwards (traction running forwards, braking running backwards)."""

from __future__ import annotations

import numpy as np
import pytest

from emulator.plant import Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET


def _pulling(plant: Plant, torque_nm: float, frames: int) -> None:
    for _ in range(frames):
        for m in range(plant.n_motors):
            plant.set_rotor_torque(m, torque_nm)
        plant.advance(None)


def _by_hand(plant: Plant, f: np.ndarray) -> np.ndarray:
    """Each motored axle's load from the creep forces by the two moment balances."""
    p = plant.params
    dt = p.drivetrain
    x = [pos for c in p.converters for pos in c.axle_positions_m]
    q = np.full(8, dt.axle_load_n)
    for car in ((0, 1, 2, 3), (4, 5, 6, 7)):  # DC-A and DC-B: bogies (0, 1) and (2, 3)
        front, rear = car[:2], car[2:]
        span = (x[rear[0]] + x[rear[1]] - x[front[0]] - x[front[1]]) / 2
        f_car = f[list(car)].sum()
        for bogie, side in ((front, -1.0), (rear, 1.0)):
            a = x[bogie[1]] - x[bogie[0]]
            f_b = f[list(bogie)].sum()
            q[bogie[0]] += -f_b * dt.traction_link_height_m / a
            q[bogie[1]] += f_b * dt.traction_link_height_m / a
            for axle in bogie:
                q[axle] += side * f_car * (dt.coupler_height_m - dt.traction_link_height_m) / (
                    span * 2)
    return q


@pytest.mark.parametrize(("speed", "torque", "unloaded"), [
    (5.0, 2000.0, 0),  # traction forwards: the front axle of each bogie unloads
    (5.0, -2000.0, 1),  # electric braking forwards: the front axle loads
    (-5.0, -2000.0, 1),  # traction running backwards: the rear axle (now leading) unloads
])
def test_axle_loads_follow_the_moment_balances(speed: float, torque: float,
                                               unloaded: int) -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(speed)
    _pulling(plant, torque, 500)
    f = plant.read("motor.creep_force_n")
    _pulling(plant, torque, 1)  # the plant moves a frame's loads by the forces before it
    q = plant.read("motor.axle_load_n")
    expected = _by_hand(plant, f)
    q0 = plant.params.drivetrain.axle_load_n
    assert q - q0 == pytest.approx(expected - q0, rel=1e-9)
    assert q[unloaded] < q0 < q[1 - unloaded]
    assert q.sum() == pytest.approx(8 * q0, rel=1e-12)  # moved, not made


def test_slip_appears_first_on_the_leading_axle_of_a_bogie() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "wet")
    plant.set_speed(5.0)
    creep = np.zeros(plant.n_motors)
    for step in range(4000):  # the torque rises 1 N m a frame
        _pulling(plant, 500.0 + step, 1)
        creep = plant.read("motor.creep_velocity_mps")
        if creep.max() > 1.0:
            break
    assert creep.max() > 1.0, "no axle slipped under the torque ramp"
    # cars A and B are alike (the same positions in each car): their front axles
    # unload alike and slip together, ahead of every other axle
    assert creep[0] == pytest.approx(creep[4], rel=1e-3)  # but for a worn wheel in car A
    assert creep[0] > 1.0 and creep[[1, 2, 3, 5, 6, 7]].max() < 1.0
    # in every bogie the leading axle slips further than the trailing one
    assert all(creep[2 * b] > creep[2 * b + 1] for b in range(4))
