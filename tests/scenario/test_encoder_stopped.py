"""An encoder that stops counting at a standstill is judged failed once the train moves,
and the train starts as one whose drive runs on the neighbour's reading.

The shipped speed-sensor loss (INV-A1.m2's quadrature channel lost) moved to 1 s,
before the switch-on: its count then stands still from the start, and no jump ever
shows (speed_plausibility.SENSOR_JUMP). Measured before the mend, on the vector trainset:
the slip control's reference (the slowest wheel in traction, adhesion.py) stayed at the
dead encoder's zero, every other axle seemed to slip, and the train crawled at the
0.35 m/s creep limit for the whole 30 s, with the wheel-slip event raised throughout.
Both of INV-A1's encoders lost at once (a bogie's shared supply) did the same.

What the rule claims (SpeedPlausibility.judge_stopped): a driven wheel cannot stand
while the train moves (its creep has the tractive force's sign, as any adhesion law
has it: Kalker's theory, Polach's model). So an encoder is judged failed STOPPED_S
after the other wheels read faster than the rule's floor, which the test takes from the
plant's own wheels and the encoder's resolution (whole counts of 2 pi / (4 lines) over
the eight-period window), not from the controller's readings.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import numpy as np
import pytest

from emulator.controller import period_parts as pp
from emulator.controller.speed_plausibility import STOPPED_CREEP_SHARE, STOPPED_S
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.stepper import Plant
from emulator.protocol import events
from emulator.scenario import load_scenario, run_scenario
from tests.controller.twin import Twin
from tests.scenario.specified_run import (
    BELOW_BASE,
    Specified,
    check_named,
    held_before,
    read_toml,
    shipped,
    step_start_s,
)

SCENARIOS = Path(__file__).parents[2] / "profiles" / "scenarios"


def _without_inv_a1_from_the_start(trainset_stem: str) -> float:
    """When a train that lost INV-A1 for good before it started, the rest at the top of
    the controller's accuracy (5 % over the specified curve), reaches the shipped
    check's 50 km/h: as test_time_bounds' speed-sensor-loss bound, the loss at 0 s."""
    scenario, _ = shipped("speed-sensor-loss")
    trainset = read_toml(SCENARIOS.parent / "trainsets" / f"{trainset_stem}.toml")
    spec = Specified(trainset)
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = check_named(scenario, "traction kept")
    axles = {c["name"]: len(c["wheel_diameters_m"]) for c in trainset["converter"]}
    kept_share = 1.0 - axles["INV-A1"] / sum(axles.values())
    return spec.time_to(0.0, check["rises_to"], step_start_s(scenario, accel["name"]),
                        accel["effort"], lambda t, v: (2 - BELOW_BASE) * kept_share,
                        held=held_before(scenario, accel["name"]))


@pytest.mark.parametrize(("trainset", "lost"), [
    ("tern-15kv", ("INV-A1.m2",)),  # vector control, compared with its plain twin
    ("tern-25kv", ("INV-A1.m2",)),  # V/f control
    ("tern-15kv", ("INV-A1.m1", "INV-A1.m2")),  # both of an inverter's, at once
])
def test_an_encoder_stopped_at_a_standstill_is_judged_and_the_train_starts(
        trainset: str, lost: tuple[str, ...], tmp_path: Path, monkeypatch) -> None:
    """Judged (the lost ones, no other) no sooner than STOPPED_S after the other wheels
    could first read faster than the floor, and no later than STOPPED_S after they
    surely do, plus the eight-period window and two periods (the telegram's delay and
    the period's own); once each, no trip; the train then reaches 50 km/h sooner than
    one that lost INV-A1 for good before it started could (a controller that stops the
    inverter with the dead encoder, or crawls, fails). On the vector trainset with one
    encoder lost the compiled controller is compared with its plain-Python description
    period by period."""
    text = (SCENARIOS / "speed-sensor-loss.toml").read_text(encoding="utf-8")
    shipped_fault = 'target = "INV-A1.m2"\nat_s = 10.0\n'
    assert shipped_fault in text and "duration_s = 30.0" in text
    bound_s = _without_inv_a1_from_the_start(trainset)
    faults = '\n\n[[fault]]\nname = "encoder-channel-loss"\n'.join(
        f'target = "{target}"\nat_s = 1.0\n' for target in lost)
    text = (text.replace(shipped_fault, faults)
            .replace("duration_s = 30.0", f"duration_s = {bound_s:.3f}")
            .replace('"../trainsets/tern-15kv.toml"',
                     f'"{SCENARIOS.parent / "trainsets" / trainset}.toml"'))
    path = tmp_path / "stopped-at-standstill.toml"
    path.write_text(text, encoding="utf-8")
    scenario = load_scenario(path)
    assert len([f for f in scenario.faults if f.name == "encoder-channel-loss"]) == len(lost)
    seen: dict = {}
    frames: list[tuple[float, float]] = []  # time, the slowest wheel with its encoder
    judged: list[float] = []  # when the controller first said so
    advance = Plant.advance

    def watched(plant, commands, frame_s=None) -> None:
        advance(plant, commands, frame_s)
        tcu = seen.get("tcu")
        if tcu is None or judged:
            return
        wheels = np.abs(plant.ms[:, L.MS_OMEGA_W] * plant.mpar[:, L.MP_WHEEL_R])  # m/s
        frames.append((plant.time_s, float(np.delete(wheels, dead).min())))
        if tcu.events.get(events.SPEED_SENSOR_FAULT):
            judged.append(plant.time_s)

    monkeypatch.setattr(Plant, "advance", watched)
    twin = Twin() if trainset == "tern-15kv" and len(lost) == 1 else None

    def tune(tcu) -> None:
        seen["tcu"] = tcu
        if twin is not None:
            twin.install(tcu)

    motors = [f"{c['name']}.m{j + 1}" for c in read_toml(
        SCENARIOS.parent / "trainsets" / f"{trainset}.toml")["converter"]
        for j in range(len(c["wheel_diameters_m"]))]
    dead = [motors.index(target) for target in lost]
    run = asyncio.run(run_scenario(scenario, tune=tune))
    tcu = seen["tcu"]
    assert judged
    cfg, period_s = tcu.cfg, tcu.cfg.period_s
    # the rule's floor at the rail, and the windowed reading's step there: the reading
    # passes the floor at n_min whole counts in the window, which a wheel may give from
    # (n_min - 1) steps of mean speed over it and surely gives from (n_min + 1)
    # the floor: half the slip control's 0.35 m/s creep limit, below the crawl it ends
    floor = 0.5 * 0.35
    assert STOPPED_CREEP_SHARE * tcu.adhesion.creep_limit == floor
    step = (2 * np.pi / (4 * cfg.encoder_lines) / (8 * period_s)
            * cfg.wheel_radius_m / cfg.gear_ratio)
    n_min = int(np.floor(floor / step)) + 1
    t, slowest = np.array(frames).T
    earliest = t[np.flatnonzero(slowest > (n_min - 1) * step)[0]]
    latest = t[np.flatnonzero(slowest <= (n_min + 1) * step)[-1]]
    assert earliest + STOPPED_S - period_s <= judged[0] \
        <= latest + STOPPED_S + (8 + 2) * period_s, (earliest, latest, judged)
    assert np.flatnonzero(tcu._mot[:, pp.M_OK] == 0.0).tolist() == dead
    # one event: one raised a period, and both of INV-A1's are judged in the same one
    assert tcu.events[events.SPEED_SENSOR_FAULT] == 1
    assert not set(tcu.events) & events.TRIPS, dict(tcu.events)
    (kept,) = [r for r in run.results if r.spec.name.startswith("traction kept")]
    v = run.recording.column("p.train.speed_mps") * 3.6
    assert np.any(v >= kept.spec.value), f"50 km/h not reached in {bound_s:.1f} s"
    if twin is not None:
        twin.assert_identical(at_least=int(bound_s / period_s) - 1)
