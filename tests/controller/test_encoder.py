"""Speed from an incremental encoder's counts, as a board measures it.

Counting method (Bose, *Modern Power Electronics and AC Drives*, 2002, speed measurement
by pulse counting; from memory): with N lines, four edges per line and a window of M
periods T, the speed is the count difference times 2 pi / (4 N) over M T, so every
reading is a whole number of steps q = 2 pi / (4 N M T) and lies within one step of the
true mean speed over the window. For 256 lines at 1 ms: 6.1 rad/s over one period,
0.77 rad/s over eight.
"""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.controller.encoder import COUNTER_MODULUS, EncoderSpeed

LINES, T = 256, 1e-3


def _counts(speed: float, phase: float, periods: int) -> list[int]:
    """The wrapping 16-bit edge counter at each sample of a shaft turning steadily."""
    edges_per_rad = 4 * LINES / (2 * math.pi)
    return [math.floor((phase + speed * k * T) * edges_per_rad) % COUNTER_MODULUS
            for k in range(periods)]


@settings(max_examples=200, deadline=None)
@given(speed=st.floats(-480.0, 480.0), phase=st.floats(0.0, 2 * math.pi))
def test_counted_speed_is_whole_steps_within_one_step(speed: float, phase: float) -> None:
    enc = EncoderSpeed(LINES, T, window=8, short=4)
    for count in _counts(speed, phase, 40):
        enc.update(count)
    for reading, window in ((enc.speed, 8), (enc.speed_short, 4), (enc.speed_raw, 1)):
        step = 2 * math.pi / (4 * LINES * window * T)
        steps = reading / step
        assert abs(steps - round(steps)) < 1e-6  # a whole number of counts
        # within one count per window (strictly, in exact arithmetic: a shaft resting on
        # an edge reads one whole count in floating point)
        assert abs(reading - speed) <= step


def test_the_counter_wraps_without_a_jump() -> None:
    # 480 rad/s is 78 edges a period: the 16-bit counter wraps every 0.84 s
    enc = EncoderSpeed(LINES, T)
    readings = []
    for count in _counts(480.0, 0.3, 3000):
        readings.append(enc.update(count))
    step = 2 * math.pi / (4 * LINES * 8 * T)
    assert max(abs(r - 480.0) for r in readings[8:]) < step
    # the angle to within one count: what angle-based slip regulation relies on
    assert abs(enc.angle - (480.0 * 2999 * T)) < 2 * math.pi / (4 * LINES)
