"""Axle-load transfer under traction: Delta Q = F h / a (bogie pitch) and
F_car (h_c - h_b) / L (car-body pitch), from the moment balances of rigid bodies at rest
on their suspension (Iwnicki (ed.), *Handbook of Railway Vehicle Dynamics*, traction
chapter; any locomotive text on weight transfer)."""

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


def test_leading_axle_unloaded_by_f_h_over_a() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(5.0)
    _pulling(plant, 2000.0, 500)
    dt = plant.params.drivetrain
    f = plant.read("motor.creep_force_n")
    q = plant.read("motor.axle_load_n")
    conv = plant.params.converters
    # car A: bogie INV-A1 (axles at 2.5 and 5.0 m) ahead of bogie INV-A2 (19.5, 22.0 m)
    a = conv[0].axle_positions_m[1] - conv[0].axle_positions_m[0]
    span = (sum(conv[1].axle_positions_m) - sum(conv[0].axle_positions_m)) / 2
    bogie = (f[0] + f[1]) * dt.traction_link_height_m / a
    car = (f[0] + f[1] + f[2] + f[3]) * (dt.coupler_height_m - dt.traction_link_height_m) / span
    by_hand = [dt.axle_load_n - bogie - car / 2, dt.axle_load_n + bogie - car / 2]
    # the plant moves the loads by the last sub-step's forces: steady forces, 0.1 % bound
    assert q[:2] == pytest.approx(by_hand, rel=1e-3)
    assert q[0] < q[2] < dt.axle_load_n < q[1] < q[3]  # front of each bogie, car front
    assert plant.read("motor.axle_load_n").sum() == pytest.approx(8 * dt.axle_load_n,
                                                                  rel=1e-9)


def test_slip_appears_first_on_the_leading_axle_of_a_bogie() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "wet")
    plant.set_speed(5.0)
    first = None
    for step in range(4000):  # the torque rises 1 N m a frame
        _pulling(plant, 500.0 + step, 1)
        creep = plant.read("motor.creep_velocity_mps")
        if creep.max() > 1.0:
            first = int(np.argmax(creep))
            break
    assert first is not None, "no axle slipped under the torque ramp"
    assert first in (0, 4)  # the leading axles of the leading bogies of cars A and B
    # in every bogie the leading axle slips further than the trailing one
    assert all(creep[2 * b] > creep[2 * b + 1] for b in range(4))
