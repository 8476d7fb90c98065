"""Rotor angle and speed from an incremental encoder's wrapping edge counter.

A board sees only the counter: N lines give 4 N edges per revolution, counted into an
unsigned 16-bit register that wraps. The angle is the unwrapped count times 2 pi / (4 N);
the speed by the counting method is the count difference over a window of M periods,
whose resolution is one count per window, 2 pi / (4 N M T) (Bose, *Modern Power
Electronics and AC Drives*, 2002, speed measurement by pulse counting; from memory). At
256 lines and 1 ms that is 6.1 rad/s for one period, 0.77 rad/s over eight. Angle-based
control (the field angle from the counted rotor angle plus the integrated slip) does not
accumulate the speed's quantisation; the windowed speed serves the back-EMF feed-forward,
field weakening and the power limits, which tolerate its few milliseconds of lag.
"""

from __future__ import annotations

import math
from collections import deque
from itertools import islice

COUNTER_MODULUS = 1 << 16


class EncoderSpeed:
    """One motor's rotor angle (rad, unwrapped) and windowed speed (rad/s)."""

    def __init__(self, lines: int, period_s: float, window: int = 8, short: int = 4) -> None:
        self.rad_per_count = 2 * math.pi / (4 * lines)
        self.T = period_s
        self.window = window
        self.last: int | None = None
        self.angle = 0.0
        self.counts: deque[int] = deque([0] * window, maxlen=window)
        self.short = short
        self.speed = 0.0  # over the window
        self.speed_short = 0.0  # over the last ``short`` periods: less lag, coarser
        self.differences = 0  # count differences taken so far
        self.speed_raw: float | None = None  # over the last period (None before two
        # counts: the counting method's resolution, what a plausibility check compares)

    def update(self, count: float) -> float:
        """Take this period's counter value; returns the windowed speed, rad/s."""
        c = int(count) % COUNTER_MODULUS
        if self.last is None:  # the first count: an angle, not yet a speed
            self.last = c
            return self.speed
        delta = (c - self.last + COUNTER_MODULUS // 2) % COUNTER_MODULUS - COUNTER_MODULUS // 2
        self.last = c
        self.angle += delta * self.rad_per_count
        self.differences += 1
        if self.speed_raw is None:  # the first difference stands for the whole window
            self.counts.extend([delta] * self.window)
        else:
            self.counts.append(delta)
        self.speed_raw = delta * self.rad_per_count / self.T
        self.speed = sum(self.counts) * self.rad_per_count / (self.window * self.T)
        recent = sum(islice(reversed(self.counts), self.short))
        self.speed_short = recent * self.rad_per_count / (self.short * self.T)
        return self.speed

    @property
    def settled(self) -> bool:
        """Whether the window holds only measured differences (not the first one spread)."""
        return self.differences >= self.window
