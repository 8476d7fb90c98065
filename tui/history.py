"""The last minute of telemetry, as named signals for the strip plots."""

from __future__ import annotations

from collections import deque
from typing import Any

import numpy as np

SPAN_S = 60.0

#: signals shown first, in this order, when the trainset has them
PREFERRED = ("train.speed_kmh", "train.tractive_force_kn", "train.achieved_kn",
             "line.power_factor", "line.voltage_kv_rms")


def flatten(snapshot: dict[str, Any], motors: list[str]) -> dict[str, float]:
    """Numeric values of a telemetry snapshot by dotted name.

    ``train.speed_kmh``, ``line.power_kw``, ``DC-A.dc_link_v``, ``LC-A1.current_a``,
    ``INV-A1.m1.torque_nm``: the names the dashboard lists for plotting. Motor values
    come as columns in motor order; ``motors`` (from the hello) names them.
    """
    out: dict[str, float] = {}
    for section in ("train", "line"):
        for k, v in snapshot.get(section, {}).items():
            if isinstance(v, int | float) and not isinstance(v, bool):
                out[f"{section}.{k}"] = float(v)
    for g in snapshot.get("groups", []):
        for k in ("dc_link_v", "chopper_a", "inverter_dc_a"):
            out[f"{g['name']}.{k}"] = float(g[k])
        for u in g.get("line_converters", []):
            out[f"{u['name']}.dc_current_a"] = float(u["dc_current_a"])
    for key, column in snapshot.get("motors", {}).items():
        for name, v in zip(motors, column, strict=False):
            out[f"{name}.{key}"] = float(v)
    return out


class History:
    """Signals over the last ``span_s`` of plant time."""

    def __init__(self, motors: list[str] = (), span_s: float = SPAN_S) -> None:
        self.motors = list(motors)
        self.span_s = span_s
        self.times: deque[float] = deque()
        self.rows: deque[dict[str, float]] = deque()
        self.names: list[str] = []

    def add(self, snapshot: dict[str, Any]) -> None:
        """Keep a snapshot; forget what is older than the span (or from before a reset)."""
        t = float(snapshot.get("t_s", 0.0))
        if self.times and t < self.times[-1]:  # a new run behind the same address
            self.times.clear()
            self.rows.clear()
        row = flatten(snapshot, self.motors)
        if not self.names:
            first = [n for n in PREFERRED if n in row]
            self.names = first + sorted(n for n in row if n not in first)
        self.times.append(t)
        self.rows.append(row)
        while self.times and self.times[0] < t - self.span_s:
            self.times.popleft()
            self.rows.popleft()

    def series(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """Times and values of one signal (NaN where a snapshot lacked it)."""
        t = np.fromiter(self.times, float, len(self.times))
        v = np.fromiter((r.get(name, np.nan) for r in self.rows), float, len(self.rows))
        return t, v
