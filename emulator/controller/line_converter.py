"""Four-quadrant line converter control: DC-link voltage, line current, power limits.

- DC-link voltage: PI on the link voltage through a notch at twice the line frequency
  (the single-phase 2f ripple must not reach the current reference), plus feedforward
  of the load power; output: the link's power reference (Steimel, *Electric Traction*,
  2008, line-converter chapter, from memory; common practice).
- Line current: predictive (deadbeat) control of i = I sin(theta) in phase with the
  pantograph voltage (power factor 1 in traction, -1 in regeneration). The command
  computed at t_k acts from t_(k+1) to t_(k+2) (one period of delay): the controller
  predicts i(t_(k+1)) with the voltage it already applies, then asks for the converter
  voltage that brings i(t_(k+2)) to its reference: u = u_sec - L (i* - i_pred) / T
  (Buso & Mattavelli, *Digital Control in Power Electronics*, predictive current control,
  from memory).
- Limits: regeneration falls to zero as the line voltage approaches U_max2, traction as
  it falls toward U_min2 (EN 50388 practice, from memory).
"""

from __future__ import annotations

import math

from .config import ControllerConfig


class Notch:
    """Second-order notch filter, Tustin with pre-warping (RBJ audio-EQ cookbook form)."""

    def __init__(self, f_hz: float, period_s: float, q: float = 0.7) -> None:
        w0 = 2 * math.pi * f_hz * period_s
        alpha = math.sin(w0) / (2 * q)
        a0 = 1 + alpha
        self.b = (1 / a0, -2 * math.cos(w0) / a0, 1 / a0)
        self.a = (-2 * math.cos(w0) / a0, (1 - alpha) / a0)
        self.x1 = self.x2 = self.y1 = self.y2 = None

    def __call__(self, x: float) -> float:
        if self.x1 is None:
            self.x1 = self.x2 = self.y1 = self.y2 = x
        b, a = self.b, self.a
        y = b[0] * x + b[1] * self.x1 + b[2] * self.x2 - a[0] * self.y1 - a[1] * self.y2
        self.x2, self.x1, self.y2, self.y1 = self.x1, x, self.y1, y
        return y


def power_limits(cfg: ControllerConfig, line_rms_v: float, regeneration_allowed: bool,
                 p_rated_w: float) -> tuple[float, float]:
    """(lowest, highest) power a link may exchange with the line, W."""
    span_low = max(cfg.line_u_min1_v - cfg.line_u_min2_v, 1.0)
    traction = min(max((line_rms_v - cfg.line_u_min2_v) / span_low, 0.0), 1.0)
    span_high = max(cfg.line_u_max2_v - cfg.line_u_max1_v, 1.0)
    regen = min(max((cfg.line_u_max2_v - line_rms_v) / span_high, 0.0), 1.0)
    if not regeneration_allowed:
        regen = 0.0
    return -regen * p_rated_w, traction * p_rated_w


def chopper_duty(nominal_v: float, u_d: float) -> float:
    """Brake chopper duty: 0 at nominal + 100 V rising to 1 at nominal + 250 V, so the
    resistor takes its full power below the link's overvoltage trip."""
    return min(max((u_d - nominal_v - 100.0) / 150.0, 0.0), 1.0)


class LinkControl:
    """One DC link and its line converters."""

    def __init__(self, cfg: ControllerConfig, n_converters: int, p_rated_w: float,
                 voltage_bandwidth_hz: float = 8.0, deadbeat_gain: float = 1.0) -> None:
        self.cfg = cfg
        self.n = n_converters
        self.p_rated = p_rated_w
        self.T = cfg.period_s
        self.u_ref = cfg.link_nominal_v
        self.notch = Notch(2 * cfg.line_frequency_hz, cfg.period_s)
        w = 2 * math.pi * voltage_bandwidth_hz
        # plant from power to voltage: C U dU/dt = P  ->  PI crossing at w
        self.kp = w * cfg.link_capacitance_f * cfg.link_nominal_v
        self.ki = self.kp * w / 4
        self.integral = 0.0
        self.g = deadbeat_gain
        self.u_applied: list[float] | None = None  # converter voltage acting this period
        self.power_ref = 0.0
        self.u_ramp: float | None = None  # soft-start reference, V
        self.ramp_v_per_s = 2000.0
        # current amplitude limit per converter: 1.5 x the rated peak current
        self.i_max = 1.5 * math.sqrt(2) * p_rated_w / (n_converters * max(cfg.secondary_v, 1.0))

    def reset(self) -> None:
        """Forget the integrator and the soft start (after a trip or while blocked)."""
        self.integral = 0.0
        self.u_applied = None
        self.u_ramp = None

    def step(self, u_d: float, theta: float, omega: float, u_sec_peak: float,
             i_sec: list[float], p_feedforward: float, p_min: float, p_max: float
             ) -> tuple[list[float], float]:
        """Modulation per converter and the chopper duty for this period."""
        T, L = self.T, self.cfg.secondary_leakage_h
        u_f = self.notch(u_d)
        # soft start: the reference ramps from the voltage at release to the nominal one
        if self.u_ramp is None:
            self.u_ramp = u_f
        self.u_ramp = min(self.u_ramp + self.ramp_v_per_s * T, self.u_ref)
        err = self.u_ramp - u_f
        p = p_feedforward + self.kp * err + self.integral
        if p_min < p < p_max:
            self.integral += self.ki * err * T  # anti-windup: integrate inside the limits
        p = min(max(p, p_min), p_max)
        self.power_ref = p
        i_peak = 2 * p / (self.n * max(u_sec_peak, 1.0))  # P = n U I / 2 per link
        i_peak = min(max(i_peak, -self.i_max), self.i_max)
        mods = []
        # voltage over the period now running, and over the next one (the command's)
        u_sec_now = u_sec_peak * math.sin(theta + 0.5 * omega * T)
        u_sec_next = u_sec_peak * math.sin(theta + 1.5 * omega * T)
        if self.u_applied is None:  # just released: the bridge was blocked, no current
            self.u_applied = [u_sec_now] * self.n
        for k in range(self.n):
            i_pred = i_sec[k] + T / L * (u_sec_now - self.u_applied[k])
            i_ref = i_peak * math.sin(theta + 2.0 * omega * T)
            u = u_sec_next - self.g * L * (i_ref - i_pred) / T
            m = min(max(u / max(u_d, 1.0), -1.0), 1.0)
            self.u_applied[k] = m * u_d
            mods.append(m)
        chopper = chopper_duty(self.cfg.link_nominal_v, u_d)
        return mods, chopper
