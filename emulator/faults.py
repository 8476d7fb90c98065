"""Fault catalogue: what can go wrong, where it is applied, when it starts and ends.

Each fault is applied at one named point, and no physics module knows which faults
exist:

- ``measurement``: the sensor chain's hooks (extra gain, offset, stuck value) or the
  encoders' count offset;
- ``command``: the command vector on its way from the link to the plant (a gate that
  will not turn on, a contactor that will not close);
- ``plant``: a plant parameter (adhesion, rail condition, cooling, link capacitance);
- ``link``: the receive path (telegrams dropped before decoding).

Triggers: a plant time (``at_s``), a position (``at_m``) or a condition on a readable
state (``when = "train.speed_mps > 22"``), parsed by a small grammar, never evaluated.
"""

from __future__ import annotations

import math
import operator
import re
from dataclasses import dataclass, field
from typing import Any


class FaultError(ValueError):
    """A fault name, parameter or trigger that cannot be used."""


@dataclass(frozen=True)
class Param:
    """One parameter of a fault: unit, range and default."""

    unit: str
    lo: float
    hi: float
    default: float


@dataclass(frozen=True)
class FaultKind:
    """An entry of the catalogue."""

    name: str
    point: str  # measurement, command, plant, link
    target: str  # what it needs: "analog channel", "encoder", "inverter", "axle", ...
    params: dict[str, Param]
    description: str


CATALOGUE: dict[str, FaultKind] = {k.name: k for k in [
    FaultKind("sensor-offset", "measurement", "analog channel",
              {"offset": Param("SI unit of the channel", -1e5, 1e5, 0.0)},
              "adds a constant to a measured value (a transducer offset)"),
    FaultKind("sensor-gain", "measurement", "analog channel",
              {"gain": Param("1", 0.0, 10.0, 1.0)},
              "scales a measured value (a gain error)"),
    FaultKind("sensor-stuck", "measurement", "analog channel",
              {"value": Param("SI unit of the channel", -1e5, 1e5, 0.0)},
              "the measured value freezes at a value (a dead sensor reads 0)"),
    FaultKind("encoder-pulse-loss", "measurement", "encoder",
              {"counts_per_s": Param("count/s", -1e5, 1e5, 100.0)},
              "the counter loses (or gains) edges at a steady rate"),
    FaultKind("gate-driver-fault", "command", "inverter",
              {}, "the inverter's gates stay blocked and its fault flag is set"),
    FaultKind("leg-wont-turn-on", "command", "inverter leg",
              {"leg": Param("0..2 (a, b, c)", 0, 2, 0)},
              "one leg's upper IGBT does not turn on: its duty is forced to 0"),
    FaultKind("contactor-wont-close", "command", "line converter",
              {}, "the line contactor stays open whatever it is commanded"),
    FaultKind("low-adhesion", "plant", "axle",
              {"factor": Param("1", 0.0, 2.0, 0.3)},
              "the friction coefficient of an axle falls to factor x mu0 (leaves, oil)"),
    FaultKind("lost-cooling", "plant", "motor",
              {"effectiveness": Param("1", 0.0, 1.0, 0.0)},
              "the motor's cooling falls to a fraction of its design value"),
    FaultKind("link-capacitance-loss", "plant", "DC link",
              {"remaining": Param("1", 0.05, 1.0, 0.5)},
              "a DC-link capacitor bank loses part of its capacitance"),
    FaultKind("telegram-loss", "link", "link",
              {"probability": Param("1", 0.0, 1.0, 0.1)},
              "received telegrams are dropped before decoding"),
]}

_CONDITION = re.compile(r"^\s*([a-z_]+\.[a-z_0-9]+)(?:\[(\d+)\])?\s*(<=|>=|<|>|==)\s*"
                        r"(-?\d+(?:\.\d+)?(?:e-?\d+)?)\s*$")
_OPS = {"<": operator.lt, ">": operator.gt, "<=": operator.le, ">=": operator.ge,
        "==": operator.eq}


@dataclass(frozen=True)
class Condition:
    """``state[index] op number`` over a readable plant state (see Plant.names())."""

    state: str
    index: int | None
    op: str
    value: float

    @classmethod
    def parse(cls, text: str, known_states) -> Condition:
        """Parse a condition; a FaultError names what is wrong."""
        m = _CONDITION.match(text)
        if not m:
            raise FaultError(f"condition {text!r}: expected 'state op number', e.g. "
                             "'train.speed_mps > 22'")
        state, index, op, number = m.groups()
        if state not in known_states:
            raise FaultError(f"condition {text!r}: no state named {state!r}")
        return cls(state, int(index) if index else None, op, float(number))

    def holds(self, plant) -> bool:
        """Whether the condition is true now."""
        value = plant.read(self.state)
        if not isinstance(value, float):
            value = float(value[self.index or 0])
        return _OPS[self.op](value, self.value)


@dataclass
class Fault:
    """A fault of the catalogue on a target, with its triggers and its state."""

    kind: FaultKind
    target: str
    params: dict[str, float]
    start_s: float | None = None
    start_m: float | None = None
    start_when: Condition | None = None
    stop_s: float | None = None
    active: bool = False
    done: bool = False
    applied: dict[str, Any] = field(default_factory=dict)

    @property
    def name(self) -> str:
        """Catalogue name and target."""
        return f"{self.kind.name}@{self.target}"

    def due(self, plant) -> bool:
        """Whether a start trigger has fired."""
        if self.start_s is not None and plant.time_s >= self.start_s:
            return True
        if self.start_m is not None and plant.read("train.position_m") >= self.start_m:
            return True
        return self.start_when is not None and self.start_when.holds(plant)


def make_fault(name: str, target: str, params: dict[str, float] | None = None, *,
               at_s: float | None = None, at_m: float | None = None,
               when: str | None = None, until_s: float | None = None,
               known_states=()) -> Fault:
    """A fault from the catalogue, its parameters checked against their ranges."""
    kind = CATALOGUE.get(name)
    if kind is None:
        raise FaultError(f"no fault named {name!r}; the catalogue has "
                         f"{', '.join(sorted(CATALOGUE))}")
    values = {k: p.default for k, p in kind.params.items()}
    for key, value in (params or {}).items():
        if key not in kind.params:
            raise FaultError(f"{name}: no parameter {key!r} (it takes "
                             f"{', '.join(kind.params) or 'none'})")
        p = kind.params[key]
        if not (isinstance(value, int | float) and math.isfinite(value)
                and p.lo <= value <= p.hi):
            raise FaultError(f"{name}: {key} must be {p.unit} within {p.lo:g}..{p.hi:g}, "
                             f"got {value!r}")
        values[key] = float(value)
    if at_s is None and at_m is None and when is None:
        at_s = 0.0
    condition = Condition.parse(when, known_states) if when else None
    return Fault(kind, target, values, at_s, at_m, condition, until_s)


class FaultSet:
    """The faults of a run, applied to a rig at their points each frame."""

    def __init__(self, rig, seed: int = 0) -> None:
        import random

        self.rig = rig
        self.faults: list[Fault] = []
        self._rng = random.Random(seed)
        p = rig.plant.params
        self._motors = [f"{c.name}.m{j + 1}" for c in p.converters
                        for j in range(len(c.wheel_diameters_m))]
        self._inverters = [c.name for c in p.converters]
        self._links = [lk.name for lk in p.dc_links]
        self._line_converters = [u.name for u in p.line_converters]
        self.drop_probability = 0.0

    def add(self, name: str, target: str, params: dict[str, float] | None = None,
            **triggers) -> Fault:
        """Schedule a fault; the target is checked now, not when the fault starts."""
        fault = make_fault(name, target, params, known_states=self.rig.plant.names(),
                           **triggers)
        self._index(fault)  # raises FaultError for an unknown target
        self.faults.append(fault)
        return fault

    def clear(self, name: str) -> None:
        """End every active fault of that name (catalogue name or name@target)."""
        for f in self.faults:
            if f.active and name in (f.kind.name, f.name):
                self._remove(f)

    def _index(self, f: Fault) -> int:
        target = f.target
        table = {"analog channel": self.rig.sampler.analog_names, "encoder": self._motors,
                 "axle": self._motors, "motor": self._motors, "inverter": self._inverters,
                 "inverter leg": self._inverters, "DC link": self._links,
                 "line converter": self._line_converters, "link": ["link"]}[f.kind.target]
        if target not in table:
            raise FaultError(f"{f.kind.name}: no {f.kind.target} named {target!r} "
                             f"(known: {', '.join(table[:6])}{'...' if len(table) > 6 else ''})")
        return table.index(target)

    def update(self) -> None:
        """Start faults whose trigger fired, end those whose time is up; per frame."""
        plant = self.rig.plant
        for f in self.faults:
            if not f.active and not f.done and f.due(plant):
                self._apply(f)
            elif f.active and f.stop_s is not None and plant.time_s >= f.stop_s:
                self._remove(f)
            if f.active and f.kind.name == "encoder-pulse-loss":
                acc = f.applied.setdefault("acc", 0.0) + f.params["counts_per_s"] * (
                    self.rig.period_us * 1e-6)
                whole = math.trunc(acc)
                f.applied["acc"] = acc - whole
                self.rig.sampler.encoders.count_offset[self._index(f)] -= whole

    def _apply(self, f: Fault) -> None:
        i, kind, rig = self._index(f), f.kind.name, self.rig
        analog, plant = rig.sampler.analog, rig.plant
        if kind == "sensor-offset":
            analog.fault_offset[i] += f.params["offset"]
        elif kind == "sensor-gain":
            analog.fault_gain[i] *= f.params["gain"]
        elif kind == "sensor-stuck":
            analog.stuck[i] = f.params["value"]
        elif kind == "gate-driver-fault":
            rig.sampler.gate_fault[i] = 7
        elif kind == "low-adhesion":
            f.applied["was"] = float(plant.mpar[i, _col("MP_ADHESION_FACTOR")])
            plant.set_adhesion_factor(i, f.params["factor"])
        elif kind == "lost-cooling":
            f.applied["was"] = float(plant.mpar[i, _col("MP_COOLING")])
            plant.mpar[i, _col("MP_COOLING")] = f.params["effectiveness"]
        elif kind == "link-capacitance-loss":
            f.applied["was"] = float(plant.kp[i, _col("KP_C")])
            plant.kp[i, _col("KP_C")] *= f.params["remaining"]
        elif kind == "telegram-loss":
            self.drop_probability = f.params["probability"]
        f.active = True

    def _remove(self, f: Fault) -> None:
        i, kind, rig = self._index(f), f.kind.name, self.rig
        analog, plant = rig.sampler.analog, rig.plant
        if kind == "sensor-offset":
            analog.fault_offset[i] -= f.params["offset"]
        elif kind == "sensor-gain":
            analog.fault_gain[i] /= f.params["gain"] or 1.0
        elif kind == "sensor-stuck":
            analog.stuck[i] = math.nan
        elif kind == "gate-driver-fault":
            rig.sampler.gate_fault[i] = 0
        elif kind == "low-adhesion":
            plant.set_adhesion_factor(i, f.applied["was"])
        elif kind == "lost-cooling":
            plant.mpar[i, _col("MP_COOLING")] = f.applied["was"]
        elif kind == "link-capacitance-loss":
            plant.kp[i, _col("KP_C")] = f.applied["was"]
        elif kind == "telegram-loss":
            self.drop_probability = 0.0
        f.active, f.done = False, True

    def transform_command(self, values, names_index) -> None:
        """Command-point faults act on the command vector (physical units) in place."""
        for f in self.faults:
            if not f.active:
                continue
            kind = f.kind.name
            if kind == "gate-driver-fault":
                values[names_index[f"{f.target}.gates_enabled"]] = 0.0
            elif kind == "leg-wont-turn-on":
                leg = "abc"[int(f.params["leg"])]
                values[names_index[f"{f.target}.duty_{leg}"]] = 0.0
            elif kind == "contactor-wont-close":
                values[names_index[f"{f.target}.line_contactor_close"]] = 0.0

    def drop(self) -> bool:
        """Whether the link fault eats this telegram."""
        return self.drop_probability > 0.0 and self._rng.random() < self.drop_probability

    def listing(self) -> list[dict[str, Any]]:
        """The faults with their state, for reports and the monitor."""
        return [{"name": f.name, "point": f.kind.point, "params": f.params,
                 "state": "active" if f.active else ("cleared" if f.done else "armed")}
                for f in self.faults]


def _col(name: str) -> int:
    from emulator.plant import layout

    return getattr(layout, name)
