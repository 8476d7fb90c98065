"""A brake demand held to a stand: the electric brake fades out towards standstill and
the friction brake holds the train.

A braking torque kept at rest would drive the train backwards against its friction
brake (and with none, drive it backwards): before the fade, the drives of the 25 kV
Tern went on braking at 88 % of their torque at rest, held only by the friction brake.
The scenario driver's demand table is used here, as an operator's brake handle would
be: it keeps asking for braking below the blend speed, where its step programme would
have handed the stop to the friction brake itself."""

from __future__ import annotations

import asyncio
import tempfile
from pathlib import Path

import numpy as np
import pytest

from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.scenario import load_scenario, run_scenario
from tests.controller.twin import Twin

HELD = """
[scenario]
name = "brake held to a stand"
description = "an operator's brake demand kept on through the stop"
trainset = "../trainsets/tern-25kv.toml"
duration_s = 20.0
initial_speed_kmh = 20.0

[driver]
[[driver.demand]]
at_s = 0.0
mode = "coast"
effort = 0.0
[[driver.demand]]
at_s = 3.0
mode = "brake"
effort = 0.6

[[check]]
name = "no protective trip"
not_raised = "trip"
"""


@pytest.mark.parametrize("trainset", ["tern-25kv", "tern-15kv"])  # V/f, vector control
def test_the_electric_brake_fades_out_and_the_train_stays_at_rest(trainset: str) -> None:
    """From 20 km/h at 60 % braking to a stand: the train never rolls back (not by one
    encoder count, the least a controller could see), and three rotor time constants
    after it comes to rest (the time a rotor's currents take to fall to e^-3, 5 %, of
    what they were: a first-order decay, tau_r = L_r / R_r) the drives' air-gap torque
    is below 5 % of what it was braking before the fade. The plain-Python controller
    follows the compiled one bit for bit through the ramp and the fade."""
    twin = Twin()
    profile = PROFILES_DIR / "trainsets" / f"{trainset}.toml"
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "held.toml"
        path.write_text(HELD, encoding="utf-8")
        run = asyncio.run(run_scenario(load_scenario(path, trainset=profile),
                                       tune=twin.install))
    twin.assert_identical(at_least=len(run.recording.data) - 1)
    assert run.passed, [(r.spec.name, r.measured) for r in run.results if not r.passed]
    params = load_trainset(profile)
    radii = [d / 2 for c in params.converters for d in c.wheel_diameters_m]
    machine = params.machine
    tau_r = (machine.magnetising_h + machine.rotor_leakage_h) / machine.rotor_resistance_ohm
    rec = run.recording
    t, v = rec.column("time_s"), rec.column("p.train.speed_mps")
    torque = sum(rec.column(f"p.motor.torque_nm[{i}]")
                 for i in range(params.motor_count))
    x = rec.column("p.train.position_m")
    count_m = (2 * np.pi / (4 * params.sensors.encoder_lines)  # a 4x decoder's
               / params.drivetrain.gear_ratio * min(radii))          # count at the rail
    assert (np.maximum.accumulate(x) - x).max() < count_m  # never backwards
    at_rest = v <= 0.0
    assert at_rest.any(), "the train did not come to rest"
    rest = int(np.flatnonzero(at_rest & (t > 3.0))[0])
    assert at_rest[rest:].all()  # and stays there
    # braking before the fade: the second before the train fell to the blend speed
    fade = int(np.flatnonzero(v <= 1.0)[0])
    braking = float(np.median(torque[fade - 1000:fade]))
    # (a braking worth the name: over half of 60 % of the motors' rated 1600 N m)
    assert braking < -0.5 * 0.6 * params.motor_count * 1600
    later = int(np.searchsorted(t, t[rest] + 3 * tau_r))
    assert later < len(t) - 1, "the run ends too soon after the stand"
    assert abs(torque[later:]).max() < 0.05 * abs(braking), (t[rest], torque[later:].min())
