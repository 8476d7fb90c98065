"""The track under the train: gradient, curves, speed limits, neutral sections, adhesion.

Applied to the plant once per frame. The train's position is its front end's; gradient,
curves, speed limits and neutral sections are taken there (one point, a simplification
of a train some tens of metres long), while low-adhesion zones reach each motored axle
at its own place (the profile's axle_positions_m behind the front), so the axles enter
a zone one after another.

Rail conditioning (a simple model of our own, the rate invented for demos): every
motored axle that has rolled over a point of a zone cleans the rail there a little, so
an axle with n motored axles ahead of it in the direction of travel meets

    mu = mu_line - (mu_line - mu_zone) (1 - c)^n,    c = the zone's cleaning_per_axle,

where mu_line is the line's own friction (the profile's rail condition) and mu_zone the
zone's (its rail condition times its factor). Unmotored axles are not counted, and the
model does not remember where axles have rolled: it counts the motored axles ahead in
the direction of travel, so a train that starts or reverses inside a zone gets their
cleaning at once.

Curve resistance is a friction on the train (against the motion, holding at rest), by
Röckl's formula for standard gauge (from memory, as quoted in running-time texts, e.g.
Hansen & Pachl, *Railway Timetabling & Operations*, ch. on running time calculation):

    r_c = 650 / (R - 55) N/kN   for R >= 300 m,      r_c = 500 / (R - 30) N/kN below,

with F = m g r_c / 1000.
"""

from __future__ import annotations

import math

from emulator.plant.drivetrain import RAIL_CONDITIONS
from emulator.profiles.reader import GRAVITY

from .spec import Stretch, TrackSpec


def curve_resistance_per_mille(radius_m: float) -> float:
    """Röckl's curve resistance, N/kN (= per mille of equivalent gradient)."""
    if radius_m >= 300.0:
        return 650.0 / (radius_m - 55.0)
    return 500.0 / (radius_m - 30.0)


def _at(stretches: tuple[Stretch, ...], x: float, default: float) -> float:
    value = default
    for s in stretches:
        if s.from_m <= x < s.to_m:
            value = s.value
    return value


class Track:
    """Applies a TrackSpec to a plant and tells the driver and controller what is ahead."""

    def __init__(self, spec: TrackSpec, plant) -> None:
        self.spec = spec
        self.plant = plant
        p = plant.params
        self.motor_names = p.motor_names
        for zone in spec.adhesion_zones:
            for axle in zone.axles:
                if axle not in self.motor_names:
                    raise ValueError(f"low-adhesion zone at {zone.from_m:g} m: no motored "
                                     f"axle named {axle!r}")
        self.base_rail = p.drivetrain.rail_condition
        self.axle_offsets = [x for c in p.converters
                             for x in (c.axle_positions_m or (0.0,) * len(c.wheel_diameters_m))]
        self._gradient = math.nan
        self._curve = math.nan
        self._live: bool | None = None
        self._axle_state: list[tuple[str, float] | None] = [None] * len(self.motor_names)
        self.decel = 0.5
        self.on_event = None  # callback(label, "start" | "end", time)
        self._inside: set[str] = set()

    def gradient(self, x: float) -> float:
        """The track's gradient at x, rise over run."""
        return _at(self.spec.gradients, x, 0.0)

    def curve_resistance(self, x: float) -> float:
        """The curve resistance of the train at x, N (Röckl's, over the train's weight)."""
        radius = _at(self.spec.curves, x, 0.0)
        if not radius:
            return 0.0
        p = self.plant.params
        return curve_resistance_per_mille(radius) * 1e-3 * p.train.mass_kg * GRAVITY

    def ceiling(self, x: float, v: float) -> float:
        """The highest speed allowed now: each limit here or ahead, by a braking curve."""
        best = math.inf
        for s in self.spec.speed_limits:
            if s.to_m <= x:
                continue
            gap = max(s.from_m - x, 0.0)
            best = min(best, math.sqrt(s.value * s.value + 2 * self.decel * gap))
        return best

    def update(self, rig) -> None:
        """Set gradient, supply and adhesion for the train's position; once per frame."""
        plant = self.plant
        x = plant.read("train.position_m")
        g = self.gradient(x)
        if g != self._gradient:
            plant.set_gradient(g)
            self._gradient = g
        r = self.curve_resistance(x)
        if r != self._curve:
            plant.set_curve_resistance(r)
            self._curve = r
        if self.spec.neutral_sections and plant.line_side:
            live, ahead = True, False
            for n in self.spec.neutral_sections:
                if n.from_m <= x < n.to_m:
                    live = False
                self._note(n.label, n.from_m <= x < n.to_m, plant.time_s)
                if n.from_m - n.notice_m <= x < n.to_m:
                    ahead = True
            if live != self._live:
                plant.set_supply(live=live)
                self._live = live
            rig.driver.neutral_section_ahead = int(ahead)
        if not self.spec.adhesion_zones:
            return
        for z in self.spec.adhesion_zones:
            self._note(z.label, any(z.from_m <= x - d < z.to_m for d in self.axle_offsets),
                       plant.time_s)
        forward = plant.read("train.speed_mps") >= 0.0
        mu_line = RAIL_CONDITIONS[self.base_rail][2]
        for i, name in enumerate(self.motor_names):
            here = x - self.axle_offsets[i]
            state = None
            for z in self.spec.adhesion_zones:  # the last zone written wins where they overlap
                if z.from_m <= here < z.to_m and (not z.axles or name in z.axles):
                    ahead = sum(1 for d in self.axle_offsets
                                if (d < self.axle_offsets[i] if forward
                                    else d > self.axle_offsets[i]))
                    mu_zone = RAIL_CONDITIONS[z.rail][2] * z.factor
                    mu = mu_line - (mu_line - mu_zone) * (1.0 - z.cleaning_per_axle) ** ahead
                    state = (z.rail, mu / RAIL_CONDITIONS[z.rail][2])
            if state != self._axle_state[i]:
                rail, factor = state or (self.base_rail, 1.0)
                plant.set_rail_condition(i, rail)
                plant.set_adhesion_factor(i, factor)
                self._axle_state[i] = state

    def _note(self, label: str, inside: bool, t: float) -> None:
        if inside != (label in self._inside):
            (self._inside.add if inside else self._inside.discard)(label)
            if self.on_event is not None:
                self.on_event(label, "start" if inside else "end", t)
