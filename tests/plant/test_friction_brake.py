"""The friction brake acts per axle: a torque at the wheelset through the wheel-rail
contact, after the brake cylinder's lag; it can lock a wheel and slide it."""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.drivetrain import RAIL_CONDITIONS, polach_force
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, wheel_radii, windage_coefficient
from .test_energy_balance import SUBSTEPS_S, _plant, balance, closes


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


def _braking_on_dry_rail(substep_s: float):
    plant = _plant(substep_s)
    p = plant.params
    v0, demand, t_end = 20.0, 150e3, 4.0
    plant.set_speed(v0)
    e0 = plant.energy()
    plant.set_brake_force(demand)  # 0.77 m/s^2 of a 195 t train: far inside dry adhesion
    speeds, work = [v0], 0.0
    r = wheel_radii(p)
    last = plant.read("motor.brake_force_n") * r * plant.read("motor.wheelset_speed_rad_s")
    for _ in range(round(t_end / 1e-3)):
        plant.advance(None)
        speeds.append(plant.read("train.speed_mps"))
        now = plant.read("motor.brake_force_n") * r * plant.read("motor.wheelset_speed_rad_s")
        work += 0.5 * (last + now).sum() * 1e-3  # trapezoid of F_b r w_w over the frames
        last = now
    e_in, e_out = balance(plant)
    return plant, e0, np.array(speeds), work, e_out - e0.kinetic_stored - e_in


def test_braking_on_dry_rail_follows_newton_and_the_books_close() -> None:
    plant, e0, v, work, residual = _braking_on_dry_rail(SUBSTEPS_S[0])
    p = plant.params
    tr, dt = p.train, p.drivetrain
    v0, demand, t_end = 20.0, 150e3, 4.0
    r = wheel_radii(p)
    creep = plant.read("motor.creep_velocity_mps")
    assert np.all((creep < 0) & (creep > -0.05))  # rolling, a small braking creep
    # Newton with the wheels rolling along (momentum of the train and the wheelsets):
    #   m (1 + k) dv/dt + sum J_eff / r^2 d(v + w)/dt = -F_b(t) - (A + B v + C v^2) - F_fw,
    # w the creep velocity (each wheel turns at (v + w) / r), F_b(t) = F (1 - e^(-t/tau))
    # (the cylinders' lag). The rotor side (the rotor and the gear wheel, i^2 J_r + J_g)
    # slows down by pushing its wheelset through the coupling, so the gear passes its
    # inertia torque and the motors' friction and windage (a drag c_fw w_m, c_fw =
    # P_fw / w_sync^2 at the rated frequency: the profile's definition) to the wheel
    # with the efficiency eta (power towards the wheel): J_eff = J_w + eta (i^2 J_r +
    # J_g), F_fw = sum eta i^2 c_fw v / r^2 (w_m = i v / r). The Davis and the drag's
    # integrals over the plant's own speed trace (3 % and 0.8 % of the total).
    tau = tr.brake_cylinder_time_constant_s
    eta, i = dt.gear_efficiency, dt.gear_ratio
    j_eff = dt.wheelset_inertia_kgm2 + eta * (dt.gear_inertia_kgm2
                                              + i ** 2 * p.machine.rotor_inertia_kgm2)
    m_train = tr.mass_kg * (1 + tr.rotating_mass_allowance)
    davis = tr.davis_a_n + tr.davis_b_n_per_mps * v + tr.davis_c_n_per_mps2 * v ** 2
    windage = (eta * i ** 2 * windage_coefficient(p.machine) / r ** 2).sum() * v
    impulse = (demand * (t_end - tau * (1 - math.exp(-t_end / tau)))
               + np.trapezoid(davis + windage, dx=1e-3))
    momentum = ((m_train + (j_eff / r ** 2).sum()) * (v0 - v[-1])
                - (j_eff / r ** 2 * creep).sum())  # (the creep started at 0)
    # left out: the first tenth of a second, before the rotor side pushes (its drag then
    # passes the gear the other way: a 2.5 % change of under 1e-3 of the total), and the
    # trapezoid over 1 ms frames (1e-6); 1e-4, a margin of our choosing over both
    assert momentum == pytest.approx(impulse, rel=1e-4)
    # the brake's work at the motored wheels as the kernel books it, against F_b r w_w
    # integrated here from the frames (trapezoid on smooth signals: 1e-4)
    assert plant.ms[:, L.MS_E_BRAKE].sum() == pytest.approx(work, rel=1e-4)
    converted = e0.kinetic_stored - plant.energy().kinetic_stored
    closes([residual, _braking_on_dry_rail(SUBSTEPS_S[1])[-1]], converted)


def _sliding(substep_s: float):
    plant = _plant(substep_s)
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, "contaminated")
    plant.set_speed(20.0)
    e0 = plant.energy()
    plant.set_brake_force(300e3)  # 18.75 kN an axle where the rail gives about 5 kN
    for _ in range(3000):
        plant.advance(None)
    e_in, e_out = balance(plant)
    return plant, e0, e_out - e0.kinetic_stored - e_in


def test_on_a_contaminated_rail_a_braked_wheel_locks_and_slides() -> None:
    plant, e0, residual = _sliding(SUBSTEPS_S[0])
    assert np.all(plant.read("motor.wheelset_speed_rad_s") == 0.0)  # locked
    v = plant.read("train.speed_mps")
    assert v > 5.0  # and sliding along the rail
    # a locked wheel's force is the contact law's at a slip velocity of -v, on each
    # axle's own load (Polach's formula evaluated here, REFERENCES.md)
    p = plant.params
    dt = p.drivetrain
    loads = plant.read("motor.axle_load_n")
    sliding = np.array([polach_force(-v, v, q, dt.kalker_coefficient_n,
                                     *RAIL_CONDITIONS["contaminated"],
                                     dt.creep_reference_speed_mps)[0] for q in loads])
    assert plant.read("motor.creep_force_n") == pytest.approx(sliding, rel=1e-3)
    # Newton for the sliding train (the locked wheelsets do not turn): the unmotored axles
    # brake with what the rail allows them, mu0 Q each (the plant's stated model)
    tr = p.train
    unmotored = (tr.axle_count - p.motor_count) * RAIL_CONDITIONS["contaminated"][2] * (
        dt.axle_load_n)
    resist = tr.davis_a_n + tr.davis_b_n_per_mps * v + tr.davis_c_n_per_mps2 * v * v
    accel = (sliding.sum() - unmotored - resist) / (tr.mass_kg * (1 + tr.rotating_mass_allowance))
    assert plant.read("train.acceleration_mps2") == pytest.approx(accel, rel=1e-3)
    converted = e0.kinetic_stored - plant.energy().kinetic_stored
    closes([residual, _sliding(SUBSTEPS_S[1])[-1]], converted)
