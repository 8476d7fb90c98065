"""Running a scenario: rig, controller, track, driver, faults, recording, verdict.

The recording is the single source of the verdict: checks are judged on the file as
read back, so ``railrig replay`` and a later re-judging see exactly what the run saw.
It holds the scenario, trainset and machine texts, the seed and the version, so a
lockstep run with the reference controller can be repeated bit for bit.
"""

from __future__ import annotations

import os
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

import emulator
from emulator.faults import FaultError
from emulator.link import open_link
from emulator.profiles.reader import load_trainset
from emulator.recording.recorder import Recorder, Recording, read_recording
from emulator.rig.frame_loop import Rig

from .checks import CheckError, CheckResult, check_signals, evaluate, signal_columns
from .driver import DriverProgram
from .spec import Scenario, ScenarioError
from .texts import scenario_texts
from .track import Track

MOTOR_SIDE = ["train.speed_mps", "train.position_m", "train.acceleration_mps2",
              "train.tractive_force_n", "motor.speed_rad_s", "motor.torque_nm",
              "motor.creep_velocity_mps", "motor.adhesion_utilisation",
              "motor.shaft_torque_nm", "motor.axle_load_n", "motor.brake_force_n",
              "motor.stator_temperature_k", "motor.rotor_temperature_k",
              "inverter.phase_current_a_a", "inverter.phase_current_b_a",
              "inverter.phase_current_c_a", "inverter.hardware_trip", "dc_link.voltage_v",
              "dc_link.chopper_current_a", "dc_link.hardware_chopper"]
LINE_SIDE = ["line.pantograph_voltage_v", "line.current_a", "line.emf_v",
             "line.breaker_closed", "line.overcurrent_trip", "line.feeder_closed"]
#: derived each 20 ms from the plant's power-quality window (a frame late)
LINE_EXTRAS = ["line.voltage_rms_v", "line.current_rms_a", "line.power_factor",
               "line.active_power_w"]
PQ_EVERY = 20


def recorded_states(rig: Rig) -> list[str]:
    """The plant states a scenario records (and serve and the benchmarks with it)."""
    return MOTOR_SIDE + (LINE_SIDE if rig.plant.line_side else [])


class RunError(RuntimeError):
    """The run could not be made (no controller, a fault that cannot be applied...)."""


@dataclass
class RunResult:
    """What a scenario run gave."""

    scenario: Scenario
    results: list[CheckResult]
    recording: Recording
    recording_path: Path | None
    wall_s: float
    spans: list[tuple[str, float, float]] = field(default_factory=list)  # label, t0, t1
    link: dict = field(default_factory=dict)

    @property
    def passed(self) -> bool:
        """Every check passed."""
        return all(r.passed for r in self.results)


class ScenarioProgram:
    """The per-frame work of a scenario besides the rig's: track, driver, derived values."""

    def __init__(self, scenario: Scenario, rig: Rig, recorder: Recorder) -> None:
        self.rig = rig
        self.track = Track(scenario.track, rig.plant)
        self.track.decel = scenario.driver.planning_deceleration_mps2
        self.driver = DriverProgram(scenario.driver, self.track)
        self.recorder = recorder
        self.marks: dict[str, list[float]] = {}
        self.track.on_event = self.mark
        self.driver.on_step = lambda name, t: self.mark(name, "start", t)
        self._n = 0

    @property
    def phase(self) -> str:
        """The driver's step now (for the monitor)."""
        return self.driver.phase

    def mark(self, label: str, what: str, t: float) -> None:
        """Note a labelled moment in the recording."""
        self.recorder.mark(label=label, what=what, t=t)

    def update(self, rig: Rig) -> None:
        self.track.update(rig)
        self.driver.update(rig)
        self._n += 1
        if rig.plant.line_side and self._n % PQ_EVERY == 0:
            pq = rig.plant.power_quality()
            if pq:
                rig.extras[:] = (pq["voltage_rms_v"], pq["current_rms_a"],
                                 pq["power_factor"], pq["active_power_w"])


async def run_scenario(scenario: Scenario, *, controller: str = "reference",
                       mode: str = "lockstep", seed: int | None = None,
                       record: str | Path | None = None, progress=None,
                       tune=None, monitor: str | None = None) -> RunResult:
    """Run a scenario to its end and judge its checks.

    controller: "reference" (in this process, through telegrams) or a link URL where the
    controller under test answers. tune(controller) may alter the reference controller
    before the run (tests use it to break one of its functions). monitor: an address
    where dashboards may watch the run; the checks' verdicts go to them as events.
    """
    from emulator.controller.inprocess import attach_reference
    from emulator.faults import FaultSet

    seed = scenario.seed if seed is None else seed
    params = load_trainset(scenario.trainset)
    channel = f"railrig-scenario-{id(scenario)}-{time.monotonic_ns()}"
    url = f"loop://{channel}" if controller == "reference" else controller
    try:
        link = open_link(url)
        await link.open()
    except (ValueError, OSError) as exc:
        raise RunError(f"cannot open the controller link {url!r}: {exc}") from None
    temp = None
    watch = None
    rig = None
    try:
        rig = Rig(params, link, mode=mode, seed=seed)
        if controller == "reference":
            await attach_reference(channel, rig, scenario.trainset, tune=tune)
        states = recorded_states(rig)
        columns = rig.record_columns(states, LINE_EXTRAS if rig.plant.line_side else [])
        try:
            check_signals(scenario.checks, columns, str(scenario.path))
        except CheckError as exc:
            raise ScenarioError(str(exc)) from None
        if record is None:
            fd, temp = tempfile.mkstemp(suffix=".rrec")
            os.close(fd)
        path = Path(record) if record is not None else Path(temp)
        meta = {"railrig": emulator.__version__, "seed": seed, "mode": mode,
                "controller": controller, "period_us": rig.period_us,
                "name": scenario.name, **scenario_texts(scenario.path, scenario.text,
                                                     scenario.trainset)}
        kinds, scales, units = rig.record_storage(columns)
        # the plant states the checks judge stay float64: a verdict is the model's, not
        # float32's (a value within 6e-8 of a limit would otherwise be rounded across it)
        judged = {j for c in scenario.checks if c.signal is not None
                  for j in signal_columns(columns, c.signal)[0]}
        kinds = ["f64" if j in judged and k == "f32" else k for j, k in enumerate(kinds)]
        recorder = Recorder(path, columns, meta, kinds=kinds, scales=scales, units=units,
                            background=rig.records_in_background)
        program = ScenarioProgram(scenario, rig, recorder)
        rig.program, rig.recorder = program, recorder
        rig.faults = FaultSet(rig, seed=seed)
        rig.faults.on_change = lambda f, what, t: program.mark(f.label, what, t)
        for spec in scenario.faults:
            try:
                rig.faults.add(spec.name, spec.target, spec.params, at_s=spec.at_s,
                               at_m=spec.at_m, when=spec.when, until_s=spec.until_s,
                               label=spec.label)
            except FaultError as exc:
                raise ScenarioError(f"{scenario.path}:{spec.line}: [fault] {exc}") from None
        if scenario.initial_speed_mps:
            rig.plant.set_speed(scenario.initial_speed_mps)
        if monitor is not None:
            from emulator.monitor.endpoint import Monitor

            watch = Monitor(rig, monitor)  # chains the fault marks above
            await watch.start()
            watch.event("scenario", f"{scenario.name}: started")
        wall = await _run(scenario, rig, program, progress)
        recorder.close()
        rec = read_recording(path)
        result = judge(scenario, rec, wall_s=wall, path=Path(record) if record else None,
                       link=rig.health.as_dict())
        if watch is not None:
            for r in result.results:
                watch.event("check", f"{'pass' if r.passed else 'FAIL'} {r.spec.name}: "
                            f"{r.measured} {r.detail}".rstrip())
            watch.event("scenario", f"{scenario.name}: "
                        f"{'passed' if result.passed else 'FAILED'}")
            watch.publish()
    finally:
        try:
            if rig is not None and rig.recorder is not None:  # a run that raised keeps
                rig.recorder.close()  # what it recorded (a failed write raises here)
        finally:
            if watch is not None:
                watch.close()
            link.close()
            if temp is not None:  # the recording is in memory by now, or the run failed
                Path(temp).unlink(missing_ok=True)
    return result


async def _run(scenario: Scenario, rig: Rig, program: ScenarioProgram, progress) -> float:
    frames_total = round(scenario.duration_s * 1e6 / rig.period_us)
    chunk = 250
    t0 = time.perf_counter()
    stopped_at = None
    while rig.frame < frames_total:
        await rig.run(frames=min(rig.frame + chunk, frames_total))
        if progress is not None:
            progress(rig.plant.time_s, scenario.duration_s,
                     rig.plant.read("train.speed_mps") * 3.6,
                     rig.plant.read("train.position_m"), program.driver.phase)
        if program.driver.finished and scenario.end_when_stopped:
            stopped_at = rig.plant.time_s if stopped_at is None else stopped_at
            if rig.plant.time_s - stopped_at >= 2.0:
                break
    return time.perf_counter() - t0


def judge(scenario: Scenario, rec: Recording, *, wall_s: float = 0.0,
          path: Path | None = None, link: dict | None = None) -> RunResult:
    """Judge a scenario's checks on a recording."""
    marks: dict[str, float] = {}
    opened: dict[str, float] = {}
    spans = []
    end = float(rec.column("time_s")[-1]) if len(rec.data) else 0.0
    for m in rec.marks or []:
        if m.get("what") == "start":
            marks.setdefault(m["label"], m["t"])
            opened[m["label"]] = m["t"]
        elif m.get("what") == "end" and m["label"] in opened:
            spans.append((m["label"], opened.pop(m["label"]), m["t"]))
    step_names = {s.name for s in scenario.driver.steps}
    spans += [(label, t0, end) for label, t0 in opened.items() if label not in step_names]
    results = [evaluate(c, rec, marks) for c in scenario.checks]
    return RunResult(scenario, results, rec, path, wall_s, spans, link or {})
