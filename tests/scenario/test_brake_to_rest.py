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

from emulator.controller.effort import BRAKE_FADE_FROM_MPS, ROLL_BACK_M
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.protocol.events import ROLL_BACK
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


#: the held brake on a rise with the friction brake failed: the train stands, then rolls
#: back (30 per mille pulls 2.9 % of its weight, more than its running resistance)
RISE = """
[track]
[[track.gradient]]
from_m = -1000.0
permille = 30.0
"""


def _run(trainset: str, text: str):
    """The scenario text on a demo trainset, the plain-Python controller compared with
    the compiled one period by period; (the run, the trainset's parameters)."""
    twin = Twin()
    profile = PROFILES_DIR / "trainsets" / f"{trainset}.toml"
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "held.toml"
        path.write_text(text, encoding="utf-8")
        run = asyncio.run(run_scenario(load_scenario(path, trainset=profile),
                                       tune=twin.install))
    twin.assert_identical(at_least=len(run.recording.data) - 1)
    assert run.passed, [(r.spec.name, r.measured) for r in run.results if not r.passed]
    return run, load_trainset(profile)


def _switched_on_after_letting_go(run, params) -> list[int]:
    """For each inverter, how often its gates came on again after they first went off
    once the brake demand began (at 3 s): the drives let go where the fade ends and
    start again only on a speed past BRAKE_RESUME_MPS, not on a reading flickering at
    the fade's end (deciding afresh each period, they switched hundreds of times)."""
    t = run.recording.column("time_s")
    counts = []
    for converter in params.converters:
        gates = run.recording.column(f"u.{converter.name}.gates_enabled")[t > 3.0] > 0.5
        off = np.flatnonzero(gates[:-1] & ~gates[1:])
        assert off.size, converter.name  # (it let go)
        rest = gates[off[0] + 1:]
        counts.append(int(np.count_nonzero(~rest[:-1] & rest[1:])))
    return counts


def _count_at_rail_m(params) -> float:
    """One count of a 4x decoder at the rail, on the smallest wheel: the least travel
    a controller could see."""
    radii = [d / 2 for c in params.converters for d in c.wheel_diameters_m]
    return (2 * np.pi / (4 * params.sensors.encoder_lines) / params.drivetrain.gear_ratio
            * min(radii))


def _air_gap_torque(run, params) -> np.ndarray:
    return sum(run.recording.column(f"p.motor.torque_nm[{i}]")
               for i in range(params.motor_count))


@pytest.mark.parametrize("trainset", ["tern-25kv", "tern-15kv"])  # V/f, vector control
def test_the_electric_brake_fades_out_and_the_train_stays_at_rest(trainset: str) -> None:
    """From 20 km/h at 60 % braking to a stand: the train never rolls back (not by one
    encoder count, the least a controller could see), and from the stand on the drives'
    air-gap torque is nothing (below 1 % of what it was braking before the fade: the
    drives have let go; before they did, a V/f drive's torque at the stand was 9 % of
    it, decaying over seconds, and before the fade 88 %). The plain-Python controller
    follows the compiled one bit for bit through the ramp and the fade."""
    run, params = _run(trainset, HELD)
    rec = run.recording
    t, v = rec.column("time_s"), rec.column("p.train.speed_mps")
    torque = _air_gap_torque(run, params)
    x = rec.column("p.train.position_m")
    assert (np.maximum.accumulate(x) - x).max() < _count_at_rail_m(params)  # never back
    at_rest = v <= 0.0
    assert at_rest.any(), "the train did not come to rest"
    rest = int(np.flatnonzero(at_rest & (t > 3.0))[0])
    assert at_rest[rest:].all()  # and stays there
    assert t[-1] - t[rest] > 2.0  # (a while of it)
    # braking before the fade: the second before the train fell to the blend speed
    fade = int(np.flatnonzero(v <= 1.0)[0])
    braking = float(np.median(torque[fade - 1000:fade]))
    # (a braking worth the name: over half of 60 % of the motors' rated 1600 N m)
    assert braking < -0.5 * 0.6 * params.motor_count * 1600
    assert abs(torque[rest:]).max() < 0.01 * abs(braking), torque[rest:].min()
    assert _switched_on_after_letting_go(run, params) == [0] * len(params.converters)
    assert not (rec.column("u.tcu.event_code") == ROLL_BACK).any()  # no roll-back said


@pytest.mark.parametrize("trainset", ["tern-25kv", "tern-15kv"])  # V/f, vector control
def test_a_train_rolling_back_is_braked_against_its_motion(trainset: str,
                                                         monkeypatch) -> None:
    """The same held brake (from 10 km/h) on a 30 per mille rise with the friction brake
    failed (the scenario driver's brake unit does nothing): the train stops, then rolls
    back, and the drives brake it against its motion: their air-gap torque's power on
    the backward-turning rotors is braking, not motoring (a braking torque taken the way
    of forward running would drive the roll-back), and the roll-back stays slower than the
    fade's top speed, where the braking asked for (60 % of the curve) is more than the
    rise's pull: the fade settles where the two balance."""
    from emulator.scenario.driver import DriverProgram

    monkeypatch.setattr(DriverProgram, "_friction_brake", lambda self, plant, force: None)
    text = HELD.replace('initial_speed_kmh = 20.0', 'initial_speed_kmh = 10.0') + RISE
    run, params = _run(trainset, text)
    rec = run.recording
    v = rec.column("p.train.speed_mps")
    assert v.min() < -0.2  # it did roll back, past where the fade has ended
    back = v < 0.0
    power = sum(rec.column(f"p.motor.torque_nm[{i}]") * rec.column(f"p.motor.speed_rad_s[{i}]")
                for i in range(params.motor_count))
    # (1 % of the braking power, ours: as a drive starts again on the roll-back its
    # building flux gives a few hundred watts of the wrong sign for 0.3 s, 0.5 %; a
    # braking torque the wrong way round would be hundreds of kilowatts)
    assert power[back].max() <= 0.01 * -power[back].min(), (power[back].max(),
                                                           power[back].min())
    limits = params.effort_limits
    pull = params.train.mass_kg * 9.81 * 30.0 / 1000.0  # (the rise, per its weight)
    assert 0.6 * limits.braking_effort_n > pull  # (60 %: the demand table's)
    assert v.min() > -BRAKE_FADE_FROM_MPS, v.min()
    # let go at the stand, started again once on the roll-back (past BRAKE_RESUME_MPS)
    assert _switched_on_after_letting_go(run, params) == [1] * len(params.converters)
    _roll_back_reported_at_its_distance(run, params)


def _roll_back_reported_at_its_distance(run, params) -> None:
    """The controller reports the roll-back once, as the train has run ROLL_BACK_M back
    (the code then stays on the wire: no other event replaces it here). The distance
    is the one its encoders measure, the rotors' turning at the wheel's nominal radius
    (the controller's own; its axles' mean), here from the plant's rotor speeds summed
    over the frames since they last turned forward. Within two encoder counts at the
    rail (the count method's resolution at each end: Bose, *Modern Power Electronics and
    AC Drives*, speed by counting) and the distance run in four periods (the quick
    window's lag of two periods, and a frame between the plant's row and the reply)."""
    rec = run.recording
    code = rec.column("u.tcu.event_code")
    said = code == ROLL_BACK
    assert int(np.count_nonzero(said[1:] & ~said[:-1])) == 1  # said from one period on
    first = int(np.flatnonzero(said)[0])
    r_nominal = 0.5 * np.mean([d for c in params.converters for d in c.wheel_diameters_m])
    rotors = np.mean([rec.column(f"p.motor.speed_rad_s[{i}]")
                      for i in range(params.motor_count)], axis=0)
    wheel = rotors / params.drivetrain.gear_ratio * r_nominal
    turned = int(np.flatnonzero(wheel[:first] >= 0.0)[-1])  # the last frame not backwards
    frame = float(np.median(np.diff(rec.column("time_s"))))
    back = -float(np.sum(wheel[turned + 1:first + 1])) * frame
    count_m = _count_at_rail_m(params)
    lag_m = abs(float(wheel[first])) * 4 * frame
    assert abs(back - ROLL_BACK_M) <= 2 * count_m + lag_m, (back, count_m, lag_m)
