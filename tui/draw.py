"""Text drawing for the dashboard: strip plots in braille dots, gauges in blocks.

Pure functions of numbers to strings, so they are tested without an app and read the
same without colour.
"""

from __future__ import annotations

import math

import numpy as np

BRAILLE = 0x2800
# bit of the dot at (column, row) of a 2x4 braille cell (Unicode braille patterns)
DOT = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))
PARTIAL = " ▏▎▍▌▋▊▉"


def span(values: np.ndarray) -> tuple[float, float]:
    """Lowest and highest finite value, widened when flat or empty."""
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return 0.0, 1.0
    lo, hi = float(finite.min()), float(finite.max())
    if hi - lo < 1e-9 * max(1.0, abs(hi)):
        pad = max(abs(hi) * 0.05, 1e-3)
        return lo - pad, hi + pad
    return lo, hi


def strip_plot(t: np.ndarray, v: np.ndarray, t_end: float, span_s: float, width: int,
               height: int, lo: float | None = None, hi: float | None = None) -> list[str]:
    """A line plot of v(t) over [t_end - span_s, t_end] in width x height braille cells.

    Each of the 2*width dot columns covers span_s/(2*width) seconds and draws the range
    of the samples in it, joined to the previous column, so a fast swing shows as a band
    rather than vanishing between samples. Values outside lo..hi are clipped to the edge.
    Returns ``height`` strings of ``width`` characters, top row first.
    """
    if width <= 0 or height <= 0:
        return []
    if lo is None or hi is None:
        auto_lo, auto_hi = span(v)
        lo = auto_lo if lo is None else lo
        hi = auto_hi if hi is None else hi
    cols, rows = 2 * width, 4 * height
    cells = [[0] * width for _ in range(height)]
    t0 = t_end - span_s
    inside = (t >= t0) & (t <= t_end)
    gap = np.zeros(cols, dtype=bool)  # columns holding a NaN sample: a dropped signal
    gap[_columns(t[inside & ~np.isfinite(v)], t0, span_s, cols)] = True
    ok = np.isfinite(v) & inside
    column = _columns(t[ok], t0, span_s, cols)
    scale = (rows - 1) / (hi - lo) if hi > lo else 0.0
    pixel = np.clip(np.rint((hi - v[ok]) * scale), 0, rows - 1).astype(int)

    def fill(x: int, y0: int, y1: int) -> None:
        for y in range(min(y0, y1), max(y0, y1) + 1):
            cells[y // 4][x // 2] |= DOT[x % 2][y % 4]

    prev_x = prev_y = None
    for x in np.unique(column):
        here = pixel[column == x]
        first = int(here[0])
        if prev_x is not None and not gap[prev_x + 1:x].any():
            # join the last sample of the previous column to the first of this one,
            # straight across any columns between them that had no sample
            for xi in range(prev_x + 1, x + 1):
                ya = prev_y + (first - prev_y) * (xi - 1 - prev_x) / (x - prev_x)
                yb = prev_y + (first - prev_y) * (xi - prev_x) / (x - prev_x)
                fill(xi, round(ya), round(yb))
        fill(int(x), int(here.min()), int(here.max()))
        prev_x, prev_y = int(x), int(here[-1])
    return ["".join(chr(BRAILLE + c) if c else " " for c in row) for row in cells]


def _columns(t: np.ndarray, t0: float, span_s: float, cols: int) -> np.ndarray:
    """Dot column of each time."""
    return np.minimum(((t - t0) / span_s * cols).astype(int), cols - 1)


def gauge(value: float, lo: float, hi: float, width: int) -> str:
    """A bar of ``width`` cells for value within lo..hi, in eighths of a cell.

    Where lo < 0 < hi the bar grows from the zero point (left for negative values), as
    an effort gauge shows braking and traction. Empty cells are dots, so the scale shows
    without colour. NaN gives an all-dots bar.
    """
    if width <= 0:
        return ""
    if not math.isfinite(value) or hi <= lo:
        return "·" * width
    value = min(max(value, lo), hi)
    if lo < 0 < hi:
        zero = round(width * -lo / (hi - lo))
        cells = round(abs(value) / (hi - lo) * width)
        if value < 0:
            start = zero - cells
            return "·" * start + "█" * cells + "·" * (width - zero)
        return "·" * zero + "█" * cells + "·" * (width - zero - cells)
    eighths = round((value - lo) / (hi - lo) * width * 8)
    full, part = divmod(eighths, 8)
    bar = "█" * full + (PARTIAL[part] if part else "")
    return bar + "·" * (width - len(bar))


def si(value: float, unit: str, digits: int = 3) -> str:
    """A number with a k/M prefix and its unit: 2.05 MW, 850 V, 12.3 kN."""
    if not math.isfinite(value):
        return f"-- {unit}"
    for factor, prefix in ((1e6, "M"), (1e3, "k")):
        if abs(value) >= factor:
            return f"{value / factor:.{digits}g} {prefix}{unit}"
    return f"{value:.{digits}g} {unit}"
