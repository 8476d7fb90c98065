"""The contact law's exponential and arctangent (emulator/plant/contact_maths.py)
against references outside them.

- An extended-precision reference: numpy's arctan and exp in x86-64's 80-bit long double
  (64-bit significand, about 1e-19 relative), far tighter than the bounds below.
- The arctangent: its source's documented peak relative error, 1.8e-16 in IEEE double
  (Cephes Math Library, atan.c's header; from memory). Two digits are given, so the
  bound held is 1.85e-16.
- The exponential: within 2 ulp of the result. Common practice for vectorised elementary
  functions (vector maths libraries state 1 to 4 ulp), no source of its own: Cephes
  exp.c documents a peak of about 2e-16 from random trials over +-708 (from memory), and
  a dense sweep finds 2.5e-16 relative (about 1.1 ulp) at |x| above 500, where n ln 2's
  low part rounds.
- The C library's atan and exp (Python's math module), each within 1 ulp of the true
  value (the GNU C Library manual, "Known Maximum Errors in Math Functions"; from
  memory): ours and theirs differ by at most the sum of the two bounds.
- The special values of C99 Annex F: atan(+-0) = +-0, atan(+-inf) = +-pi/2 (F.9.1.3);
  exp(-inf) = +0, exp(+inf) = +inf (F.9.3.1); exp(+-0) = 1; NaN propagates.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.plant.contact_maths import arctan, exponential
from emulator.plant.jit import compiled

ATAN_PEAK_REL = 1.85e-16  # Cephes: 1.8e-16
EXP_ULPS = 2.0  # common practice, no source
EXTENDED = pytest.mark.skipif(np.finfo(np.longdouble).nmant < 63,
                              reason="needs an extended-precision long double")


@compiled
def _arctan_all(x, out):
    for i in range(x.shape[0]):
        out[i] = arctan(x[i])


@compiled
def _exponential_all(x, out):
    for i in range(x.shape[0]):
        out[i] = exponential(x[i])


def _ours(kernel, x: np.ndarray) -> np.ndarray:
    out = np.empty_like(x)
    kernel(x, out)
    return out


def _beside(b: float, count: int = 64) -> list[float]:
    """count doubles each side of b."""
    below, above, x, y = [], [], b, b
    for _ in range(count):
        below.append(x)
        x = np.nextafter(x, -np.inf)
        y = np.nextafter(y, np.inf)
        above.append(y)
    return below + above


def _atan_sweep() -> np.ndarray:
    """Dense over -5..5 (all three reduction ranges), log-spaced from 1e-300 to 1e300 both
    signs, and each side of the two range boundaries (0.66, tan(3 pi/8))."""
    edges = np.array(_beside(0.66) + _beside(2.41421356237309504880))
    logs = 10.0 ** np.linspace(-300, 300, 200_001)
    return np.concatenate([np.linspace(-5.0, 5.0, 1_000_001), logs, -logs, edges, -edges])


def _exp_sweep() -> np.ndarray:
    """Dense over the contact law's arguments (-40..0) and over the whole range where
    the result is a normal number, each side of the half-way points of the reduction
    (x log2 e + 1/2 an integer) near 0, and tiny arguments of both signs."""
    halves = [(k - 0.5) / 1.4426950408889634 for k in range(-20, 21)]
    edges = np.array([v for b in halves for v in _beside(b, 8)])
    tiny = 10.0 ** np.linspace(-300, -1, 30_001)
    return np.concatenate([np.linspace(-40.0, 0.0, 1_000_001),
                           np.linspace(-708.0, 709.7, 1_000_001), edges, tiny, -tiny])


@EXTENDED
def test_arctan_within_its_documented_accuracy() -> None:
    x = _atan_sweep()
    x = x[x != 0.0]  # (zero's sign: test_special_values_as_c99_annex_f)
    ref = np.arctan(x.astype(np.longdouble))
    rel = np.abs((_ours(_arctan_all, x).astype(np.longdouble) - ref) / ref)
    assert float(rel.max()) <= ATAN_PEAK_REL


@EXTENDED
def test_exponential_within_two_ulp() -> None:
    x = _exp_sweep()
    ref = np.exp(x.astype(np.longdouble))
    err = np.abs(_ours(_exponential_all, x).astype(np.longdouble) - ref)
    ulp = np.spacing(ref.astype(np.float64)).astype(np.longdouble)
    assert float((err / ulp).max()) <= EXP_ULPS


def test_both_within_their_bounds_and_the_c_librarys() -> None:
    x = _atan_sweep()
    lib = np.array([math.atan(v) for v in x])
    bound = ATAN_PEAK_REL * np.abs(lib) + np.spacing(np.abs(lib))
    assert np.all(np.abs(_ours(_arctan_all, x) - lib) <= bound)
    x = _exp_sweep()
    lib = np.array([math.exp(v) for v in x])
    bound = (EXP_ULPS + 1.0) * np.spacing(lib)
    assert np.all(np.abs(_ours(_exponential_all, x) - lib) <= bound)


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_arctan_of_any_double_is_odd_and_near_the_c_librarys(x: float) -> None:
    y = arctan(x)
    assert arctan(-x) == -y
    lib = math.atan(x)
    assert abs(y - lib) <= ATAN_PEAK_REL * abs(lib) + math.ulp(lib)


@given(st.floats(min_value=-708.0, max_value=709.7))
def test_exponential_of_any_double_near_the_c_librarys(x: float) -> None:
    lib = math.exp(x)
    assert abs(exponential(x) - lib) <= (EXP_ULPS + 1.0) * math.ulp(lib)


@given(st.floats(min_value=-745.0, max_value=-708.4))
def test_exponential_reaches_the_subnormal_results(x: float) -> None:
    """Below the smallest normal the result is rounded twice (contact_maths.py): within
    one subnormal step of the C library's (whose own error there is below one)."""
    assert abs(exponential(x) - math.exp(x)) <= 2.0 * math.ulp(0.0)


def test_special_values_as_c99_annex_f() -> None:
    assert arctan(0.0) == 0.0 and math.copysign(1.0, arctan(0.0)) == 1.0
    assert arctan(-0.0) == 0.0 and math.copysign(1.0, arctan(-0.0)) == -1.0
    assert arctan(math.inf) == math.atan(math.inf)  # the double nearest pi/2
    assert arctan(-math.inf) == -math.atan(math.inf)
    assert math.isnan(arctan(math.nan))
    assert exponential(0.0) == 1.0 and exponential(-0.0) == 1.0
    assert exponential(-math.inf) == 0.0 and math.copysign(1.0, exponential(-math.inf)) == 1.0
    assert exponential(math.inf) == math.inf
    assert exponential(-746.0) == 0.0 and exponential(710.0) == math.inf
    assert exponential(709.78) == math.exp(709.78)  # (largest finite results)
    assert math.isnan(exponential(math.nan))
