"""Wheel-slip and slide control across the motored axles.

The train's reference speed is estimated from the axles themselves: in traction the
slowest wheel, in braking the fastest, limited in how fast it may change by what the
train can plausibly do: its effort over its mass plus a margin for gradients (a train
cannot accelerate or brake faster than its own effort lets it, so when every axle slips
or slides at once the reference keeps to the train and the creep shows). A creep
velocity beyond a bound cuts the inverter's torque fast; it is re-applied slowly, probing
for the adhesion limit again (common practice of slip controllers; EN 15595 describes the
test conditions for the slide case). A wheel-acceleration criterion needs a finer speed
than 256 counted lines give at 1 ms (0.16 m/s at the rail over 4 ms: tens of m/s^2 of
noise in a derivative); it waits for the edge-time (period) measurement.
"""

from __future__ import annotations


class AdhesionControl:
    """Torque factor per inverter from the axles' creep velocities."""

    def __init__(self, period_s: float, inverter_of_axle: list[int], n_inverters: int,
                 creep_limit_mps: float = 0.35, decel_limit_mps2: float = 1.5,
                 cut_rate_per_s: float = 4.0, reapply_rate_per_s: float = 0.5,
                 accel_margin_mps2: float = 0.25) -> None:
        self.T = period_s
        self.inverter_of_axle = inverter_of_axle
        self.factor = [1.0] * n_inverters
        self.creep_limit = creep_limit_mps
        self.a_max = decel_limit_mps2  # when no plausible rate is given
        self.a_margin = accel_margin_mps2  # gradients and resistance beyond the effort
        self.cut = cut_rate_per_s
        self.reapply = reapply_rate_per_s
        self.v_ref: float | None = None
        self.creep = [0.0] * len(inverter_of_axle)
        self.enabled = True

    def step(self, wheel_speeds_mps: list[float], braking: bool,
             plausible_mps2: float | None = None) -> list[float]:
        """Torque factors (0..1) per inverter for this period.

        plausible_mps2: the fastest the train itself can change speed now (its effort
        over its mass); the reference speed changes no faster than that plus a margin.
        """
        v_axles = min(wheel_speeds_mps) if not braking else max(wheel_speeds_mps)
        if self.v_ref is None:
            self.v_ref = v_axles
        a_limit = (self.a_max if plausible_mps2 is None
                   else abs(plausible_mps2) + self.a_margin)
        dv = a_limit * self.T
        self.v_ref = min(max(v_axles, self.v_ref - dv), self.v_ref + dv)
        self.creep = [w - self.v_ref for w in wheel_speeds_mps]
        if not self.enabled:
            self.factor = [1.0] * len(self.factor)
            return self.factor
        worst = [0.0] * len(self.factor)
        for axle, creep in enumerate(self.creep):
            k = self.inverter_of_axle[axle]
            worst[k] = max(worst[k], -creep if braking else creep)
        for k, c in enumerate(worst):
            if c > self.creep_limit:
                self.factor[k] = max(self.factor[k] - self.cut * self.T, 0.0)
            else:
                self.factor[k] = min(self.factor[k] + self.reapply * self.T, 1.0)
        return self.factor
