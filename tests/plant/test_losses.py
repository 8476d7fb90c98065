"""Iron, friction and windage losses of the Tern's motor at its rated point against the
exact equivalent circuit with a core-loss resistance across the magnetising branch
(Fitzgerald, Kingsley & Umans, *Electric Machinery*, ch. 6), in tests/oracles.py."""

from __future__ import annotations

import math

import pytest

from emulator.plant import Plant
from tests.oracles import EquivalentCircuit, efficiency_with_core_loss

from .conftest import machine_profile, steady_on_dynamometer

RATED_SLIP = 0.0124  # the TM-310 profile's rated point: 1200 V, 62 Hz, 1.24 % slip


def test_rated_point_efficiency_matches_the_circuit_with_core_loss() -> None:
    machine = machine_profile("tern-tm310")
    plant = Plant.test_bench(machine, refresh_each_substep=False, frame_s=10e-3)
    f = machine.rated_frequency_hz
    plant.drive_from_sine(0, machine.rated_voltage_v * math.sqrt(2 / 3), f)
    steady_on_dynamometer(plant, RATED_SLIP, f, settle_s=4.0)
    e0 = plant.energy()
    for _ in range(100):  # one second, a whole number of periods
        plant.advance(None)
    e1 = plant.energy()
    p_in = e1.motor_terminals - e0.motor_terminals
    p_out = e1.load - e0.load  # what the dynamometer takes
    p_iron = e1.iron_loss - e0.iron_loss
    # the oracle at the plant's magnetising inductance in use (the main flux saturates
    # at the rated point: the curve's operating point, not the profile's unsaturated L_m)
    w = 2 * math.pi * f
    circuit = EquivalentCircuit(
        r_s=machine.stator_resistance_ohm, x_ls=w * machine.stator_leakage_h,
        x_m=w * float(plant.read("motor.magnetising_inductance_h")[0]),
        x_lr=w * machine.rotor_leakage_h, r_r=machine.rotor_resistance_ohm,
        v_phase_rms=machine.rated_voltage_v / math.sqrt(3), f_hz=f, poles=2 * machine.pole_pairs)
    friction = machine.friction_windage_w * (1 - RATED_SLIP) ** 2  # P_fw ~ w^2
    oracle = efficiency_with_core_loss(circuit, RATED_SLIP, machine.core_loss_resistance_ohm,
                                       friction)
    # 0.5 % (the bound): the plant's core-loss resistance sits across the
    # terminals, the circuit's across the magnetising branch (a stator drop apart)
    assert p_out / p_in == pytest.approx(oracle["efficiency"], abs=5e-3)
    # the plant's iron loss is the terminal voltage's, 3 V^2 / R_c, by hand (the circuit's,
    # 3 E^2 / R_c, is smaller by the stator's drop: 12 % here, 0.2 % of the efficiency)
    v_rms = machine.rated_voltage_v / math.sqrt(3)
    assert p_iron == pytest.approx(3 * v_rms**2 / machine.core_loss_resistance_ohm, rel=1e-9)
    assert 0.94 <= p_out / p_in <= 0.955  # the usual range of such motors (common practice)
