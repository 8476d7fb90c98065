"""Open-loop slip-frequency V/f modulation: the simplest source of duty cycles.

Stator frequency f_s = p n / 60 + f_slip (measured rotor speed plus a commanded slip
frequency), stator voltage U = U_boost + (U/f) f_s limited to the linear range of
sine-triangle modulation, leg duties d_x = 1/2 + 1/2 m cos(theta - x 2 pi/3) with
m = U / (U_dc/2) (Mohan, Undeland & Robbins, *Power Electronics*, ch. 8; Bose, *Modern
Power Electronics and AC Drives*, scalar control). Positive slip motors, negative slip
brakes. It keeps no current loop and no protection: a signal source for plant checks and
the headless demo, not a controller to learn from.
"""

from __future__ import annotations

import math

import numpy as np


class SlipFrequencyVf:
    """Duty cycles for n inverters from rotor speed, slip frequency and link voltage."""

    def __init__(self, n_inverters: int, pole_pairs: int, volts_per_hz: float,
                 boost_v: float = 20.0, max_modulation: float = 1.0) -> None:
        self.n_inverters = n_inverters
        self.pole_pairs = pole_pairs
        self.volts_per_hz = volts_per_hz
        self.boost_v = boost_v
        self.max_modulation = max_modulation
        self.theta = 0.0
        self.duty = np.full((n_inverters, 3), 0.5)

    def step(self, rotor_speed_rad_s: float, slip_hz: float, dc_link_v: float,
             period_s: float) -> np.ndarray:
        """Advance the angle by one period and return the duties, shape (n, 3)."""
        f_s = self.pole_pairs * rotor_speed_rad_s / (2 * math.pi) + slip_hz
        amplitude = self.boost_v + self.volts_per_hz * abs(f_s)
        m = min(amplitude / (0.5 * dc_link_v), self.max_modulation) if dc_link_v > 0 else 0.0
        self.theta = (self.theta + 2 * math.pi * f_s * period_s) % (2 * math.pi)
        for x in range(3):
            self.duty[:, x] = 0.5 + 0.5 * m * math.cos(self.theta - x * 2 * math.pi / 3)
        return self.duty
