"""The contact law's exponential and arctangent (emulator/plant/contact_maths.py)
against references outside them.

- An extended-precision reference: numpy's arctan and exp in x86-64's 80-bit long double
  (64-bit significand, about 1e-19 relative), far tighter than the bounds below.
- The arctangent: within 1 ulp of the true value, the bound the GNU C Library manual
  gives for the atan it replaces ("Known Maximum Errors in Math Functions", x86_64; from
  memory). Cephes's own header quotes a peak relative error of 1.8e-16 from 10^6 random
  trials over -10..10 (from memory): a sampled peak, not a bound (random sampling finds
  about 2e-16, under 1 ulp, near x = 1.7), so it is not the test's bound.
- The exponential: within 2 ulp. Common practice for vectorised elementary functions
  (vector maths libraries state 1 to 4 ulp), no source of its own. It does not meet
  the C library's 1 ulp: the rational approximation's own roundings reach about 1.8 ulp
  for small |x|.
- The C library's atan and exp (Python's math module), each within 1 ulp of the true
  value (the same manual; from memory): ours and theirs differ by at most the sum of
  the two bounds; exp's overflow to inf and underflow to 0 happen where theirs do (C99
  7.12.1: a result too large is HUGE_VAL, too small may be 0), within the one subnormal
  step each may be off there.
- The special values of C99 Annex F: atan(+-0) = +-0, atan(+-inf) = +-pi/2 (F.9.1.3);
  exp(-inf) = +0, exp(+inf) = +inf (F.9.3.1); exp(+-0) = 1; NaN propagates.

The loops below are compiled without numba's disk cache: a cached test function is
checked against its own file only, so it would keep testing an old contact_maths.py.
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.plant.contact_maths import arctan, exponential

ATAN_ULPS = 1.0  # the C library's bound (glibc manual)
EXP_ULPS = 2.0  # common practice, no source
LIB_ULPS = 1.0  # the C library's own (glibc manual)
SUBNORMAL_STEP = math.ulp(0.0)
EXTENDED = pytest.mark.skipif(np.finfo(np.longdouble).nmant < 63,
                              reason="needs an extended-precision long double")
RNG_SEED = 20261205


@nb.njit(error_model="numpy")  # (no cache=True: see the module docstring)
def _arctan_all(x, out):
    for i in range(x.shape[0]):
        out[i] = arctan(x[i])


@nb.njit(error_model="numpy")
def _exponential_all(x, out):
    for i in range(x.shape[0]):
        out[i] = exponential(x[i])


@pytest.fixture(scope="module", autouse=True)
def compiled_before_the_deadline():
    """Compile (or load) both once, so that Hypothesis's per-example deadline times the
    functions and not numba's first call."""
    arctan(0.5)
    exponential(-0.5)


def _ours(kernel, x: np.ndarray) -> np.ndarray:
    out = np.empty_like(x)
    kernel(x, out)
    return out


def _beside(b: float, count: int = 64) -> list[float]:
    """count doubles each side of b, and b."""
    below, above, x, y = [], [], b, b
    for _ in range(count):
        below.append(x)
        x = np.nextafter(x, -np.inf)
        y = np.nextafter(y, np.inf)
        above.append(y)
    return below + above


def _c_exp(x: float) -> float:
    """The C library's exp, inf where it overflows (Python raises instead)."""
    try:
        return math.exp(x)
    except OverflowError:
        return math.inf


def _ulps_from_extended(ours: np.ndarray, ref: np.ndarray) -> np.ndarray:
    """|ours - ref| in units in the last place of the double nearest ref."""
    err = np.abs(ours.astype(np.longdouble) - ref)
    return (err / np.spacing(np.abs(ref.astype(np.float64))).astype(np.longdouble)).astype(float)


def _atan_sweep() -> np.ndarray:
    """Dense over -5..5 (all three reduction ranges), seeded random over -10..10 and
    random bit patterns, log-spaced from 1e-300 to 1e300 both signs, and each side of the
    two range boundaries (0.66, tan(3 pi/8))."""
    rng = np.random.default_rng(RNG_SEED)
    bits = rng.integers(0, 2**63 - 1, 1_000_000, dtype=np.int64).view(np.float64)
    bits = bits[np.isfinite(bits)]
    edges = np.array(_beside(0.66) + _beside(2.41421356237309504880))
    logs = 10.0 ** np.linspace(-300, 300, 200_001)
    return np.concatenate([np.linspace(-5.0, 5.0, 1_000_001), rng.uniform(-10, 10, 2_000_000),
                           bits, -bits, logs, -logs, edges, -edges])


def _exp_sweep() -> np.ndarray:
    """Dense over the contact law's arguments (-40..0) and over the whole range where
    the result is a normal number, seeded random over -1..1 and over the normal range,
    each side of the half-way points of the reduction (x log2 e + 1/2 an integer), and
    tiny arguments of both signs."""
    rng = np.random.default_rng(RNG_SEED)
    halves = [(k - 0.5) / 1.4426950408889634 for k in range(-1020, 1021, 17)]
    edges = np.array([v for b in halves for v in _beside(b, 8)])
    tiny = 10.0 ** np.linspace(-300, -1, 30_001)
    return np.concatenate([np.linspace(-40.0, 0.0, 1_000_001),
                           np.linspace(-708.0, 709.7, 1_000_001),
                           rng.uniform(-1.0, 1.0, 2_000_000), rng.uniform(-708.0, 709.7, 500_000),
                           edges, tiny, -tiny])


@EXTENDED
def test_arctan_within_one_ulp() -> None:
    x = _atan_sweep()
    ulps = _ulps_from_extended(_ours(_arctan_all, x), np.arctan(x.astype(np.longdouble)))
    assert float(ulps.max()) <= ATAN_ULPS


@EXTENDED
def test_exponential_within_two_ulp() -> None:
    x = _exp_sweep()
    ulps = _ulps_from_extended(_ours(_exponential_all, x), np.exp(x.astype(np.longdouble)))
    assert float(ulps.max()) <= EXP_ULPS


def test_both_near_the_c_librarys() -> None:
    x = _atan_sweep()
    lib = np.array([math.atan(v) for v in x])
    assert np.all(np.abs(_ours(_arctan_all, x) - lib) <= (ATAN_ULPS + LIB_ULPS)
                  * np.spacing(np.abs(lib)))
    x = _exp_sweep()
    lib = np.array([math.exp(v) for v in x])
    assert np.all(np.abs(_ours(_exponential_all, x) - lib) <= (EXP_ULPS + LIB_ULPS)
                  * np.spacing(lib))


def test_exponential_overflows_and_underflows_where_the_c_library_does() -> None:
    over = 709.782712893384  # ln(largest double), to the digits printed
    under = -745.1332191019412  # ln(smallest subnormal / 2)
    x = np.array(_beside(over, 2000) + _beside(under, 2000)
                 + [v for b in (-746.0, -745.2, -745.0, 709.78, 709.8, 710.0)
                    for v in _beside(b, 200)])
    ours = _ours(_exponential_all, x)
    lib = np.array([_c_exp(v) for v in x])
    assert np.array_equal(np.isinf(ours), np.isinf(lib))
    finite = np.isfinite(lib)
    tiny = finite & (lib < 2.2250738585072014e-308)  # subnormal results or 0
    assert np.all(np.abs(ours[tiny] - lib[tiny]) <= SUBNORMAL_STEP)
    assert np.array_equal(ours[tiny] == 0.0, lib[tiny] == 0.0)
    big = finite & ~tiny
    assert np.all(np.abs(ours[big] - lib[big]) <= (EXP_ULPS + LIB_ULPS) * np.spacing(lib[big]))


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_arctan_of_any_double_is_odd_and_near_the_c_librarys(x: float) -> None:
    y = arctan(x)
    assert arctan(-x) == -y
    lib = math.atan(x)
    assert abs(y - lib) <= (ATAN_ULPS + LIB_ULPS) * math.ulp(lib)


@given(st.floats(min_value=-708.0, max_value=709.78))
def test_exponential_of_any_double_near_the_c_librarys(x: float) -> None:
    lib = _c_exp(x)
    assert abs(exponential(x) - lib) <= (EXP_ULPS + LIB_ULPS) * math.ulp(lib)


@given(st.floats(min_value=-745.2, max_value=-708.4))
def test_exponential_reaches_the_subnormal_results(x: float) -> None:
    """Below the smallest normal both round to the subnormal grid: ours once, after a
    product off by a small fraction of a step; the C library's correctly to within half
    a step. So they are at most one step apart."""
    assert abs(exponential(x) - math.exp(x)) <= SUBNORMAL_STEP


def test_special_values_as_c99_annex_f() -> None:
    assert arctan(0.0) == 0.0 and math.copysign(1.0, arctan(0.0)) == 1.0
    assert arctan(-0.0) == 0.0 and math.copysign(1.0, arctan(-0.0)) == -1.0
    assert arctan(math.inf) == math.atan(math.inf)  # the double nearest pi/2
    assert arctan(-math.inf) == -math.atan(math.inf)
    assert math.isnan(arctan(math.nan))
    assert exponential(0.0) == 1.0 and exponential(-0.0) == 1.0
    assert exponential(-math.inf) == 0.0 and math.copysign(1.0, exponential(-math.inf)) == 1.0
    assert exponential(math.inf) == math.inf
    assert math.isnan(exponential(math.nan))
