"""Checks: a small declarative language over the recorded signals of a run.

One ``[[check]]`` table is one check, of one kind:

- ``max = v`` / ``min = v``: the signal stays at or below / at or above v in the window;
- ``band = [lo, hi]``: it stays within the band in the window;
- ``settles = [lo, hi]`` with ``within_s = T`` and ``after = "label"``: after the
  labelled moment it enters the band within T and stays in it to the window's end;
- ``rises_to = v`` / ``falls_to = v`` with ``by_s`` or ``by_m``: it reaches v by a time
  or a position;
- ``raised = [...]`` / ``not_raised = [...]``: the controller reports (or never
  reports) these event codes in the window; codes are numbers or names of
  ``emulator.protocol.events.SLUGS``, "trip" meaning any protective trip.

The window: ``from_s``/``to_s`` (relative to the labelled moment when ``after`` is
given, else to the start of the run) and ``from_m``/``to_m`` (train position). A
signal is a plant state (``train.speed_mps``; ``_kmh``, ``_degc``, ``_kv``, ``_kn`` and
``_ka`` variants are converted), ``y.<measurement>`` as the controller received it, or
``u.<command>`` as it acted. A signal with one element per motor (``motor.*``) passes
only if every element passes, unless ``index`` picks one; ``abs = true`` checks |x|.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from emulator.profiles.table import Table
from emulator.protocol import events as ev

KINDS = ("max", "min", "band", "settles", "rises_to", "falls_to", "raised", "not_raised")
CONVERSIONS = {"_kmh": ("_mps", 3.6, 0.0), "_degc": ("_k", 1.0, -273.15),
               "_kv": ("_v", 1e-3, 0.0), "_kn": ("_n", 1e-3, 0.0), "_ka": ("_a", 1e-3, 0.0)}


class CheckError(ValueError):
    """A check that cannot be evaluated on this recording (names what is wrong)."""


@dataclass(frozen=True)
class CheckSpec:
    """One check as written."""

    name: str
    kind: str
    signal: str | None = None
    index: int | None = None
    absolute: bool = False
    value: float | None = None
    band: tuple[float, float] | None = None
    codes: tuple[int, ...] = ()
    times: int | None = None  # raised: exactly this many separate raises in the window
    within_s: float | None = None
    by_s: float | None = None
    by_m: float | None = None
    after: str | None = None
    from_s: float | None = None
    to_s: float | None = None
    from_m: float | None = None
    to_m: float | None = None
    line: int | None = None


@dataclass(frozen=True)
class CheckResult:
    """A verdict, what was measured, and the window it was judged over (plant time)."""

    spec: CheckSpec
    passed: bool
    measured: str
    detail: str
    window: tuple[float, float]
    #: the measured figure as a number where it is one (the extreme of a max or min, the
    #: settling time, the time a rises_to / falls_to took after its moment), for plots
    value: float | None = None


def _codes(t: Table, key: str) -> tuple[int, ...]:
    raw = t.raw(key)
    items = raw if isinstance(raw, list) else [raw]
    out: list[int] = []
    for item in items:
        if item == "trip":
            out += sorted(ev.TRIPS)
        elif isinstance(item, str) and item in ev.SLUGS:
            out.append(ev.SLUGS[item])
        elif isinstance(item, int) and not isinstance(item, bool) and 0 < item < 65536:
            out.append(item)
        else:
            raise t.error(key, f"{item!r} is not an event code: give a number 1..65535, "
                               f"'trip' or one of {', '.join(sorted(ev.SLUGS))}")
    if not out:
        raise t.error(key, "give at least one event code")
    return tuple(out)


def read_check(t: Table, labels: list[str]) -> CheckSpec:
    """One [[check]] table."""
    name = t.string("name")
    kinds = [k for k in KINDS if t.has(k)]
    if len(kinds) != 1:
        raise t.error("name", f"a check has exactly one of {', '.join(KINDS)} "
                              f"(found {', '.join(kinds) or 'none'})")
    kind = kinds[0]
    kw: dict = {"line": t.line_of("name")}
    if kind in ("raised", "not_raised"):
        kw["codes"] = _codes(t, kind)
        if t.optional("signal"):
            raise t.error("signal", "event checks read the controller's tcu.event_code")
        if t.optional("times"):
            if kind != "raised":
                raise t.error("times", "times counts the raises of a raised check")
            kw["times"] = t.integer("times", 1, 100_000)
    else:
        kw["signal"] = t.string("signal")
        if kind in ("band", "settles"):
            lo, hi = t.numbers(kind, "the signal's unit", -1e12, 1e12, min_len=2)
            if hi < lo or len(t.raw(kind)) != 2:
                raise t.error(kind, "expected [low, high] with low <= high")
            kw["band"] = (lo, hi)
        else:
            kw["value"] = t.number(kind, "the signal's unit", -1e12, 1e12)
        if t.optional("index"):
            kw["index"] = t.integer("index", 0, 1023)
        if t.optional("abs"):
            kw["absolute"] = t.boolean("abs")
    for key, unit, lo, hi in (("within_s", "s", 0.0, 1e5), ("by_s", "s", 0.0, 1e5),
                              ("by_m", "m", -1e6, 1e6), ("from_s", "s", 0.0, 1e5),
                              ("to_s", "s", 0.0, 1e5), ("from_m", "m", -1e6, 1e6),
                              ("to_m", "m", -1e6, 1e6)):
        if t.optional(key):
            kw[key] = t.number(key, unit, lo, hi)
    if t.optional("after"):
        kw["after"] = t.string("after", tuple(labels) or ("(no labels in this file)",))
    if kind == "settles" and (kw.get("within_s") is None or kw.get("after") is None):
        raise t.error("settles", "a settles check needs within_s and after")
    if kind in ("rises_to", "falls_to") and kw.get("by_s") is None and kw.get("by_m") is None:
        raise t.error(kind, "give by_s or by_m: when must the value be reached?")
    t.finish()
    return CheckSpec(name, kind, **kw)


def signal_columns(columns: list[str], signal: str) -> tuple[list[int], float, float]:
    """Recording columns holding a signal, and the scale and offset to its unit."""
    if signal.startswith(("y.", "u.")):
        found = [columns.index(signal)] if signal in columns else []
        return found, 1.0, 0.0
    for name, scale, offset in [(signal, 1.0, 0.0)] + [
            (signal[:-len(suf)] + si, sc, off) for suf, (si, sc, off) in CONVERSIONS.items()
            if signal.endswith(suf)]:
        exact = f"p.{name}"
        found = [i for i, c in enumerate(columns) if c == exact or c.startswith(exact + "[")]
        if found:
            return found, scale, offset
    return [], 1.0, 0.0


def check_signals(checks, columns: list[str], file: str) -> None:
    """Raise CheckError naming file and line for a signal the recording does not hold."""
    for c in checks:
        if c.signal is None:
            continue
        cols, _, _ = signal_columns(columns, c.signal)
        if not cols:
            raise CheckError(f"{file}:{c.line}: [check] signal: no recorded signal named "
                             f"{c.signal!r}")
        if c.index is not None and c.index >= len(cols):
            raise CheckError(f"{file}:{c.line}: [check] index: {c.signal} has "
                             f"{len(cols)} elements")


def evaluate(check: CheckSpec, rec, marks: dict[str, float]) -> CheckResult:
    """Judge one check on a recording; marks: label -> plant time it happened."""
    t = rec.column("time_s")
    x = rec.column("p.train.position_m")
    base = 0.0
    if check.after is not None:
        if check.after not in marks:
            return CheckResult(check, False, "-", f"{check.after!r} never happened",
                               (0.0, 0.0))
        base = marks[check.after]
    mask = t >= base + (check.from_s or 0.0)
    if check.to_s is not None:
        mask &= t <= base + check.to_s
    if check.from_m is not None:
        mask &= x >= check.from_m
    if check.to_m is not None:
        mask &= x <= check.to_m
    if not mask.any():
        return CheckResult(check, False, "-", "the window holds no recorded frame",
                           (base, base))
    window = (float(t[mask][0]), float(t[mask][-1]))
    if check.kind in ("raised", "not_raised"):
        return _events(check, rec.column("u.tcu.event_code"), t, mask, window)
    cols, scale, offset = signal_columns(rec.columns, check.signal)
    if check.index is not None:
        cols = [cols[check.index]]
    data = rec.data[:, cols] * scale + offset
    if check.absolute:
        data = np.abs(data)
    return _judge(check, data, t, x, mask, base, window)


def _events(check, code, t, mask, window) -> CheckResult:
    entered = np.flatnonzero(np.diff(code, prepend=0.0) != 0)
    if check.times is not None:  # each frame the code turns to one of them: one raise
        raises = [float(t[i]) for i in entered if mask[i] and int(code[i]) in check.codes]
        shown = ", ".join(f"{s:.2f}" for s in raises[:8]) + (" ..." if len(raises) > 8 else "")
        said = f"{len(raises)} raise(s)" + (f" at {shown} s" if raises else "")
        return CheckResult(check, len(raises) == check.times, said,
                           f"expected {check.times}", window)
    seen = {int(code[i]): float(t[i]) for i in entered[::-1] if mask[i] and code[i] != 0}
    hits = {c: seen[c] for c in check.codes if c in seen}
    names = {v: k for k, v in ev.SLUGS.items()}
    said = ", ".join(f"{names.get(c, c)} at {s:.2f} s" for c, s in sorted(hits.items(),
                                                                           key=lambda h: h[1]))
    passed = bool(hits) if check.kind == "raised" else not hits
    return CheckResult(check, passed, said or "none", "", window)


def _judge(check, data, t, x, mask, base, window) -> CheckResult:
    v = data[mask]
    tw = t[mask]
    kind = check.kind
    if kind == "max":
        k = np.unravel_index(np.argmax(v), v.shape)[0]
        peak = float(v.max())
        return CheckResult(check, peak <= check.value, f"{peak:.4g}",
                           f"highest at {tw[k]:.2f} s", window, peak)
    if kind == "min":
        k = np.unravel_index(np.argmin(v), v.shape)[0]
        low = float(v.min())
        return CheckResult(check, low >= check.value, f"{low:.4g}", f"lowest at {tw[k]:.2f} s",
                           window, low)
    lo, hi = check.band or (0.0, 0.0)
    if kind == "band":
        vmin, vmax = float(v.min()), float(v.max())
        return CheckResult(check, lo <= vmin and vmax <= hi, f"{vmin:.4g} .. {vmax:.4g}", "",
                           window)
    if kind == "settles":
        outside = np.flatnonzero(((v < lo) | (v > hi)).any(axis=1))
        if outside.size and outside[-1] == len(v) - 1:
            return CheckResult(check, False, "never", "outside the band at the window's end",
                               window)
        settle = float(tw[outside[-1] + 1] - base) if outside.size else 0.0
        return CheckResult(check, settle <= check.within_s, f"{settle:.3g} s",
                           f"in the band from {base + settle:.2f} s", window, settle)
    # rises_to / falls_to: every element must reach the value
    reached = (v >= check.value) if kind == "rises_to" else (v <= check.value)
    firsts = [np.flatnonzero(reached[:, j]) for j in range(v.shape[1])]
    if any(f.size == 0 for f in firsts):
        return CheckResult(check, False, "not reached", "", window)
    k = max(int(f[0]) for f in firsts)
    t_hit, x_hit = float(tw[k]), float(x[mask][k])
    ok = ((check.by_s is None or t_hit - base <= check.by_s)
          and (check.by_m is None or x_hit <= check.by_m))
    return CheckResult(check, ok, f"at {t_hit:.2f} s, {x_hit:.1f} m", "", window,
                       t_hit - base)
