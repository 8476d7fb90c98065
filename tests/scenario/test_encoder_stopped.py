"""An encoder that stops counting at a standstill is judged failed once the train moves,
and the train starts as one whose drive runs on the neighbour's reading.

The shipped speed-sensor loss (INV-A1.m2's quadrature channel lost) moved to 1 s,
before the switch-on: its count then stands still from the start, and no jump ever
shows (speed_plausibility.SENSOR_JUMP). Measured before the mend, on the vector trainset:
the slip control's reference (the slowest wheel in traction, adhesion.py) stayed at the
dead encoder's zero, every other axle seemed to slip, and the train crawled at the
0.35 m/s creep limit for the whole 30 s, with the wheel-slip event raised throughout.

What the rule claims (SpeedPlausibility.judge_stopped): a driven wheel cannot stand
while the train moves (its creep has the tractive force's sign, as any adhesion law
has it: Kalker's theory, Polach's model). So the encoder is judged failed STOPPED_S
after every other axle turns faster than STOPPED_OTHERS_MPS at the rail, taken here
from the plant's own wheels, not from the controller's readings.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import numpy as np
import pytest

from emulator.controller.speed_plausibility import STOPPED_OTHERS_MPS, STOPPED_S
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


@pytest.mark.parametrize("trainset", ["tern-15kv", "tern-25kv"])  # vector, V/f control
def test_an_encoder_stopped_at_a_standstill_is_judged_and_the_train_starts(
        trainset: str, tmp_path: Path, monkeypatch) -> None:
    """Judged no sooner than STOPPED_S after all the other wheels turn faster than
    STOPPED_OTHERS_MPS (the plant's), and no later than that plus the controller's
    eight-period speed window and two periods (the telegram's delay and the period's
    own); judged once, no trip; the train then reaches 50 km/h sooner than one that
    lost INV-A1 for good before it started could (a controller that stops the inverter
    with the dead encoder, or crawls, fails). On the vector trainset the compiled
    controller is compared with its plain-Python description period by period."""
    text = (SCENARIOS / "speed-sensor-loss.toml").read_text(encoding="utf-8")
    lost = 'target = "INV-A1.m2"\nat_s = 10.0\n'
    assert lost in text and "duration_s = 30.0" in text
    bound_s = _without_inv_a1_from_the_start(trainset)
    text = (text.replace(lost, 'target = "INV-A1.m2"\nat_s = 1.0\n')
            .replace("duration_s = 30.0", f"duration_s = {bound_s:.3f}")
            .replace('"../trainsets/tern-15kv.toml"',
                     f'"{SCENARIOS.parent / "trainsets" / trainset}.toml"'))
    path = tmp_path / "stopped-at-standstill.toml"
    path.write_text(text, encoding="utf-8")
    scenario = load_scenario(path)
    seen: dict = {}
    frames: list[tuple[float, float]] = []  # time, the slowest wheel but INV-A1.m2's
    judged: list[float] = []  # when the controller first said so
    advance = Plant.advance

    def watched(plant, commands, frame_s=None) -> None:
        advance(plant, commands, frame_s)
        tcu = seen.get("tcu")
        if tcu is None or judged:
            return
        wheels = plant.ms[:, L.MS_OMEGA_W] * plant.mpar[:, L.MP_WHEEL_R]  # m/s
        frames.append((plant.time_s, float(np.delete(wheels, 1).min())))
        if tcu.events.get(events.SPEED_SENSOR_FAULT):
            judged.append(plant.time_s)

    monkeypatch.setattr(Plant, "advance", watched)
    twin = Twin() if trainset == "tern-15kv" else None

    def tune(tcu) -> None:
        seen["tcu"] = tcu
        if twin is not None:
            twin.install(tcu)

    run = asyncio.run(run_scenario(scenario, tune=tune))
    tcu = seen["tcu"]
    assert judged
    period_s, cfg = tcu.cfg.period_s, tcu.cfg
    # the windowed speed the rule reads counts 2 pi / (4 lines) over eight periods: at
    # the rail that is its resolution; the other wheels are faster than the floor for
    # sure from the last time the slowest was within one resolution of it, and not
    # before the first time it came within one resolution
    resolution = (2 * np.pi / (4 * cfg.encoder_lines) / (8 * period_s)
                  * cfg.wheel_radius_m / cfg.gear_ratio)
    t, slowest = np.array(frames).T
    near = np.flatnonzero(slowest > STOPPED_OTHERS_MPS - resolution)
    below = np.flatnonzero(slowest <= STOPPED_OTHERS_MPS + resolution)
    earliest, latest = t[near[0]], t[below[-1]]
    assert earliest + STOPPED_S - period_s <= judged[0] \
        <= latest + STOPPED_S + (8 + 2) * period_s, (earliest, latest, judged)
    assert tcu.events[events.SPEED_SENSOR_FAULT] == 1
    assert not set(tcu.events) & events.TRIPS, dict(tcu.events)
    (kept,) = [r for r in run.results if r.spec.name.startswith("traction kept")]
    v = run.recording.column("p.train.speed_mps") * 3.6
    reached = np.flatnonzero(v >= kept.spec.value)
    assert reached.size, f"50 km/h not reached in {bound_s:.1f} s"
    if twin is not None:
        twin.assert_identical(at_least=int(bound_s / period_s) - 1)
