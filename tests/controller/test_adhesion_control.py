"""Adhesion control on wet rail (the plant's wet condition: Polach's wet shape, REFERENCES.md).

Target from the issue: the creep velocity stays bounded and the axles transmit at least
85 % of the adhesion that the plant's creep-force curve allows at that speed; without
adhesion control the wheels run away (the check is strict enough to fail a broken
controller).
"""

from __future__ import annotations

import numpy as np

from emulator.plant.drivetrain import RAIL_CONDITIONS, polach_force
from emulator.protocol.signal_map import MODES

from .conftest import rig_with_controller

ADHESION_FACTOR = 0.78  # wet rail (mu0 0.154) further reduced (a leaf film) to mu0 0.12,
# so the drive exceeds adhesion


async def _full_effort(rail: str, factor: float, enabled: bool, frames: int, every: int):
    """The reference at full effort from 6 m/s on a rail condition scaled by factor, with
    its adhesion control on or off: the plant, then shaft torques, creep forces and creep
    velocities of every motor, sampled each `every` frames for `frames` frames."""
    rig, tcu = await rig_with_controller()
    tcu.adhesion.enabled = enabled
    plant = rig.plant
    for m in range(plant.n_motors):
        plant.set_rail_condition(m, rail)
        plant.set_adhesion_factor(m, factor)
    plant.set_speed(6.0)
    await rig.run(frames=1500)
    rig.driver.mode, rig.driver.effort_demand = MODES_INV["accelerate"], 1.0
    shaft, forces, creeps = [], [], []
    for _ in range(frames // every):
        await rig.run(frames=rig.frame + every)
        shaft.append(plant.read("motor.shaft_torque_nm").copy())
        forces.append(plant.read("motor.creep_force_n").copy())
        creeps.append(plant.read("motor.creep_velocity_mps").copy())
    return plant, np.array(shaft), np.array(forces), np.array(creeps)


async def _wet_start(enabled: bool):
    plant, _, forces, creeps = await _full_effort("wet", ADHESION_FACTOR, enabled, 6000, 50)
    return plant, forces[-60:], creeps[-60:]


MODES_INV = {name: code for code, name in MODES.items()}


def _adhesion_limit(plant) -> float:
    """Highest creep force of one axle the plant's Polach curve allows at this speed, N."""
    v = plant.read("train.speed_mps")
    dt = plant.params.drivetrain
    k_a, k_s, mu0, a, b = RAIL_CONDITIONS["wet"]
    w = np.linspace(0.001, 3.0, 3000)
    return max(polach_force(x, v, dt.axle_load_n, dt.kalker_coefficient_n, k_a, k_s,
                            mu0 * ADHESION_FACTOR, a, b, dt.creep_reference_speed_mps)[0]
               for x in w)


def test_reaches_85_percent_of_wet_adhesion_with_bounded_creep(run) -> None:
    plant, forces, creeps = run(_wet_start(enabled=True))
    limit = _adhesion_limit(plant)
    assert forces.mean() >= 0.85 * limit
    # bounded: a slip controller lets the creep velocity reach a few km/h (common practice)
    assert np.abs(creeps).max() < 1.5
    assert np.abs(creeps).mean() < 0.6


def test_without_adhesion_control_the_wheels_run_away(run) -> None:
    _, _, creeps = run(_wet_start(enabled=False))
    assert np.abs(creeps).max() > 2.0


GREASY = 0.45  # the dry shape (steep past its peak) at 0.45: peak 0.13, below full effort;
# past the peak the falling slope can feed the torsional mode at up to 1.8 /s (the linear
# two-mass model of tests/plant/test_torsion.py at this rail)


def _ring(x: np.ndarray) -> float:
    """RMS of the part of x above about 10 Hz (a 33-sample moving mean removed)."""
    return float((x - np.convolve(x, np.ones(33) / 33, mode="same"))[20:-20].std())


async def _greasy_start(enabled: bool):
    _, shaft, _, creep = await _full_effort("dry", GREASY, enabled, 4000, 1)
    return shaft, creep


def test_at_the_limit_on_a_greasy_rail_no_stick_slip_builds_up(run) -> None:
    """On the bench a wheelset held past the creep peak rings up into a stick-slip limit
    cycle of the order of its mean torque (tests/plant/test_torsion.py). With the
    reference adhesion control (the rig's command delay of one frame) the axles are held
    near the peak: the creep stays bounded, and the shaft's ring neither builds up (the
    largest ring of the last 1.5 s within twice that of the first 1.5 s at the limit) nor
    reaches a tenth of the mean torque (a bound chosen here, no source)."""
    shaft, creep = run(_greasy_start(enabled=True))
    assert np.abs(creep).max() < 1.5  # a few km/h at most (common practice, as above)
    for m in range(shaft.shape[1]):
        windows = [_ring(shaft[k:k + 250, m]) for k in range(1000, 4000, 250)]
        assert max(windows[6:]) <= 2.0 * max(windows[:6])
        assert max(windows) < 0.1 * shaft[1000:, m].mean()


def test_on_a_greasy_rail_without_adhesion_control_the_wheels_run_away(run) -> None:
    _, creep = run(_greasy_start(enabled=False))
    assert np.abs(creep).max() > 2.0
