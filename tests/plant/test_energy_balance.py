"""Energy balance of a traction run and of a braking run (conservation of energy).

DC-link input = semiconductor losses + copper, iron and friction-windage losses + gear,
torsional-damping and slip losses + running resistance + friction brake + potential
energy + change of magnetic, kinetic and torsional-spring energy.
Target from the issue: within 0.5 % of the input.
"""

from __future__ import annotations

import pytest

from emulator.plant import Plant
from emulator.profiles.reader import load_trainset

from .conftest import TRAINSET, SlipFrequencyDrive


def balance(plant: Plant) -> tuple[float, float]:
    e = plant.energy()
    out = (e.semiconductor_conduction + e.semiconductor_switching + e.stator_copper
           + e.rotor_copper + e.gear_loss + e.slip_loss + e.running_resistance
           + e.friction_brake + e.potential + e.magnetic_stored + e.kinetic_stored
           + e.torsion_damping + e.torsion_stored + e.iron_loss + e.friction_windage)
    return e.dc_link_in, out


@pytest.mark.parametrize("curve_n", [0.0, 5.2e3])  # straight; a 300 m curve (Röckl)
def test_traction_run_on_a_gradient(curve_n: float) -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_gradient(0.005)
    plant.set_curve_resistance(curve_n)  # booked with the running resistance
    drive = SlipFrequencyDrive(plant, slip_hz=1.2, volts_per_hz=15.8)
    for _ in range(6000):
        plant.advance(drive.commands())
    e_in, e_out = balance(plant)
    assert e_in > 1e6
    assert e_out == pytest.approx(e_in, rel=5e-3)


def test_regenerative_braking_returns_energy() -> None:
    plant = Plant(load_trainset(TRAINSET), ideal_dc_links=True)
    plant.set_speed(20.0)
    drive = SlipFrequencyDrive(plant, slip_hz=-1.0, volts_per_hz=15.8)
    e_kin0 = plant.energy().kinetic_stored
    for _ in range(4000):
        plant.advance(drive.commands())
    e = plant.energy()
    assert e.dc_link_in < 0  # energy flows back into the link
    e_in, e_out = balance(plant)
    assert e_out - e_kin0 == pytest.approx(e_in, rel=5e-3, abs=5e-3 * e_kin0)
