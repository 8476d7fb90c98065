"""The scalar control's slip searches (slip_circuit.py: the Illinois method, halving
where it does not close in) against SciPy's ``brentq`` on the same circuit: the slip
they return is the crossing, to the resolution of the bisection they replaced (2^-16 of
the bracket, motor_scalar BISECTIONS), always; and in fewer circuit evaluations than that
bisection's 16, which is what they are for.

The bracket is the control's own: from no slip to 0.9 of the breakdown slip
(motor_scalar SLIP_LIMIT_SHARE). The torque rises along it from 0 and the current ends
above its value at no slip, so each target below has a crossing in it; not always one.
At rated flux the current rises with the slip until the voltage limits the flux, then
it may dip before it rises again: at 20 rad/s and 51 V it rises 0.14 A above its 80.8 A
at no slip, falls 0.46 A and rises on, so a limit 0.12 A above no slip is crossed three
times (found by Hypothesis). A search returns one crossing, whichever its bracket
closed on; the checks below take all of them (_crossings) and ask for one.
"""

from __future__ import annotations

from unittest import mock

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

from emulator.controller import slip_circuit as sc
from emulator.controller.config import config_from_profile
from emulator.controller.motor_scalar import BISECTIONS, SLIP_LIMIT_SHARE, ScalarControl

from .conftest import TRAINSET

#: circuit evaluations a search may make at most (the current's search one more, at no
#: slip): its secant steps, then halvings
MOST_CALLS = sc.SECANT_STEPS + BISECTIONS


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


def _crossings(excess, end: float, c, w_r: float, u_room: float, lm: float) -> np.ndarray:
    """Every slip in [0, end] where ``excess`` changes sign, by SciPy's brentq: between
    1001 points and the slips where the voltage starts to limit the flux (the circuit's
    kinks, by brentq on u_room - psi_rated |G|, G from the module docstring). The two
    crossings of a hump at a kink so fall apart, and a dip's are each alone among
    points a thousandth of the bracket apart (the dips seen are hundredths wide)."""
    grid = np.linspace(0.0, end, 1001)

    def room(w_sl: float) -> float:
        _, _, psi, u_s = sc.operating_point(c, w_sl, w_r, u_room, lm)
        return u_room - c[sc.CIRCUIT_PSI_RATED] * abs(u_s / psi)  # |G| = |U_s| / psi_m

    def roots(fun, points):
        f = np.array([fun(w) for w in points])
        change = np.flatnonzero(np.signbit(f[:-1]) != np.signbit(f[1:]))
        return [brentq(fun, points[k], points[k + 1], xtol=1e-15 * abs(end), rtol=1e-15)
                for k in change]

    grid = np.sort(np.concatenate([grid, roots(room, grid)]))
    return np.array(roots(excess, grid))


def _searched(search, *args) -> tuple[float, int]:
    """search(*args) in plain Python, and the circuit evaluations it made."""
    counted = _Counted()
    with (mock.patch.object(sc, "operating_point", counted),
          mock.patch.object(sc, "_bracket", sc._bracket.py_func)):
        return search.py_func(*args), counted.calls


SPEEDS = st.floats(-900.0, 900.0)  # the rotor's electrical speed, rad/s
VOLTAGES = st.floats(50.0, 1500.0)  # the voltage there is, V peak
SIGNS = st.sampled_from([1.0, -1.0])
#: where the search starts, as a share of the bracket: none (0), anywhere, or the last
#: period's slip, a little off the root
GUESSES = st.one_of(st.just(0.0), st.floats(0.0, 1.0), st.floats(-1e-3, 1e-3))
#: the target between its value at no slip and at the bracket's end: anywhere, and very
#: close to no slip (where the secant lands on the end)
SHARES = st.one_of(st.floats(0.001, 0.999), st.floats(1e-12, 1e-3))


@settings(max_examples=300, deadline=None)
@given(w_r=SPEEDS, u_room=VOLTAGES, sign=SIGNS, share=st.one_of(SHARES, st.just(0.0)),
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
    # the middle of a bracket around a crossing as narrow as the bisection's last one
    if share > 0.0:
        assert np.min(np.abs(_crossings(excess, end, c, w_r, u_room, lm) - found)) \
            <= abs(end) * (0.5 ** (BISECTIONS + 1) + 2e-15)  # (2e-15: brentq's, below)
    else:
        assert found == 0.0
    assert calls <= MOST_CALLS


@settings(max_examples=300, deadline=None)
@given(w_r=SPEEDS, u_room=VOLTAGES, sign=SIGNS, share=SHARES, guess=GUESSES,
       near=st.booleans())
@example(w_r=20.0, u_room=51.0, sign=1.0, share=0.001, guess=0.0, near=False)  # 3 crossings
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
    # the low end of a bracket around a crossing as narrow as the bisection's last one
    # the crossings from the found slip on, towards end
    below = (_crossings(excess, end, c, w_r, u_room, lm) - found) / np.sign(end)
    exact = 2e-15 * abs(end)  # brentq's: xtol + rtol |root| (SciPy's documentation)
    assert np.any((below >= -exact) & (below <= abs(end) * 0.5 ** BISECTIONS + exact)), \
        below
    assert calls <= MOST_CALLS + 1


def test_a_limit_below_the_magnetising_current_gives_no_slip(control) -> None:
    c, lm = control.circuit, control.cfg.magnetising_h
    end = SLIP_LIMIT_SHARE * sc.breakdown_slip(c, 1.0, 300.0, 800.0, lm, BISECTIONS)
    i_0 = sc.operating_point(c, 0.0, 300.0, 800.0, lm)[1]
    i_end = sc.operating_point(c, end, 300.0, 800.0, lm)[1]
    assert i_end > i_0 > 0.0
    assert sc.slip_for_current(c, 0.5 * i_0, end, i_end, 0.5 * end, 300.0, 800.0, lm,
                               BISECTIONS) == 0.0


def test_the_searches_take_fewer_evaluations_than_the_bisection() -> None:
    """What the searches are for: over operating points drawn across the envelope (a
    seeded generator), the median search takes half the bisection's 16 evaluations or
    fewer from no guess, and a quarter or fewer from the last period's slip (a guess
    1e-3 off the crossing); none more than MOST_CALLS."""
    control = ScalarControl(config_from_profile(TRAINSET), 2)
    c, lm = control.circuit, control.cfg.magnetising_h
    rng = np.random.default_rng(20261204)
    cold, warm = [], []
    for _ in range(200):
        w_r, u_room = rng.uniform(-900.0, 900.0), rng.uniform(50.0, 1500.0)
        end = SLIP_LIMIT_SHARE * sc.breakdown_slip(c, 1.0, w_r, u_room, lm, BISECTIONS)
        t_end = abs(sc.operating_point(c, end, w_r, u_room, lm)[0])
        target = rng.uniform(0.001, 0.999) * t_end
        root = brentq(lambda w, w_r=w_r, u_room=u_room, target=target:
                      abs(sc.operating_point(c, w, w_r, u_room, lm)[0]) - target,
                      0.0, end, xtol=1e-15 * abs(end), rtol=1e-15)
        for guess, calls in ((0.0, cold), (root * (1 + rng.uniform(-1e-3, 1e-3)), warm)):
            calls.append(_searched(sc.slip_for_torque, c, target, end, t_end, guess, w_r,
                                   u_room, lm, BISECTIONS)[1])
    assert np.median(cold) <= BISECTIONS / 2, np.bincount(cold)
    assert np.median(warm) <= BISECTIONS / 4, np.bincount(warm)
    assert max(cold + warm) <= MOST_CALLS
