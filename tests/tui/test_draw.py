"""Drawing helpers without an app: braille strip plots, gauges, number formats, the
telemetry history."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tui.draw import BRAILLE, gauge, si, span, strip_plot
from tui.history import History, flatten

from .canned import load


def dots(rows: list[str]) -> np.ndarray:
    """The dot matrix of braille rows: (4 * rows, 2 * width) of 0/1."""
    bits = ((0, 0, 0x01), (0, 1, 0x02), (0, 2, 0x04), (1, 0, 0x08), (1, 1, 0x10),
            (1, 2, 0x20), (0, 3, 0x40), (1, 3, 0x80))
    out = np.zeros((4 * len(rows), 2 * len(rows[0])), dtype=int)
    for r, row in enumerate(rows):
        for c, ch in enumerate(row):
            code = ord(ch) - BRAILLE if ch != " " else 0
            for x, y, bit in bits:
                out[4 * r + y, 2 * c + x] = bool(code & bit)
    return out


def test_braille_dot_numbering_follows_unicode() -> None:
    # Unicode Braille Patterns block (U+2800-U+28FF): dot n is bit n-1; dots 1-3 and 7
    # run down the left column, 4-6 and 8 down the right. U+28FF has all eight.
    rows = strip_plot(np.array([0.0, 1.0]), np.array([1.0, 1.0]), 1.0, 1.0, 1, 1, 0, 1)
    assert rows == ["⠉"]  # U+2809: dots 1 and 4, the top row of both columns
    full = strip_plot(np.linspace(0, 1, 50), np.tile([0.0, 1.0], 25), 1.0, 1.0, 1, 1, 0, 1)
    assert full == [chr(0x28FF)]


def test_a_ramp_rises_from_bottom_left_to_top_right() -> None:
    t = np.linspace(0.0, 60.0, 601)
    m = dots(strip_plot(t, t, 60.0, 60.0, 20, 4, 0.0, 60.0))
    assert m.shape == (16, 40)
    assert m[-1, 0] and m[0, -1]
    # one lit run per column, moving up monotonically: the top lit row never increases
    top = [int(np.flatnonzero(m[:, x])[0]) for x in range(40)]
    assert top == sorted(top, reverse=True)


def test_gaps_are_blank_and_values_outside_the_range_are_clipped() -> None:
    t = np.linspace(0.0, 10.0, 101)
    v = np.where((t > 4) & (t < 6), np.nan, 5.0 * np.sin(t))
    m = dots(strip_plot(t, v, 10.0, 10.0, 10, 2, -1.0, 1.0))
    assert not m[:, 9:11].any()  # 4..6 s of 10 s on 20 dot columns: columns 9, 10 blank
    assert m[0].any() and m[-1].any()  # +-5 clipped to the top and bottom rows


def test_samples_older_than_the_span_are_not_drawn() -> None:
    t = np.array([0.0, 1.0, 100.0])
    rows = strip_plot(t, np.array([1.0, 2.0, 3.0]), 100.0, 60.0, 30, 1)
    assert dots(rows)[:, :-1].sum() == 0 and dots(rows)[:, -1].any()


def test_flat_and_empty_ranges_are_widened() -> None:
    assert span(np.array([3.0, 3.0])) == pytest.approx((2.85, 3.15))
    assert span(np.array([np.nan])) == (0.0, 1.0)


@pytest.mark.parametrize(("value", "expected"), [
    (0.0, "··········"), (0.5, "█████·····"), (1.0, "██████████"), (2.0, "██████████"),
    (0.55, "█████▌····"), (math.nan, "··········")])
def test_gauge_from_zero(value: float, expected: str) -> None:
    assert gauge(value, 0.0, 1.0, 10) == expected


@pytest.mark.parametrize(("value", "expected"), [
    (0.0, "··········"), (0.4, "·····██···"), (-0.4, "···██·····"), (-1.0, "█████·····")])
def test_gauge_about_zero_shows_braking_left_and_traction_right(value, expected) -> None:
    assert gauge(value, -1.0, 1.0, 10) == expected


@pytest.mark.parametrize(("value", "unit", "text"), [
    (2_050_000.0, "W", "2.05 MW"), (850.0, "V", "850 V"), (-12_340.0, "N", "-12.3 kN"),
    (math.inf, "A", "-- A")])
def test_si_prefixes(value: float, unit: str, text: str) -> None:
    assert si(value, unit) == text


def test_history_names_every_signal_and_forgets_after_a_minute() -> None:
    hello, snaps = load()
    flat = flatten(snaps[-1], hello["motors"])
    assert flat["train.speed_kmh"] == snaps[-1]["train"]["speed_kmh"]
    assert flat["INV-B2.m2.creep_mps"] == snaps[-1]["motors"]["creep_mps"][7]
    assert flat["DC-A.dc_link_v"] == snaps[-1]["groups"][0]["dc_link_v"]
    assert "LC-B2.dc_current_a" in flat and "train.adhesion" not in flat
    h = History(hello["motors"], span_s=5.0)
    for snap in snaps:
        h.add(snap)
    assert h.names[0] == "train.speed_kmh"
    t, v = h.series("train.speed_kmh")
    assert t[-1] == 20.0 and t[0] >= 15.0 and len(t) == len(v) == 11
    h.add(dict(snaps[0], t_s=0.5))  # a new run behind the same address starts over
    assert list(h.times) == [0.5]


def test_the_train_panel_says_when_the_feeding_breaker_is_open() -> None:
    from tui.panels import train_text

    hello, snaps = load()
    snap = dict(snaps[-1])
    assert "no feed" not in train_text(hello, snap, 120).plain  # (stored: no key)
    snap["line"] = dict(snap["line"], feeder_closed=False)
    assert "no feed (section dead)" in train_text(hello, snap, 120).plain
