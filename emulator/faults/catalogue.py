"""Fault catalogue: what can go wrong, where it is applied, when it starts and ends.

Each fault is applied at one named point, and no physics module knows which faults
exist:

- ``measurement``: the sensor chain's hooks (extra gain, offset, stuck value) or the
  encoders' count offset;
- ``command``: the command vector on its way from the link to the plant (a gate that
  will not turn on, a contactor that will not close);
- ``plant``: a plant parameter (adhesion, rail condition, cooling, link capacitance);
- ``line``: the catenary (level, dead line, phase, frequency, receptivity);
- ``link``: the receive path (telegrams dropped before decoding); delays, duplicates,
  reordering and corruption are the ``loop://`` link's manipulator's.

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
    point: str  # measurement, command, plant, line, link
    target: str  # what it needs: "analog channel", "encoder", "inverter", "axle", ...
    params: dict[str, Param]
    description: str


def _kind(name, point, target, params, description) -> FaultKind:
    return FaultKind(name, point, target, {k: Param(*v) for k, v in params.items()},
                     description)


CATALOGUE: dict[str, FaultKind] = {k.name: k for k in [
    # --- measurement: the sensor chain -------------------------------------------------
    _kind("sensor-offset", "measurement", "analog channel",
          {"offset": ("SI unit of the channel", -1e5, 1e5, 0.0)},
          "adds a constant to a measured value (a transducer offset)"),
    _kind("sensor-gain", "measurement", "analog channel", {"gain": ("1", 0.0, 10.0, 1.0)},
          "scales a measured value (a gain error)"),
    _kind("sensor-stuck", "measurement", "analog channel",
          {"value": ("SI unit of the channel", -1e5, 1e5, 0.0)},
          "the measured value freezes at a value (a dead sensor reads 0)"),
    _kind("sensor-dropout", "measurement", "analog channel",
          {"probability": ("1", 0.0, 1.0, 0.2)},
          "the reading falls to 0 in a random fraction of frames (a loose contact)"),
    _kind("sensor-noise", "measurement", "analog channel",
          {"rms": ("SI unit of the channel", 0.0, 1e5, 1.0)},
          "extra white noise on the reading, from the rig's seeded generator"),
    _kind("sensor-drift", "measurement", "analog channel",
          {"rate_per_s": ("SI unit of the channel per s", -1e4, 1e4, 1.0)},
          "the offset grows at a steady rate (a drifting transducer)"),
    _kind("sensor-saturation", "measurement", "analog channel",
          {"limit": ("SI unit of the channel", 0.0, 1e5, 100.0)},
          "the reading clips at +-limit (a transducer or ADC range too small)"),
    _kind("encoder-pulse-loss", "measurement", "encoder",
          {"counts_per_s": ("count/s", -1e5, 1e5, 100.0)},
          "the counter loses (or gains) edges at a steady rate"),
    _kind("encoder-channel-loss", "measurement", "encoder", {},
          "one quadrature channel is lost: no countable edges, the count stands still"),
    _kind("encoder-wrong-ppr", "measurement", "encoder", {"ratio": ("1", 0.1, 10.0, 0.5)},
          "the encoder gives ratio x the pulses per revolution the controller expects"),
    _kind("encoder-eccentricity", "measurement", "encoder",
          {"error_arcmin": ("arcmin", 0.0, 600.0, 30.0)},
          "the disc slips off centre: a once-per-revolution angle error of that peak"),
    # --- power stage and switchgear ----------------------------------------------------
    _kind("gate-driver-fault", "command", "inverter", {},
          "the inverter's gates stay blocked and its fault flag is set"),
    _kind("leg-wont-turn-on", "command", "inverter leg", {"leg": ("0..2 (a, b, c)", 0, 2, 0)},
          "one leg's upper IGBT does not turn on: its duty is forced to 0"),
    _kind("shorted-leg", "command", "inverter leg",
          {"leg": ("0..2 (a, b, c)", 0, 2, 0), "spike_a": ("A", 0.0, 1e4, 2500.0)},
          "a leg shoots through: the driver's desaturation trip blocks the gates and flags "
          "the leg; the phase current reading shows a spike for one period"),
    _kind("open-motor-phase", "plant", "motor", {"phase": ("0..2 (a, b, c)", 0, 2, 0)},
          "one stator phase of one motor opens (a broken cable or lug): that phase carries "
          "no current, the inverter's phase current reading loses that motor's share and "
          "its torque pulsates at twice the stator frequency"),
    _kind("contactor-wont-close", "command", "line converter", {},
          "the line contactor stays open whatever it is commanded"),
    _kind("contactor-welded", "command", "line converter", {},
          "the line contactor is welded: it stays closed whatever it is commanded"),
    _kind("chopper-failed", "command", "DC link", {},
          "the brake chopper does not switch: its duty is forced to 0"),
    _kind("overcurrent-protection-fails", "plant", "inverter", {},
          "the gate drivers' hardware overcurrent/desaturation trip fails to act"),
    _kind("chopper-protection-fails", "plant", "DC link", {},
          "the hardware chopper does not fire on overvoltage"),
    _kind("breaker-protection-fails", "plant", "catenary", {},
          "the main breaker's overcurrent release fails to act"),
    # --- plant parameters --------------------------------------------------------------
    _kind("low-adhesion", "plant", "axle", {"factor": ("1", 0.0, 2.0, 0.3)},
          "the friction coefficient of an axle falls to factor x mu0 (leaves, oil)"),
    _kind("sanding", "plant", "axle",
          {"gain": ("1", 1.0, 3.0, 1.5), "delay_s": ("s", 0.0, 10.0, 1.0)},
          "sand reaches the contact after a delay and raises the friction by a gain"),
    _kind("wheel-diameter-error", "plant", "axle", {"error_pct": ("%", -10.0, 10.0, -2.0)},
          "the wheel's real diameter differs from the controller's value by error_pct"),
    _kind("lost-cooling", "plant", "motor", {"effectiveness": ("1", 0.0, 1.0, 0.0)},
          "the motor's cooling falls to a fraction of its design value"),
    _kind("rotor-temperature", "plant", "motor",
          {"temperature_degc": ("degC", -40.0, 250.0, 150.0)},
          "the rotor cage is held at a temperature the stator sensor does not see "
          "(rotor resistance detuning)"),
    _kind("link-capacitance-loss", "plant", "DC link", {"remaining": ("1", 0.05, 1.0, 0.5)},
          "a DC-link capacitor bank loses part of its capacitance"),
    # --- line: catenary events ---------------------------------------------------------
    _kind("catenary-dip", "line", "catenary", {"voltage_pu": ("1", 0.0, 1.5, 0.7)},
          "the line EMF steps to a fraction of nominal (a dip, or a rise above 1; at 0 a "
          "short behind the source impedance, which the converters can feed)"),
    _kind("catenary-interruption", "line", "catenary", {},
          "the feeding breaker opens: the line's current stops at its next zero and the "
          "section is dead until the fault ends (a reclose)"),

    _kind("phase-jump", "line", "catenary", {"angle_deg": ("deg", -180.0, 180.0, 30.0)},
          "the line voltage's phase jumps once when the fault starts"),
    _kind("line-frequency", "line", "catenary", {"frequency_hz": ("Hz", 1.0, 100.0, 49.5)},
          "the line frequency changes, phase-continuously"),
    _kind("non-receptive-line", "line", "catenary",
          {"droop_v_per_kw": ("V/kW", 0.0, 100.0, 10.0)},
          "the line cannot take regenerated power: its EMF rises with the reverse power"),
    # --- link ------------------------------------------------------------------------
    _kind("telegram-loss", "link", "link", {"probability": ("1", 0.0, 1.0, 0.1)},
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
    label: str = ""
    index: int = -1  # the target's position among its kind, set when scheduled
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
               known_states=(), label: str = "") -> Fault:
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
    return Fault(kind, target, values, at_s, at_m, condition, until_s,
                 label or f"{name}@{target}")

