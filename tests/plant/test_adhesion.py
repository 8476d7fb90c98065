"""Wheel-rail adhesion: Polach's creep-force model, the compiled function the kernel calls.

Source: Polach, Wear 258 (2005) 992-1000, parameter sets from REFERENCES.md [memory,
corroborated].
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.plant.drivetrain import (
    POLACH_DRY,
    POLACH_WET,
    polach_force,
)
from tests.oracles import polach_creep_force

Q = 2 * 75e3  # axle load, N
K = 1.7e7  # Kalker linear coefficient of the axle, N


def force(w: float, v: float, params=POLACH_DRY, v_ref: float = 1e-6) -> tuple[float, float]:
    return polach_force(w, v, Q, K, *params, v_ref)


@pytest.fixture(scope="module", autouse=True)
def compiled_before_the_deadline():
    """Compile (or load) the contact function once, so that Hypothesis's per-example
    deadline times the function and not numba's first call (the tests ran alone failed)."""
    force(0.1, 1.0)


@pytest.mark.parametrize("params", [POLACH_DRY, POLACH_WET])
def test_small_creep_slope_is_kalker_reduced_by_polach_factors(params) -> None:
    k_a, k_s = params[0], params[1]
    v = 20.0
    s = 1e-7
    f, _ = force(s * v, v, params)
    assert f / s == pytest.approx((k_a + k_s) / 2 * K, rel=1e-5)


@pytest.mark.parametrize("params", [POLACH_DRY, POLACH_WET])
def test_large_creep_tends_to_friction_limit(params) -> None:
    _, _, mu0, a, b = params
    w = 40.0
    f, _ = force(w, 1e-3, params)  # huge creep: the arctan saturates at pi/2
    mu_w = mu0 * ((1 - a) * math.exp(-b * w) + a)
    assert f == pytest.approx(mu_w * Q, rel=1e-3)


def test_friction_decays_from_mu0_towards_a_mu0() -> None:
    _, _, mu0, a, _ = POLACH_DRY
    peak_low = max(force(w, 30.0)[0] for w in [0.05 * i for i in range(1, 40)]) / Q
    at_high_slip = force(200.0, 1e-3)[0] / Q
    assert peak_low < mu0
    assert at_high_slip == pytest.approx(a * mu0, rel=1e-3)


@given(w=st.floats(-5.0, 5.0), v=st.floats(0.0, 60.0))
def test_derivative_matches_finite_difference(w: float, v: float) -> None:
    eps = 1e-6
    _, d = force(w, v, v_ref=0.1)
    up, _ = force(w + eps, v, v_ref=0.1)
    down, _ = force(w - eps, v, v_ref=0.1)
    assert d == pytest.approx((up - down) / (2 * eps), rel=1e-4, abs=1e-2)


@given(w=st.floats(0.0, 10.0), v=st.floats(0.0, 80.0))
def test_force_is_odd_and_bounded_by_mu0_q(w: float, v: float) -> None:
    f_pos, _ = force(w, v, v_ref=0.1)
    f_neg, _ = force(-w, v, v_ref=0.1)
    assert f_pos == pytest.approx(-f_neg)
    assert 0.0 <= f_pos <= POLACH_DRY[2] * Q * (1 + 1e-12)


@pytest.mark.parametrize("params", [POLACH_DRY, POLACH_WET], ids=["dry", "wet"])
@pytest.mark.parametrize("w", [0.02, 0.1, 0.4, 1.5, 6.0])  # slip velocity, m/s, at 20 m/s
def test_the_whole_curve_is_polachs_formula(params, w: float) -> None:
    # Polach (Wear 258, 2005), as REFERENCES.md gives it, evaluated by hand in
    # tests/oracles.py (with Kalker's coefficient for the contact's constant). The plant's
    # function regularises the creep's denominator with v_ref (here 1e-6 m/s: no effect at
    # 20 m/s)
    v = 20.0
    expected = polach_creep_force(w, v, Q, K, *params)
    assert force(w, v, params)[0] == pytest.approx(expected, rel=1e-12)
    assert force(-w, v, params)[0] == pytest.approx(-expected, rel=1e-12)  # odd in w
