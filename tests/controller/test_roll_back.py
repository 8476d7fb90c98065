"""The reference controller's roll-back report (effort.roll_back, and its compiled form
period_parts.roll_back), against kinematics: the distance run back is the measured speed
times the period, summed (s = sum v T), from the last period the train ran with its
selected direction; the report starts where that distance reaches ROLL_BACK_M and holds
until the train runs with its direction again. The scenario side (a train on a rise with
its friction brake failed) is in tests/scenario/test_brake_to_rest.py."""

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


def _drive(speeds, direction=1.0, limit=ROLL_BACK_M, fn=roll_back):
    rolled, reports = 0.0, []
    for v in speeds:
        rolled, report = fn(rolled, direction, v, T, limit)
        reports.append(report)
    return rolled, reports


@pytest.mark.parametrize("direction", [1.0, -1.0])
def test_the_distance_run_back_is_speed_times_time(direction: float) -> None:
    # 0.4 m/s back for 1 s: 0.4 m, short of 0.5 m, no report; 0.25 s more: reported from
    # the period the sum reaches 0.5 m (0.5 / 0.4 / T = 1250 periods in all)
    back = -direction * 0.4
    rolled, reports = _drive([back] * 1000, direction)
    assert rolled == pytest.approx(0.4, rel=1e-12)
    assert not any(reports)
    rolled, reports = _drive([back] * 1300, direction)
    assert rolled == pytest.approx(0.52, rel=1e-12)
    first = reports.index(True)
    assert first + 1 == pytest.approx(1250, abs=1)  # (the sum's rounding: one period)
    assert all(reports[first:])


def test_a_standstill_keeps_the_distance_and_the_report() -> None:
    speeds = [-0.5] * 1100 + [0.0] * 500 + [-0.1] * 10
    rolled, reports = _drive(speeds)
    assert rolled == pytest.approx(0.55 + 0.001, rel=1e-12)
    assert reports[1100:1600] == [True] * 500  # standing after the roll-back: still said


def test_a_reading_that_flickers_to_nothing_does_not_reset_it() -> None:
    # a slow roll-back read as one window step (0.16 m/s) every fourth period, nothing
    # between (the quick window's resolution at the rail): 0.04 m/s on average
    speeds = ([-0.16] + [0.0] * 3) * 4000  # 16 s
    rolled, reports = _drive(speeds)
    assert rolled == pytest.approx(0.16 * 4000 * T, rel=1e-12)  # 0.64 m
    first = reports.index(True)
    assert all(reports[first:])  # said without a gap


def test_running_with_the_direction_again_resets_it() -> None:
    rolled, reports = _drive([-0.5] * 1200 + [0.01])
    assert rolled == 0.0 and reports[-1] is False
    # with the direction selected backwards, running backwards is running with it
    rolled, reports = _drive([-0.5] * 1200, direction=-1.0)
    assert rolled == 0.0 and not any(reports)


@given(st.lists(st.floats(-3.0, 3.0), max_size=200), st.sampled_from([1.0, -1.0]),
       st.floats(0.0, 0.5))
def test_the_compiled_rule_is_the_plain_one(speeds, direction, limit) -> None:
    assert _drive(speeds, direction, limit) == _drive(speeds, direction, limit,
                                                       pp.roll_back)
