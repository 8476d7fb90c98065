"""The driver: what the train asks of the traction controller, frame by frame.

Either a sequence of steps (switch on, accelerate to a speed, cruise, coast, brake to a
stop at a position, hold) or a table of demands over time. Demands change at a limited
rate (jerk limit); speed limits of the track are obeyed with a planning deceleration;
a brake step that must stop at a position starts early when the braking curve says so.
Below ``blend_mps`` the friction brake finishes a stop (electric braking fades at
standstill: common practice of brake blending).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from emulator.plant.layout import SS_E_SOURCE
from emulator.profiles.table import Table
from emulator.protocol.signal_map import MODES

from .brake_unit import BrakeUnit

MODE = {name: code for code, name in MODES.items()}
STEP_MODES = ("off", "accelerate", "cruise", "coast", "brake", "hold")
ENDS = ("to_kmh", "for_s", "to_m", "until_s", "stop_at_m")
STOPPED = "stopped"  # the label of the moment the last step ends


@dataclass(frozen=True)
class DriverStep:
    """One step of the driver's sequence; it ends at the first end condition met."""

    mode: str
    name: str = ""
    effort: float = 1.0  # accelerate / brake: fraction of the available effort
    cruise_kmh: float | None = None  # cruise: the speed to hold (default: speed on entry)
    to_kmh: float | None = None  # accelerate: reached; coast/brake: fallen to
    for_s: float | None = None
    to_m: float | None = None
    until_s: float | None = None
    stop_at_m: float | None = None  # brake: stop here (ends at standstill)


@dataclass(frozen=True)
class DemandPoint:
    """A row of a demand table: from at_s on, this mode and effort."""

    at_s: float
    mode: str
    effort: float
    cruise_kmh: float


@dataclass(frozen=True)
class DriverSpec:
    """The driver's part of a scenario."""

    steps: tuple[DriverStep, ...] = ()
    table: tuple[DemandPoint, ...] = ()
    demand_rate_per_s: float = 1.0  # jerk limit of the demand: full scale in 1 s
    regeneration_allowed: bool = True
    blend_mps: float = 1.0
    planning_deceleration_mps2: float = 0.5  # for speed limits ahead


def read_driver(t: Table) -> DriverSpec:
    """The [driver] table: [[driver.step]] or [[driver.demand]], not both."""
    rate = t.number("demand_rate_per_s", "1/s", 0.01, 100.0) if t.optional(
        "demand_rate_per_s") else 1.0
    regen = t.boolean("regeneration_allowed") if t.optional("regeneration_allowed") else True
    has_steps, has_table = t.optional("step"), t.optional("demand")
    if has_steps == has_table:
        raise t.error("step", "give either [[driver.step]] or [[driver.demand]] rows")
    steps, table = [], []
    if has_steps:
        rows = t.tables("step")
        for i, s in enumerate(rows):
            mode = s.string("mode", STEP_MODES)
            kw = {k: s.number(k, unit, lo, hi) for k, unit, lo, hi in (
                ("effort", "1", 0.0, 1.0), ("cruise_kmh", "km/h", 0.0, 400.0),
                ("to_kmh", "km/h", 0.0, 400.0), ("for_s", "s", 0.0, 1e5),
                ("to_m", "m", -1e6, 1e6), ("until_s", "s", 0.0, 1e5),
                ("stop_at_m", "m", -1e6, 1e6)) if s.optional(k)}
            name = s.string("name") if s.optional("name") else ""
            if not any(k in kw for k in ENDS) and i < len(rows) - 1:
                raise s.error("mode", f"a {mode} step needs an end: one of {', '.join(ENDS)}")
            if "stop_at_m" in kw and mode != "brake":
                raise s.error("stop_at_m", "only a brake step stops at a position")
            s.finish()
            steps.append(DriverStep(mode, name, **kw))
    else:
        for s in t.tables("demand"):
            at = s.number("at_s", "s", 0.0, 1e5)
            mode = s.string("mode", tuple(MODE))
            effort = s.number("effort", "1", 0.0, 1.0) if s.optional("effort") else 0.0
            cruise = s.number("cruise_kmh", "km/h", 0.0, 400.0) if s.optional(
                "cruise_kmh") else 0.0
            s.finish()
            table.append(DemandPoint(at, mode, effort, cruise))
        if [p.at_s for p in table] != sorted(p.at_s for p in table):
            raise t.error("demand", "rows must be in order of at_s")
    t.finish()
    return DriverSpec(tuple(steps), tuple(table), rate, regen)


class _TrainReadings:
    """What the driver reads of a plant every frame, looked up once, and the train's
    constants it uses. The reads go through memoryviews of the live arrays
    (Plant.state_column): the same float as ``plant.read(name)``, at a third of the
    cost of indexing the array."""

    def __init__(self, plant, spec: DriverSpec) -> None:
        self.plant, self.spec = plant, spec
        speed, self.speed = plant.state_column("train.speed_mps")
        position, self.position = plant.state_column("train.position_m")
        acceleration, self.acceleration = plant.state_column("train.acceleration_mps2")
        assert position is speed is acceleration and speed.ndim == 1  # (its state vector)
        self.train = memoryview(speed)
        self.source = memoryview(plant.ss)  # [SS_E_SOURCE]: Plant.energy_from_source
        train = plant.params.train
        self.m_eff = train.mass_kg * (1 + train.rotating_mass_allowance)
        self.frame_s = plant.params.frame_s
        self.rate = spec.demand_rate_per_s * self.frame_s  # the demand's change a frame
        self.regeneration = int(spec.regeneration_allowed)
        #: per step, the brake step with a stop that the step plans for: the next brake
        #: step (one that ends at a speed is begun when its own step comes, not skipped
        #: for a stop beyond it), as (its index, its stop), or None
        self.stop_ahead: list[tuple[int, float] | None] = []
        for i in range(len(spec.steps)):
            brakes = [j for j in range(i + 1, len(spec.steps))
                      if spec.steps[j].mode == "brake"]
            stop = spec.steps[brakes[0]].stop_at_m if brakes else None
            self.stop_ahead.append(None if stop is None else (brakes[0], stop))


class DriverProgram:
    """Runs a DriverSpec on a rig: ``update(rig)`` after every frame."""

    def __init__(self, spec: DriverSpec, track=None) -> None:
        self.spec = spec
        self.track = track  # gives ceiling(x, v) for speed limits, or None
        self.index = 0
        self.step_since = 0.0
        self.step_from_m = 0.0
        self.finished = False
        self.top_speed_mps = 0.0
        self.drawn_j = 0.0  # energy taken from the catenary
        self.returned_j = 0.0  # energy fed back into the catenary
        self.events: set[int] = set()  # event codes the controller reported
        self.on_step = None  # callback(name, time) when a step begins
        self._e_source = 0.0
        self._trim = 0.0
        self._cruise = 0.0
        self._started = False
        self._brakes: BrakeUnit | None = None
        self._readings: _TrainReadings | None = None

    @property
    def phase(self) -> str:
        """The running step's name or mode."""
        if self.finished:
            return "stopped"
        if self.spec.steps:
            step = self.spec.steps[self.index]
            return step.name or step.mode
        return "table"

    def _friction_brake(self, plant, force_n: float) -> None:
        """The friction brake demand of this frame, through the train's brake unit (its
        wheel-slide protection acts on the motored axles)."""
        if self._brakes is None or self._brakes.plant is not plant:
            self._brakes = BrakeUnit(plant, plant.params.frame_s)
        self._brakes.apply(force_n)

    def update(self, rig) -> None:
        """Set the driver's demands for the next frame."""
        readings = self._readings
        if readings is None or readings.plant is not rig.plant or readings.spec is not self.spec:
            readings = self._readings = _TrainReadings(rig.plant, self.spec)
        # the catenary energy of the frame, and the event the controller reported
        e_source = readings.source[SS_E_SOURCE]  # (rig.plant.energy_from_source())
        step, self._e_source = e_source - self._e_source, e_source
        if step > 0:
            self.drawn_j += step
        else:
            self.returned_j -= step
        code = int(rig.reply("event_code"))
        if code:
            self.events.add(code)
        d = rig.driver
        v = readings.train[readings.speed]  # (plant.read("train.speed_mps"))
        if v > self.top_speed_mps:
            self.top_speed_mps = v
        d.regeneration_allowed = readings.regeneration
        if self.spec.steps:
            mode, effort = self._steps(rig, v, readings)
        else:
            mode, effort = self._table(rig, v)
        d.mode = MODE[mode]
        rate = readings.rate
        # steps and table rows give a magnitude; on the wire braking is negative
        # (train.effort_demand in the signal map), as the operator's demand is too
        target = effort if mode == "accelerate" else -effort if mode == "brake" else 0.0
        d.effort_demand = min(max(target, d.effort_demand - rate), d.effort_demand + rate)

    # --- the step sequence -------------------------------------------------------------
    def _begin(self, index: int, t: float, x: float, v: float) -> None:
        self.index, self.step_since, self.step_from_m = index, t, x
        self._cruise = v
        self._trim = 0.0
        step = self.spec.steps[index]
        if self.on_step is not None:
            self.on_step(step.name or f"step {index + 1} ({step.mode})", t)

    def _ended(self, s: DriverStep, t: float, x: float, v: float) -> bool:
        if s.for_s is not None and t - self.step_since >= s.for_s:
            return True
        if s.until_s is not None and t >= s.until_s:
            return True
        if s.to_m is not None and x >= s.to_m:
            return True
        if s.to_kmh is not None:
            reached = v >= s.to_kmh / 3.6 if s.mode == "accelerate" else v <= s.to_kmh / 3.6
            if reached:
                return True
        return s.stop_at_m is not None and v == 0.0 and t - self.step_since > 0.5

    def _steps(self, rig, v: float, readings: _TrainReadings) -> tuple[str, float]:
        plant, d = rig.plant, rig.driver
        t, x = plant.time_s, readings.train[readings.position]  # (plant.read(...))
        steps = self.spec.steps
        if not self._started:
            self._started = True
            self._begin(0, t, x, v)
        while not self.finished and self._ended(steps[self.index], t, x, v):
            if self.index + 1 < len(steps):
                self._begin(self.index + 1, t, x, v)
            else:
                self.finished = True
                if self.on_step is not None:
                    self.on_step(STOPPED, t)
        if self.finished:
            d.mode, d.effort_demand = MODE["coast"], 0.0
            self._friction_brake(plant, 1e5 if v < self.spec.blend_mps else 0.0)
            return "coast", 0.0
        step = steps[self.index]
        m_eff = readings.m_eff
        available = max(rig.reply("available_effort_kn") * 1e3, 1.0)
        ahead = readings.stop_ahead[self.index]  # a stop ahead to brake for?
        if ahead is not None and step.mode in ("accelerate", "cruise", "coast"):
            j, stop = ahead
            a_cap = max(0.8 * available / m_eff, 0.2)
            if stop - x <= v * v / (2 * a_cap) + 5 * v:
                self._begin(j, t, x, v)
                step = steps[j]
        ceiling = self.track.ceiling(x, v) if self.track is not None else math.inf
        self._friction_brake(plant, 0.0)
        if step.mode == "off":
            return "off", 0.0
        if step.mode == "hold":
            self._friction_brake(plant, min(m_eff * 0.5, 3e5))
            return "coast", 0.0
        if step.mode in ("accelerate", "cruise", "coast") and v > ceiling + 3 / 3.6:
            return "brake", 0.5  # over a limit: service braking until below it
        if step.mode == "accelerate":
            if v < 0.3 and t - self.step_since < 5.0:
                # hill start: the holding brake stays on until the drive's effort carries
                # the train up the gradient (common practice of hill-start aids)
                grade = self.track.gradient(x) if self.track is not None else 0.0
                achieved = rig.reply("achieved_effort_kn") * 1e3
                if grade > 0 and achieved < 1.1 * m_eff * 9.81 * grade:
                    self._friction_brake(plant, min(m_eff * 0.5, 3e5))
            if v < ceiling - 1 / 3.6:
                return "accelerate", step.effort
            d.cruise_speed_kmh = ceiling * 3.6
            return "cruise", 0.0
        if step.mode == "cruise":
            aim = step.cruise_kmh / 3.6 if step.cruise_kmh is not None else self._cruise
            d.cruise_speed_kmh = min(aim, ceiling) * 3.6
            return "cruise", 0.0
        if step.mode == "coast":
            return "coast", 0.0
        return self._brake(rig, step, v, x, m_eff, available)

    def _brake(self, rig, step: DriverStep, v: float, x: float, m_eff: float,
               available: float) -> tuple[str, float]:
        plant = rig.plant
        if step.stop_at_m is None:
            if v > self.spec.blend_mps or (step.to_kmh or 0.0) > 0:
                return "brake", step.effort
            self._friction_brake(plant, min(m_eff * 0.8 * step.effort + 1e4, 3e5))
            return "coast", 0.0
        remaining = max(step.stop_at_m - x, 0.5)
        a_req = v * v / (2 * remaining)
        if v > self.spec.blend_mps:
            # feed forward from the available effort, corrected by the deceleration
            # actually measured (a driver closes this loop by eye)
            readings = self._readings
            decel = -readings.train[readings.acceleration]  # (plant.read(...))
            self._trim = min(max(self._trim + 0.5 * (a_req - decel) * readings.frame_s,
                                 -0.5), 0.5)
            return "brake", min(max(a_req * m_eff / available + self._trim, 0.0), 1.0)
        self._friction_brake(plant, min(m_eff * max(a_req, 0.05), 3e5))  # friction takes over
        return "coast", 0.0

    # --- the demand table ------------------------------------------------------------------
    def _table(self, rig, v: float) -> tuple[str, float]:
        plant = rig.plant
        t = plant.time_s
        row = None
        for p in self.spec.table:
            if p.at_s <= t:
                row = p
        if row is None:
            return "off", 0.0
        rig.driver.cruise_speed_kmh = row.cruise_kmh
        if self.track is not None:
            ceiling = self.track.ceiling(plant.read("train.position_m"), v)
            rig.driver.cruise_speed_kmh = min(row.cruise_kmh, ceiling * 3.6)
        m_eff = plant.params.train.mass_kg
        brake_finish = row.mode == "brake" and v <= self.spec.blend_mps
        self._friction_brake(plant, min(m_eff * 0.8 * row.effort + 1e4, 3e5) if brake_finish else 0)
        self.finished = row is self.spec.table[-1] and v == 0.0 and row.mode != "accelerate"
        return row.mode, row.effort


def demo_program(target_kmh: float = 100.0, cruise_s: float = 20.0, coast_s: float = 10.0,
                 stop_at_m: float = 4000.0, switch_on_s: float = 2.0) -> DriverProgram:
    """The demo run: switch on, accelerate, cruise, coast, brake to a stop at a position."""
    return DriverProgram(DriverSpec(steps=(
        DriverStep("off", "switch-on", for_s=switch_on_s),
        DriverStep("accelerate", "accelerate", to_kmh=target_kmh),
        DriverStep("cruise", "cruise", cruise_kmh=target_kmh, for_s=cruise_s),
        DriverStep("coast", "coast", for_s=coast_s),
        DriverStep("brake", "brake", stop_at_m=stop_at_m),
    )))
