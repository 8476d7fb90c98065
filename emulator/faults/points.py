"""Applying the fault catalogue to a rig, each fault at its point, once per frame.

``FaultSet.update`` runs at the start of each frame's plant step: it starts faults whose
trigger fired and ends those whose time is up (measurement, plant and line points act
from this frame on); ``transform_command`` changes the command vector on its way to the
plant; ``drop`` is asked for every received telegram. Every change is undone exactly
when the fault ends, and reported to ``on_change(fault, "start" | "end", time)``.
"""

from __future__ import annotations

import math
import random
from typing import Any

from emulator.faults.catalogue import Fault, FaultError, make_fault
from emulator.plant import layout as L  # noqa: N812  (as in the plant)


class FaultSet:
    """The faults of a run, applied to a rig at their points each frame."""

    def __init__(self, rig, seed: int = 0) -> None:
        self.rig = rig
        self.faults: list[Fault] = []
        self._rng = random.Random(seed)
        p = rig.plant.params
        self._motors = p.motor_names
        self._targets = {
            "analog channel": rig.sampler.analog_names, "encoder": self._motors,
            "axle": self._motors, "motor": self._motors,
            "inverter": [c.name for c in p.converters],
            "inverter leg": [c.name for c in p.converters],
            "DC link": [lk.name for lk in p.dc_links],
            "line converter": [u.name for u in p.line_converters],
            "catenary": ["catenary"] if rig.plant.line_side else [], "link": ["link"]}
        self.drop_probability = 0.0
        self.on_change = None  # callback(fault, "start" | "end", plant time)

    def targets(self) -> dict[str, list[str]]:
        """Names of the targets in this trainset, by the kind of target faults take."""
        return {kind: list(names) for kind, names in self._targets.items()}

    def add(self, name: str, target: str, params: dict[str, float] | None = None,
            **triggers) -> Fault:
        """Schedule a fault; the target is checked now, not when the fault starts."""
        fault = make_fault(name, target, params, known_states=self.rig.plant.names(),
                           **triggers)
        fault.index = self._resolve(fault)  # raises FaultError for an unknown target
        self.faults.append(fault)
        return fault

    def clear(self, name: str) -> None:
        """End every active fault of that name (catalogue name, name@target or label)."""
        for f in self.faults:
            if f.active and name in (f.kind.name, f.name, f.label):
                self._remove(f)

    def _resolve(self, f: Fault) -> int:
        table = self._targets[f.kind.target]
        if f.target not in table:
            known = ", ".join(table[:6]) + ("..." if len(table) > 6 else "")
            raise FaultError(f"{f.kind.name}: no {f.kind.target} named {f.target!r} "
                             f"(known: {known or 'none in this trainset'})")
        return table.index(f.target)

    def update(self) -> None:
        """Start faults whose trigger fired, end those whose time is up; per frame."""
        plant = self.rig.plant
        for f in self.faults:
            if not f.active and not f.done and f.due(plant):
                self._apply(f)
            elif f.active and f.stop_s is not None and plant.time_s >= f.stop_s:
                self._remove(f)
            if f.active:
                self._each_frame(f)

    # --- the points ---------------------------------------------------------------------
    def _each_frame(self, f: Fault) -> None:
        """Faults that act anew every frame."""
        i, kind, rig = f.index, f.kind.name, self.rig
        analog, dt = rig.sampler.analog, rig.period_us * 1e-6
        if kind == "encoder-pulse-loss":
            acc = f.applied.setdefault("acc", 0.0) + f.params["counts_per_s"] * dt
            whole = math.trunc(acc)
            f.applied["acc"] = acc - whole
            rig.sampler.encoders.count_offset[i] -= whole
        elif kind == "sensor-dropout":
            analog.stuck[i] = 0.0 if self._rng.random() < f.params["probability"] else math.nan
        elif kind == "sensor-drift":
            step = f.params["rate_per_s"] * dt
            analog.fault_offset[i] += step
            f.applied["drifted"] = f.applied.get("drifted", 0.0) + step
        elif kind == "shorted-leg" and f.applied.get("spike_frames", 0) > 0:
            f.applied["spike_frames"] -= 1
            if f.applied["spike_frames"] == 0:
                analog.fault_offset[f.applied["channel"]] -= f.params["spike_a"]
        elif kind == "sanding" and not f.applied.get("acting"):
            if rig.plant.time_s - f.applied["since"] >= f.params["delay_s"]:
                f.applied["acting"] = True
                rig.plant.set_adhesion_factor(i, min(f.applied["was"] * f.params["gain"],
                                                     2.0))
        elif kind == "rotor-temperature":
            rig.plant.ms[i, L.MS_T_ROTOR] = f.params["temperature_degc"] + 273.15

    def _apply(self, f: Fault) -> None:
        i, kind, rig = f.index, f.kind.name, self.rig
        analog, plant, enc = rig.sampler.analog, rig.plant, rig.sampler.encoders
        if kind == "sensor-offset":
            analog.fault_offset[i] += f.params["offset"]
        elif kind == "sensor-gain":
            analog.fault_gain[i] *= f.params["gain"]
        elif kind == "sensor-stuck":
            analog.stuck[i] = f.params["value"]
        elif kind == "sensor-noise":
            f.applied["was"] = float(analog.noise[i])
            analog.set_noise(i, math.hypot(analog.noise[i], f.params["rms"]))
        elif kind == "sensor-saturation":
            f.applied["was"] = (float(analog.lo[i]), float(analog.hi[i]))
            analog.lo[i] = max(analog.lo[i], -f.params["limit"])
            analog.hi[i] = min(analog.hi[i], f.params["limit"])
        elif kind in ("encoder-channel-loss", "encoder-wrong-ppr"):
            scale = 0.0 if kind == "encoder-channel-loss" else f.params["ratio"]
            f.applied["was"] = float(enc.edge_scale[i])
            enc.set_edge_scale(i, scale, float(plant.ms[i, L.MS_THETA_M]))
        elif kind == "encoder-eccentricity":
            f.applied["was"] = float(enc.eccentricity[i])
            enc.eccentricity[i] = math.radians(f.params["error_arcmin"] / 60)
        elif kind == "gate-driver-fault":
            rig.sampler.gate_fault[i] = 7
        elif kind == "shorted-leg":
            leg = int(f.params["leg"])
            rig.sampler.gate_fault[i] |= 1 << leg
            channel = rig.sampler.analog_names.index(f"{f.target}.current_{'abc'[leg]}_a")
            analog.fault_offset[channel] += f.params["spike_a"]
            f.applied.update(channel=channel, spike_frames=1)
        elif kind in ("low-adhesion", "sanding"):
            f.applied["was"] = float(plant.mpar[i, L.MP_ADHESION_FACTOR])
            f.applied["since"] = plant.time_s
            if kind == "low-adhesion":
                plant.set_adhesion_factor(i, f.params["factor"])
        elif kind == "wheel-diameter-error":
            f.applied["was"] = float(plant.mpar[i, L.MP_WHEEL_R])
            plant.mpar[i, L.MP_WHEEL_R] *= 1 + f.params["error_pct"] / 100
        elif kind == "open-motor-phase":
            plant.set_open_phase(i, int(f.params["phase"]))
        elif kind == "lost-cooling":
            f.applied["was"] = float(plant.mpar[i, L.MP_COOLING])
            plant.mpar[i, L.MP_COOLING] = f.params["effectiveness"]
        elif kind == "link-capacitance-loss":
            f.applied["was"] = float(plant.kp[i, L.KP_C])
            plant.kp[i, L.KP_C] *= f.params["remaining"]
        elif kind in PROTECTIONS:
            _protection(plant, kind, i, 0.0)
        elif f.kind.point == "line":
            self._apply_line(f)
        elif kind == "telegram-loss":
            self.drop_probability = f.params["probability"]
        f.active = True
        self._notify(f, "start")

    def _apply_line(self, f: Fault) -> None:
        plant, kind, sp = self.rig.plant, f.kind.name, self.rig.plant.sp
        if kind == "catenary-dip":
            f.applied["was"] = float(sp[L.SP_AMPLITUDE]) / math.sqrt(2)
            plant.set_supply(voltage_rms_v=f.params["voltage_pu"]
                             * plant.params.supply.nominal_voltage_v)
        elif kind == "catenary-interruption":
            plant.set_supply(live=False)
        elif kind == "phase-jump":
            plant.set_supply(phase_jump_rad=math.radians(f.params["angle_deg"]))
        elif kind == "line-frequency":
            f.applied["was"] = float(sp[L.SP_FREQUENCY])
            plant.set_supply(frequency_hz=f.params["frequency_hz"])
        elif kind == "non-receptive-line":
            f.applied["was"] = float(sp[L.SP_DROOP])
            plant.set_supply(droop_v_per_w=f.params["droop_v_per_kw"] * 1e-3)

    def _remove(self, f: Fault) -> None:
        i, kind, rig = f.index, f.kind.name, self.rig
        analog, plant, enc = rig.sampler.analog, rig.plant, rig.sampler.encoders
        was = f.applied.get("was")
        if kind == "sensor-offset":
            analog.fault_offset[i] -= f.params["offset"]
        elif kind == "sensor-gain":
            # the product of the gain faults still acting on the channel (none: 1): exact,
            # and a gain of 0 (within its range) is undone too, where dividing could not
            gain = 1.0
            for other in self.faults:
                if (other is not f and other.active and other.kind.name == "sensor-gain"
                        and other.index == i):
                    gain *= other.params["gain"]
            analog.fault_gain[i] = gain
        elif kind in ("sensor-stuck", "sensor-dropout"):
            analog.stuck[i] = math.nan
        elif kind == "sensor-drift":
            analog.fault_offset[i] -= f.applied.get("drifted", 0.0)
        elif kind == "sensor-noise":
            analog.set_noise(i, was)
        elif kind == "sensor-saturation":
            analog.lo[i], analog.hi[i] = was
        elif kind in ("encoder-channel-loss", "encoder-wrong-ppr"):
            enc.set_edge_scale(i, was, float(plant.ms[i, L.MS_THETA_M]))
        elif kind == "encoder-eccentricity":
            enc.eccentricity[i] = was
        elif kind == "gate-driver-fault":
            rig.sampler.gate_fault[i] = 0
        elif kind == "shorted-leg":
            rig.sampler.gate_fault[i] &= ~(1 << int(f.params["leg"]))
            if f.applied.get("spike_frames", 0) > 0:
                analog.fault_offset[f.applied["channel"]] -= f.params["spike_a"]
        elif kind in ("low-adhesion", "sanding"):
            plant.set_adhesion_factor(i, was)
        elif kind == "wheel-diameter-error":
            plant.mpar[i, L.MP_WHEEL_R] = was
        elif kind == "open-motor-phase":
            plant.set_open_phase(i, None)
        elif kind == "lost-cooling":
            plant.mpar[i, L.MP_COOLING] = was
        elif kind == "link-capacitance-loss":
            plant.kp[i, L.KP_C] = was
        elif kind in PROTECTIONS:
            _protection(plant, kind, i, 1.0)
        elif kind == "catenary-dip":
            plant.set_supply(voltage_rms_v=was)
        elif kind == "catenary-interruption":
            plant.set_supply(live=True)
        elif kind == "line-frequency":
            plant.set_supply(frequency_hz=was)
        elif kind == "non-receptive-line":
            plant.set_supply(droop_v_per_w=was)
        elif kind == "telegram-loss":
            self.drop_probability = 0.0
        f.active, f.done = False, True
        self._notify(f, "end")

    def _notify(self, f: Fault, what: str) -> None:
        if self.on_change is not None:
            self.on_change(f, what, self.rig.plant.time_s)

    def transform_command(self, values, names_index) -> None:
        """Command-point faults act on the command vector (physical units) in place."""
        for f in self.faults:
            if not f.active:
                continue
            kind = f.kind.name
            if kind in ("gate-driver-fault", "shorted-leg"):
                values[names_index[f"{f.target}.gates_enabled"]] = 0.0
            elif kind == "leg-wont-turn-on":
                leg = "abc"[int(f.params["leg"])]
                values[names_index[f"{f.target}.duty_{leg}"]] = 0.0
            elif kind in ("contactor-wont-close", "contactor-welded"):
                welded = kind == "contactor-welded"
                values[names_index[f"{f.target}.line_contactor_close"]] = float(welded)
            elif kind == "chopper-failed":
                values[names_index[f"{f.target}.chopper_duty"]] = 0.0

    def drop(self) -> bool:
        """Whether the link fault eats this telegram."""
        return self.drop_probability > 0.0 and self._rng.random() < self.drop_probability

    def listing(self) -> list[dict[str, Any]]:
        """The faults with their state, for reports and the monitor."""
        return [{"name": f.name, "label": f.label, "point": f.kind.point, "params": f.params,
                 "state": "active" if f.active else ("cleared" if f.done else "armed")}
                for f in self.faults]


#: the faults that keep a hardware protection from acting, and its enable column
PROTECTIONS = {"overcurrent-protection-fails": ("ipar", L.IP_HW_ON),
               "chopper-protection-fails": ("kp", L.KP_HW_ENABLE),
               "breaker-protection-fails": ("sp", L.SP_HW_LINE_ON)}


def _protection(plant, kind: str, index: int, enabled: float) -> None:
    """Set a hardware protection's enable flag (0: it fails to act)."""
    array, column = PROTECTIONS[kind]
    if array == "sp":
        plant.sp[column] = enabled
    else:
        getattr(plant, array)[index, column] = enabled
