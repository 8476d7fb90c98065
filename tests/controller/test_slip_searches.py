"""The scalar control's slip searches (slip_circuit.py: the Illinois method) against
SciPy's ``brentq`` on the same circuit: the root they return is the root, to the
resolution the bisection they replaced gave (2^-16 of the bracket, motor_scalar
BISECTIONS), in no more circuit evaluations than that bisection took.

The bracket is the control's own: from no slip to 0.9 of the breakdown slip
(motor_scalar SLIP_LIMIT_SHARE), where the torque and the current rise with the slip.
"""

from __future__ import annotations

from unittest import mock

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from emulator.controller import slip_circuit as sc
from emulator.controller.config import config_from_profile
from emulator.controller.motor_scalar import BISECTIONS, SLIP_LIMIT_SHARE, ScalarControl

from .conftest import TRAINSET


@pytest.fixture(scope="module")
def control() -> ScalarControl:
    return ScalarControl(config_from_profile(TRAINSET), 2)


class _Counted:
    """slip_circuit.operating_point, counting its calls (for the searches' py_func)."""

    def __init__(self) -> None:
        self.calls = 0
        self._circuit = sc.operating_point.py_func

    def __call__(self, *args):
        self.calls += 1
        return self._circuit(*args)


def _searched(search, *args) -> tuple[float, int]:
    """search(*args) in plain Python, and the circuit evaluations it made."""
    counted = _Counted()
    with (mock.patch.object(sc, "operating_point", counted),
          mock.patch.object(sc, "_illinois", sc._illinois.py_func)):
        return search.py_func(*args), counted.calls


SPEEDS = st.floats(-900.0, 900.0)  # the rotor's electrical speed, rad/s
VOLTAGES = st.floats(50.0, 1500.0)  # the voltage there is, V peak
SIGNS = st.sampled_from([1.0, -1.0])
#: where the search starts, as a share of the bracket: none (0), anywhere, or the last
#: period's slip, a little off the root
GUESSES = st.one_of(st.just(0.0), st.floats(0.0, 1.0), st.floats(-1e-3, 1e-3))


@settings(max_examples=300, deadline=None)
@given(w_r=SPEEDS, u_room=VOLTAGES, sign=SIGNS, share=st.floats(0.001, 0.999),
       guess=GUESSES, near=st.booleans())
def test_slip_for_torque_is_brents_root(control, w_r, u_room, sign, share,
                                        guess, near) -> None:
    c, lm = control.circuit, control.cfg.magnetising_h
    end = SLIP_LIMIT_SHARE * sc.breakdown_slip(c, sign, w_r, u_room, lm, BISECTIONS)
    t_end = abs(sc.operating_point(c, end, w_r, u_room, lm)[0])
    target = share * t_end

    def excess(w_sl: float) -> float:
        return abs(sc.operating_point(c, w_sl, w_r, u_room, lm)[0]) - target

    root = brentq(excess, 0.0, end, xtol=1e-15 * abs(end), rtol=1e-15)
    start = root * (1 + guess) if near else guess * end
    args = (c, target, end, t_end, start, w_r, u_room, lm, BISECTIONS)
    found, calls = _searched(sc.slip_for_torque, *args)
    assert found == sc.slip_for_torque(*args)  # (compiled)
    # the middle of a bracket around the root as narrow as the bisection's last one
    assert abs(found - root) <= abs(end) * 0.5 ** (BISECTIONS + 1)
    assert calls < BISECTIONS


@settings(max_examples=300, deadline=None)
@given(w_r=SPEEDS, u_room=VOLTAGES, sign=SIGNS, share=st.floats(0.001, 0.999),
       guess=GUESSES, near=st.booleans())
def test_slip_for_current_is_brents_root_from_below(control, w_r, u_room,
                                                    sign, share, guess, near) -> None:
    c, lm = control.circuit, control.cfg.magnetising_h
    end = SLIP_LIMIT_SHARE * sc.breakdown_slip(c, sign, w_r, u_room, lm, BISECTIONS)
    i_0 = sc.operating_point(c, 0.0, w_r, u_room, lm)[1]
    i_end = sc.operating_point(c, end, w_r, u_room, lm)[1]
    i_max = i_0 + share * (i_end - i_0)  # a limit the bracket crosses

    def excess(w_sl: float) -> float:
        return sc.operating_point(c, w_sl, w_r, u_room, lm)[1] - i_max

    root = brentq(excess, 0.0, end, xtol=1e-15 * abs(end), rtol=1e-15)
    start = root * (1 + guess) if near else guess * end
    args = (c, i_max, end, i_end, start, w_r, u_room, lm, BISECTIONS)
    found, calls = _searched(sc.slip_for_current, *args)
    assert found == sc.slip_for_current(*args)  # (compiled)
    assert excess(found) < 0.0  # within the limit, always
    # the low end of a bracket around the root as narrow as the bisection's last one
    assert abs(found - root) <= abs(end) * 0.5 ** BISECTIONS
    assert calls < BISECTIONS


def test_a_limit_below_the_magnetising_current_gives_no_slip(control) -> None:
    c, lm = control.circuit, control.cfg.magnetising_h
    end = SLIP_LIMIT_SHARE * sc.breakdown_slip(c, 1.0, 300.0, 800.0, lm, BISECTIONS)
    i_0 = sc.operating_point(c, 0.0, 300.0, 800.0, lm)[1]
    i_end = sc.operating_point(c, end, 300.0, 800.0, lm)[1]
    assert i_end > i_0 > 0.0
    assert sc.slip_for_current(c, 0.5 * i_0, end, i_end, 0.5 * end, 300.0, 800.0, lm,
                               BISECTIONS) == 0.0
