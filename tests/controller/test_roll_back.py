"""The reference controller's roll-back report (effort.roll_back, and its compiled form
period_parts.roll_back), against kinematics: the distance run back is the measured speed
times the period, summed (s = sum v T), from the last period the train ran with its
selected direction; the report comes once, in the period that distance reaches
ROLL_BACK_M (the event code stays on the wire until another replaces it). The scenario
side (a train on a rise with its friction brake failed, a held stop, a hill start) is in
tests/scenario/test_brake_to_rest.py and test_library.py."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.controller import period_parts as pp
from emulator.controller.effort import ROLL_BACK_M, roll_back

T = 1e-3


@pytest.fixture(scope="module", autouse=True)
def compiled_before_the_deadline():
    """Compile (or load) the compiled rule once, so that Hypothesis's per-example
    deadline times the rule and not numba's first call."""
    pp.roll_back(0.0, 1.0, -0.1, T, ROLL_BACK_M)


def _drive(speeds, directions=1.0, limit=ROLL_BACK_M, fn=roll_back, rolled=0.0):
    """rolled after the speeds (one a period), and the periods a report came in."""
    if isinstance(directions, float):
        directions = [directions] * len(speeds)
    reports = []
    for i, (v, d) in enumerate(zip(speeds, directions, strict=True)):
        rolled, report = fn(rolled, d, v, T, limit)
        if report:
            reports.append(i)
    return rolled, reports


@pytest.mark.parametrize("direction", [1.0, -1.0])
def test_the_distance_run_back_is_speed_times_time(direction: float) -> None:
    # 0.4 m/s back for 1 s: 0.4 m, short of 0.5 m, no report; 0.3 s more: one report,
    # in the period the sum reaches 0.5 m (0.5 / 0.4 / T = 1250 periods in all)
    back = -direction * 0.4
    rolled, reports = _drive([back] * 1000, direction)
    assert rolled * direction == pytest.approx(0.4, rel=1e-12)
    assert reports == []
    rolled, reports = _drive([back] * 1300, direction)
    assert rolled * direction == pytest.approx(0.52, rel=1e-12)
    assert len(reports) == 1
    assert reports[0] + 1 == pytest.approx(1250, abs=1)  # (the sum's rounding: a period)


def test_a_standstill_keeps_the_distance_and_a_further_roll_back_is_not_said_again() -> None:
    rolled, reports = _drive([-0.5] * 1100 + [0.0] * 500 + [-0.1] * 10)
    assert rolled == pytest.approx(0.55 + 0.001, rel=1e-12)
    assert len(reports) == 1


def test_a_reading_that_flickers_to_nothing_sums_to_its_mean() -> None:
    # a slow roll-back read as one window step (0.16 m/s) every fourth period, nothing
    # between (the quick window's resolution at the rail): 0.04 m/s on average
    rolled, reports = _drive(([-0.16] + [0.0] * 3) * 4000)  # 16 s
    assert rolled == pytest.approx(0.16 * 4000 * T, rel=1e-12)  # 0.64 m back
    assert len(reports) == 1
    assert reports[0] == pytest.approx(4 * 0.5 / (0.16 * T), abs=4)  # at 0.5 m


def test_running_with_the_direction_clears_it_and_a_new_roll_back_is_said_again() -> None:
    _, reports = _drive([-0.5] * 1200 + [0.01] + [-0.5] * 1200)
    assert len(reports) == 2
    assert reports[1] - 1200 == reports[0] + 1  # as far back again from the clearing


def test_a_change_of_direction_starts_anew() -> None:
    # 0.45 m back with +1 selected, then -1 selected: running "forward" (with +1's
    # sense) is now running against the direction, and counts from nothing
    speeds = [-0.45] * 1000 + [0.45] * 1000
    directions = [1.0] * 1000 + [-1.0] * 1000
    rolled, reports = _drive(speeds, directions)
    assert rolled == pytest.approx(-0.45, rel=1e-12)  # 0.45 m against -1
    assert reports == []
    # with the direction selected backwards, running backwards is running with it
    rolled, reports = _drive([-0.5] * 1200, -1.0)
    assert rolled == 0.0 and reports == []


def test_readings_that_are_not_numbers_change_nothing() -> None:
    rolled, reports = _drive([-0.5] * 900 + [float("nan")] * 10)
    assert rolled == pytest.approx(0.45, rel=1e-12) and reports == []


@given(st.lists(st.floats(-3.0, 3.0), max_size=200),
       st.lists(st.sampled_from([1.0, -1.0]), min_size=200, max_size=200),
       st.floats(0.0, 0.5))
def test_the_compiled_rule_is_the_plain_one(speeds, directions, limit) -> None:
    directions = directions[:len(speeds)]
    assert _drive(speeds, directions, limit) == _drive(speeds, directions, limit,
                                                         pp.roll_back)
