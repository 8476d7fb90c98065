"""Induction machine: space-vector model in the stationary frame.

Rotor quantities are referred to the stator; amplitude-invariant Clarke transform.
With flux linkages as state (Novotny & Lipo, *Vector Control and Dynamics of AC Drives*,
1996, ch. 5; any drives text)::

    dpsi_s/dt = u_s - R_s i_s
    dpsi_r/dt = -R_r i_r + j omega_r psi_r          (omega_r = p * omega_m, electrical)
    i_s = (L_r psi_s - L_m psi_r) / D,  i_r = (L_s psi_r - L_m psi_s) / D,
    D = L_s L_r - L_m^2,  L_s = L_ls + L_m,  L_r = L_lr + L_m
    T = 3/2 p Im(conj(psi_s) i_s) = 3/2 p (psi_sa i_sb - psi_sb i_sa)

For a frozen rotor speed this is the complex linear system dx/dt = A x + B u with
x = [psi_s, psi_r], B = [1, 0]. Its zero-order-hold discretisation over a step h is
exact for a held voltage: x(h) = Phi x(0) + Gamma u, Phi = e^{A h},
Gamma = A^{-1} (Phi - I) B. The 2x2 exponential has the closed form (Putzer / Cayley-
Hamilton): with A h = s I + N, N traceless, N^2 = q^2 I,
e^{A h} = e^s (cosh q I + sinh(q)/q N).
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from .columns import (
    C_CRR,
    C_CSR,
    C_CSS,
    C_G1_RE,
    C_G2_RE,
    C_IR_RE,
    C_IS_RE,
    C_KI1_RE,
    C_KI2_RE,
    C_P11_RE,
    C_P12_RE,
    C_P21_RE,
    C_P22_RE,
    C_PP,
    C_PR_RE,
    C_PS_RE,
    C_RR,
    C_RS,
    W,
    put_c,
)
from .jit import compiled_inline
from .layout import (
    MP_ALPHA_R,
    MP_ALPHA_S,
    MP_LLR,
    MP_LLS,
    MP_LM,
    MP_POLE_PAIRS,
    MP_RR20,
    MP_RS20,
    MP_T_REF,
    MS_CRR,
    MS_CSR,
    MS_CSS,
    MS_LM,
    MS_RR,
    MS_RS,
    MS_T_ROTOR,
    MS_T_STATOR,
    MS_TORQUE,
    MX_CG,
    MX_G1,
    MX_G2,
    MX_IR,
    MX_IS,
    MX_KI1,
    MX_KI2,
    MX_P1,
    MX_P2,
    MX_PHI11,
    MX_PHI12,
    MX_PHI21,
    MX_PHI22,
    MX_PSI_R,
    MX_PSI_S,
)


@compiled_inline
def winding_resistance(r_ref: float, alpha: float, temp_k: float, temp_ref_k: float) -> float:
    """Copper/aluminium resistance at a temperature: R = R_ref (1 + alpha (T - T_ref)).

    Linear temperature law for conductors; alpha = 0.00393 1/K for annealed copper at
    20 degC (common practice, IEC 60028 gives 1/234.5 K for 20 degC reference).
    """
    return r_ref * (1.0 + alpha * (temp_k - temp_ref_k))


@compiled_inline
def saturated_lm(i_m: float, table_i: np.ndarray, table_psi: np.ndarray, n: int,
                 lm_linear: float) -> float:
    """Secant magnetising inductance L_m = psi_m(i_m) / i_m from a magnetising curve.

    The table gives the main-flux magnitude (V s, space-vector peak) against the
    magnetising current magnitude (A, peak), rising and starting above zero current.
    Below the first point the machine is linear with the first point's secant.
    """
    if n < 2 or i_m <= table_i[0]:
        return lm_linear if n < 1 else table_psi[0] / table_i[0]
    if i_m >= table_i[n - 1]:
        # extrapolate with the last incremental slope (deep saturation)
        slope = (table_psi[n - 1] - table_psi[n - 2]) / (table_i[n - 1] - table_i[n - 2])
        return (table_psi[n - 1] + slope * (i_m - table_i[n - 1])) / i_m
    k = 1
    while table_i[k] < i_m:
        k += 1
    w = (i_m - table_i[k - 1]) / (table_i[k] - table_i[k - 1])
    psi = table_psi[k - 1] + w * (table_psi[k] - table_psi[k - 1])
    return psi / i_m


@compiled_inline
def abs2(z: complex) -> float:
    """|z|^2 without a square root."""
    return z.real * z.real + z.imag * z.imag


@compiled_inline
def scaled(x: float, z: complex) -> complex:
    """x z for a real x, in two multiplications. numba widens x to x + 0j and multiplies
    as complex numbers (four multiplications, two additions), and strict IEEE arithmetic
    keeps the products with that zero; the value is the same for a finite z (but for
    the sign of a zero part). Likewise ``scaled(1 / d, z)`` is not z / d: divide the
    parts (``divided``)."""
    return complex(x * z.real, x * z.imag)


@compiled_inline
def divided(z: complex, d: float) -> complex:
    """z / d for a real d, part by part: numba's complex division by d + 0j gives the
    same for a finite, non-zero d, after two more divisions and its branches."""
    return complex(z.real / d, z.imag / d)


@compiled_inline
def currents(psi_s: complex, psi_r: complex, ls: float, lr: float, lm: float):
    """Stator and rotor current space vectors from the flux linkages, A."""
    d = ls * lr - lm * lm
    i_s = divided(scaled(lr, psi_s) - scaled(lm, psi_r), d)
    i_r = divided(scaled(ls, psi_r) - scaled(lm, psi_s), d)
    return i_s, i_r


@compiled_inline
def currents_frozen(ms: np.ndarray, m: int, psi_s: complex, psi_r: complex):
    """Stator and rotor currents with the coefficients stored at the last refresh, A."""
    css = ms[m, MS_CSS]
    csr = ms[m, MS_CSR]
    return (scaled(css, psi_s) - scaled(csr, psi_r),
            scaled(ms[m, MS_CRR], psi_r) - scaled(csr, psi_s))


@compiled_inline
def open_phase_flux(ms: np.ndarray, m: int, psi_s: complex, psi_r: complex,
                    phase: int) -> complex:
    """Stator flux with the current of an open phase forced to zero.

    A star-connected stator with no neutral and phase k open (k = 0, 1, 2 for a, b, c)
    carries no current in that phase: i_k = Re(i_s conj(d_k)) = 0 with
    d_k = exp(j 2 pi k / 3) (amplitude-invariant Clarke transform). The floating terminal
    takes whatever voltage that needs, so the stator flux along d_k is slaved to the rest
    of the state: with i_s = c_ss psi_s - c_sr psi_r, subtracting
    d_k Re(i_s conj(d_k)) / c_ss from psi_s zeroes i_k and leaves the perpendicular axis
    and the rotor untouched. Applied after each sub-step, the constraint holds to first
    order in the step (the stator's open-circuit axis is infinitely stiff). The magnetic
    energy of the interrupted current (an arc) leaves the energy ledger unaccounted.
    Model of our own from the circuit constraint; the signature it gives (no current in
    one phase, torque pulsating at twice the stator frequency) is the textbook one
    (Fitzgerald, Kingsley and Umans, Electric Machinery, single-phasing).
    """
    d = cmath.exp(complex(0.0, 2.0 * math.pi * phase / 3.0))
    css = ms[m, MS_CSS]
    i_s = scaled(css, psi_s) - scaled(ms[m, MS_CSR], psi_r)
    i_k = (i_s * d.conjugate()).real
    return psi_s - scaled(i_k / css, d)


@compiled_inline
def torque(psi_s: complex, i_s: complex, pole_pairs: float) -> float:
    """Electromagnetic torque T = 3/2 p (psi_sa i_sb - psi_sb i_sa), N m."""
    return 1.5 * pole_pairs * (psi_s.real * i_s.imag - psi_s.imag * i_s.real)


@compiled_inline
def refresh_matrices(mpar: np.ndarray, mstate: np.ndarray, mx: np.ndarray, m: int,
                     omega_e: float, h: float, sine_on: bool, sine_omega: float,
                     sat_i: np.ndarray, sat_psi: np.ndarray, sat_n: int,
                     c: np.ndarray) -> None:
    """Recompute motor m's zero-order-hold matrices for rotor speed omega_e (electrical),
    into mx and ms and, with the flux linkages and currents the frame starts from, into
    the kernel's columns c (columns.py).

    Resistances follow the winding temperatures, L_m the saturation curve at the present
    magnetising current. Also stores the coefficients of the exact stator-current
    integral over a step, the currents for the new coefficients, the
    sensitivity of the end-of-step stator current to the held voltage (for the blocked
    bridge), and, when sine_on, the particular solution (j w - A)^{-1} B of an ideal
    sinusoidal source of angular frequency sine_omega (0 is a DC source).
    """
    rs = winding_resistance(mpar[m, MP_RS20], mpar[m, MP_ALPHA_S], mstate[m, MS_T_STATOR],
                            mpar[m, MP_T_REF])
    rr = winding_resistance(mpar[m, MP_RR20], mpar[m, MP_ALPHA_R], mstate[m, MS_T_ROTOR],
                            mpar[m, MP_T_REF])
    lm = mpar[m, MP_LM]
    if sat_n > 0:
        i_s, i_r = currents(mx[m, MX_PSI_S], mx[m, MX_PSI_R], mpar[m, MP_LLS] + mstate[m, MS_LM],
                            mpar[m, MP_LLR] + mstate[m, MS_LM], mstate[m, MS_LM])
        lm = saturated_lm(abs(i_s + i_r), sat_i, sat_psi, sat_n, lm)
    mstate[m, MS_LM] = lm
    ls = mpar[m, MP_LLS] + lm
    lr = mpar[m, MP_LLR] + lm
    d = ls * lr - lm * lm
    mstate[m, MS_RS] = rs
    mstate[m, MS_RR] = rr
    mstate[m, MS_CSS] = lr / d
    mstate[m, MS_CSR] = lm / d
    mstate[m, MS_CRR] = ls / d
    a11 = complex(-rs * lr / d, 0.0)
    a12 = complex(rs * lm / d, 0.0)
    a21 = complex(rr * lm / d, 0.0)
    a22 = complex(-rr * ls / d, omega_e)
    # e^{A h} by the traceless split A h = s I + N, N^2 = q^2 I
    s = 0.5 * (a11 + a22) * h
    dd = 0.5 * (a11 - a22) * h
    q = cmath.sqrt(dd * dd + a12 * a21 * h * h)
    # e^s cosh q and e^s sinh(q)/q from the two exponentials e^(s+q), e^(s-q)
    e_plus = cmath.exp(s + q)
    e_minus = cmath.exp(s - q)
    ch = 0.5 * (e_plus + e_minus)
    if abs2(q) > 1e-12:  # |q| > 1e-6 without a hypot (the two may differ within an ulp
        # of |q| = 1e-6, where both branches agree to 1e-10; the machines are far from it)
        shq = 0.5 * (e_plus - e_minus) / q
    else:
        shq = cmath.exp(s) * (1.0 + q * q / 6.0)
    phi11 = ch + shq * dd
    phi22 = ch - shq * dd
    phi12 = shq * a12 * h
    phi21 = shq * a21 * h
    inv_det = 1.0 / (a11 * a22 - a12 * a21)
    ai11 = a22 * inv_det
    ai12 = -a12 * inv_det
    ai21 = -a21 * inv_det
    ai22 = a11 * inv_det
    # Gamma = A^{-1} (Phi - I) [1, 0]^T
    g1 = ai11 * (phi11 - 1.0) + ai12 * phi21
    g2 = ai21 * (phi11 - 1.0) + ai22 * phi21
    mx[m, MX_PHI11] = phi11
    mx[m, MX_PHI12] = phi12
    mx[m, MX_PHI21] = phi21
    mx[m, MX_PHI22] = phi22
    mx[m, MX_G1] = g1
    mx[m, MX_G2] = g2
    css = lr / d
    csr = lm / d
    # int i_s dt = CSS int psi_s - CSR int psi_r, int x dt = A^{-1} (x(h) - x(0) - B u h)
    mx[m, MX_KI1] = scaled(css, ai11) - scaled(csr, ai21)
    mx[m, MX_KI2] = scaled(css, ai12) - scaled(csr, ai22)
    mx[m, MX_CG] = scaled(css, g1) - scaled(csr, g2)
    # currents with the new coefficients: the start values of the next sub-step
    ps = mx[m, MX_PSI_S]
    pr = mx[m, MX_PSI_R]
    i_s = scaled(css, ps) - scaled(csr, pr)
    mx[m, MX_IS] = i_s
    mx[m, MX_IR] = scaled(ls / d, pr) - scaled(csr, ps)
    mstate[m, MS_TORQUE] = torque(ps, i_s, mpar[m, MP_POLE_PAIRS])
    put_c(c, C_PS_RE, m, ps)
    put_c(c, C_PR_RE, m, pr)
    put_c(c, C_IS_RE, m, i_s)
    put_c(c, C_IR_RE, m, mx[m, MX_IR])
    put_c(c, C_P11_RE, m, phi11)
    put_c(c, C_P12_RE, m, phi12)
    put_c(c, C_P21_RE, m, phi21)
    put_c(c, C_P22_RE, m, phi22)
    put_c(c, C_G1_RE, m, g1)
    put_c(c, C_G2_RE, m, g2)
    put_c(c, C_KI1_RE, m, mx[m, MX_KI1])
    put_c(c, C_KI2_RE, m, mx[m, MX_KI2])
    c[C_CSS * W + m] = css
    c[C_CSR * W + m] = csr
    c[C_CRR * W + m] = mstate[m, MS_CRR]
    c[C_RS * W + m] = rs
    c[C_RR * W + m] = rr
    c[C_PP * W + m] = mpar[m, MP_POLE_PAIRS]
    # particular solution of dx/dt = A x + B U e^{j w t}: x_p = (j w I - A)^{-1} B U e^{j w t}
    if sine_on:
        jw = complex(0.0, sine_omega)
        det2 = (jw - a11) * (jw - a22) - a12 * a21
        mx[m, MX_P1] = (jw - a22) / det2
        mx[m, MX_P2] = a21 / det2


@compiled_inline
def step_flux(mx: np.ndarray, m: int, u: complex):
    """Advance motor m's flux linkages one sub-step with the held stator voltage u.

    Returns the new (psi_s, psi_r).
    """
    ps0 = mx[m, MX_PSI_S]
    pr0 = mx[m, MX_PSI_R]
    ps1 = mx[m, MX_PHI11] * ps0 + mx[m, MX_PHI12] * pr0 + mx[m, MX_G1] * u
    pr1 = mx[m, MX_PHI21] * ps0 + mx[m, MX_PHI22] * pr0 + mx[m, MX_G2] * u
    return ps1, pr1


@compiled_inline
def stator_current_integral(mx: np.ndarray, m: int, ps0: complex, pr0: complex, ps1: complex,
                            pr1: complex, u: complex, h: float) -> complex:
    """Exact integral of the stator current over a step with held voltage u, A s.

    From dx/dt = A x + B u: int_0^h x dt = A^{-1} (x(h) - x(0) - B u h), and
    i_s = (L_r psi_s - L_m psi_r) / D; the coefficients are stored at the refresh.
    """
    return mx[m, MX_KI1] * (ps1 - ps0 - scaled(h, u)) + mx[m, MX_KI2] * (pr1 - pr0)


@compiled_inline
def step_flux_sine(mx: np.ndarray, m: int, e0: complex, e1: complex, psi_s: complex,
                   psi_r: complex):
    """Advance motor m's flux linkages (psi_s, psi_r at the step's start) one sub-step
    from an ideal sinusoidal source, exactly.

    u(t) = amp e^{j theta(t)}, given at the step's ends as e0 = u(0), e1 = u(h) (the
    same for every motor of the source: computed once by the caller); with the particular
    solution x_p = P u the homogeneous part decays with Phi:
    x(h) = Phi (x(0) - x_p(0)) + x_p(h).
    """
    ps0 = psi_s - mx[m, MX_P1] * e0
    pr0 = psi_r - mx[m, MX_P2] * e0
    ps1 = mx[m, MX_PHI11] * ps0 + mx[m, MX_PHI12] * pr0 + mx[m, MX_P1] * e1
    pr1 = mx[m, MX_PHI21] * ps0 + mx[m, MX_PHI22] * pr0 + mx[m, MX_P2] * e1
    return ps1, pr1


@compiled_inline
def magnetic_energy(psi_s: complex, i_s: complex, psi_r: complex, i_r: complex) -> float:
    """Energy stored in the (linear) magnetic field of a three-phase machine, J.

    W = 3/2 * 1/2 Re(psi_s conj(i_s) + psi_r conj(i_r)) with amplitude-invariant vectors.
    """
    return 0.75 * ((psi_s * i_s.conjugate()).real + (psi_r * i_r.conjugate()).real)
