"""The train's friction-brake unit: the driver's brake demand to the axles, with
wheel-slide protection on the motored axles.

The brake unit is the train's own equipment, not the firmware under test: it measures
its axles' speeds with its own sensors (here the wheelset speeds) and vents an axle's
brake cylinder through a dump valve while that axle slides, re-applying once it runs
with the train again (the usual behaviour of wheel-slide protection; EN 15595 sets its
test conditions, the thresholds here are common practice with no source). The
reference speed is the fastest axle, falling no faster than a full service brake can
decelerate the train plus a margin, so a set of axles sliding together still shows.
"""

from __future__ import annotations

import numpy as np


class BrakeUnit:
    """Friction brake demand with per-axle wheel-slide protection."""

    def __init__(self, plant, frame_s: float, enabled: bool = True,
                 slide_mps: float = 1.0, slide_fraction: float = 0.15,
                 decel_limit_mps2: float = 1.6) -> None:
        self.plant = plant
        self.T = frame_s
        self.enabled = enabled
        self.slide_mps = slide_mps
        self.slide_fraction = slide_fraction
        self.decel_limit = decel_limit_mps2
        r = np.array([d / 2 for c in plant.params.converters for d in c.wheel_diameters_m])
        self.radius = r
        self.vent = np.zeros(len(r))
        self.v_ref: float | None = None
        self.vented_frames = 0
        #: the last apply() released the brake (the plant's demands are zero, no valve
        #: vents: the unit is the only writer of the plant's brake demands), so another
        #: release has nothing to change: the driver releases every frame it does not brake
        self._released = False

    def apply(self, force_n: float) -> None:
        """Demand force_n of the train's friction brake this frame, with the dump valves
        of the sliding axles open."""
        plant = self.plant
        if force_n <= 0.0 or not self.enabled:
            if force_n <= 0.0 and self._released:
                return
            self.vent[:] = 0.0
            self.v_ref = None
            plant.set_brake_force(max(force_n, 0.0))
            self._released = force_n <= 0.0
            return
        self._released = False
        wheels = np.abs(plant.read("motor.wheelset_speed_rad_s")) * self.radius
        fastest = float(wheels.max())
        if self.v_ref is None:
            self.v_ref = fastest
        self.v_ref = max(fastest, self.v_ref - self.decel_limit * self.T)
        limit = max(self.slide_mps, self.slide_fraction * self.v_ref)
        slide = self.v_ref - wheels
        self.vent[slide > limit] = 1.0
        self.vent[slide < 0.5 * limit] = 0.0  # hysteresis: re-apply once it runs again
        if self.vent.any():
            self.vented_frames += 1
        plant.set_brake_force(force_n, self.vent)
