"""The scalar control's steady-state circuit and its searches, compiled.

What motor_scalar.py states in its docstring, per motor, amplitude-invariant peak
vectors (Bose 2002, ch. 8; Fitzgerald, Kingsley & Umans, ch. 6):

    I_s / psi_m = 1 / L_m + j w_sl / (R_r + j w_sl L_lr),
    T / psi_m^2 = 3/2 p w_sl R_r / (R_r^2 + (w_sl L_lr)^2),
    U_s / psi_m = G = (R_s + j w_s L_ls) I_s / psi_m + j w_s,  w_s = w_r + w_sl,

psi_m = min(psi_rated, U / |G|). The searches run on it every period: the slip for a
torque and for the current limit (the Illinois method, a regula falsi, halving where
it does not close in: _bracket), the breakdown slip (golden section).
These run once a period per inverter, a few circuit evaluations each: compiled with
numba (cache=True, strict IEEE arithmetic as the plant's kernels). Each function's
``py_func`` is the same code in plain Python, which the tests compare with it.

The circuit's constants travel as one array: CIRCUIT_* index it.
"""

from __future__ import annotations

import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

CIRCUIT_RS, CIRCUIT_RR, CIRCUIT_LLS, CIRCUIT_LLR, CIRCUIT_P, CIRCUIT_PSI_RATED = range(6)

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)


@compiled
def branches(c, w_sl, lm):
    """(I_s / psi_m, T / psi_m^2) at a slip frequency w_sl (rad/s) and the secant L_m."""
    rr, llr = c[CIRCUIT_RR], c[CIRCUIT_LLR]
    rotor = 1j * w_sl / complex(rr, w_sl * llr)
    torque = 1.5 * c[CIRCUIT_P] * w_sl * rr / (rr * rr + (w_sl * llr) ** 2)
    return 1.0 / lm + rotor, torque


@compiled
def magnitude(z):
    """|z| as sqrt(re^2 + im^2): abs() of a complex is a call of libm's hypot, which
    guards against overflow (none here: volts and amperes per volt-second) at several
    times the cost, and which stayed in the searches that do not use its value (a
    library call; the square root is an instruction the compiler drops). Within an ulp
    or so of hypot."""
    return math.sqrt(z.real * z.real + z.imag * z.imag)


@compiled
def operating_point(c, w_sl, w_r, u_room, lm):
    """(torque N m, stator current A peak, main flux V s, stator voltage V) at a slip
    with the rotor at electrical speed w_r and u_room the voltage there is."""
    y, t_per_psi2 = branches(c, w_sl, lm)
    w_s = w_r + w_sl
    g = complex(c[CIRCUIT_RS], w_s * c[CIRCUIT_LLS]) * y + 1j * w_s
    psi = min(c[CIRCUIT_PSI_RATED], u_room / max(magnitude(g), 1e-9))
    return t_per_psi2 * psi * psi, magnitude(y) * psi, psi, g * psi


#: secant steps a search makes at most before it only halves (_bracket)
SECANT_STEPS = 8


@compiled
def _bracket(c, which, target, end, f_0, f_end, guess, w_r, u_room, lm, halvings):
    """The bracket (lo, hi), hi on end's side, around a slip where |operating_point|'s
    item ``which`` (0 the torque, 1 the current) reaches target, f = |item| - target
    changing sign in it (f_0 < 0 at no slip, f_end >= 0 at end): narrowed to
    |end| 2^-halvings or less, the width a bisection of ``halvings`` steps leaves.

    The first point is ``guess`` where it lies inside (the last period's slip: the
    crossing moves little from one period to the next); then up to SECANT_STEPS points
    by the Illinois method (Dowell & Jarratt 1971, BIT 11), a regula falsi that halves
    the value kept at an end when that end is kept twice in a row, so that both ends
    close in, each point at least half the final width from both ends (the least step
    of Brent's zero finder, Brent 1973, "Algorithms for Minimization without
    Derivatives", ch. 4), so that the bracket closes across a crossing the secant has
    found instead of creeping up to it; then halvings. So the width is always reached,
    in at most SECANT_STEPS + ``halvings`` circuit evaluations, and in a few where the
    secants close in, as they do on this circuit (the bisection took ``halvings``).
    (Both references cited from memory; tests/controller/test_slip_searches.py checks
    the result against SciPy's brentq.)"""
    lo, hi, f_lo, f_hi = 0.0, end, f_0, f_end
    width = abs(end) * 0.5 ** halvings
    half = math.copysign(0.5 * width, end)  # half the width, from lo towards hi
    moved = 0  # the end the last point replaced: 1 lo, -1 hi
    for j in range(SECANT_STEPS + halvings):
        if abs(hi - lo) <= width:
            break
        if j >= SECANT_STEPS:
            mid = 0.5 * (lo + hi)
        elif j == 0 and min(lo, hi) < guess < max(lo, hi):
            mid = guess
        else:  # the secant, kept half the width inside (the bracket is wider than that)
            mid = hi - f_hi * (hi - lo) / (f_hi - f_lo)
            if not abs(mid - lo) >= abs(half):  # (NaN too)
                mid = lo + half
            elif abs(hi - mid) < abs(half):
                mid = hi - half
        point = operating_point(c, mid, w_r, u_room, lm)
        f = abs(point[0] if which == 0 else point[1]) - target
        if f < 0.0:
            lo, f_lo = mid, f
            if moved == 1:
                f_hi *= 0.5
            moved = 1
        else:
            hi, f_hi = mid, f
            if moved == -1:
                f_lo *= 0.5
            moved = -1
    return lo, hi


@compiled
def slip_for_torque(c, torque_abs, end, t_end, guess, w_r, u_room, lm, halvings):
    """The slip (between 0 and end, either sign) where |T| reaches torque_abs > 0, given
    t_end = |T(end)| >= torque_abs: the middle of a bracket around it |end| 2^-halvings
    wide, as a bisection of ``halvings`` steps gives, found from ``guess`` (_bracket).
    |T| rises from 0 at no slip towards the breakdown slip (at a few volts near
    standstill it may dip by parts in 10^4 on the way; the bracket holds a crossing
    all the same). 0 for no torque."""
    if torque_abs <= 0.0:
        return 0.0
    if t_end <= torque_abs:
        return end
    lo, hi = _bracket(c, 0, torque_abs, end, -torque_abs, t_end - torque_abs, guess, w_r,
                      u_room, lm, halvings)
    return 0.5 * (lo + hi)


@compiled
def slip_for_current(c, i_max, end, i_end, guess, w_r, u_room, lm, halvings):
    """The slip (between 0 and end) where the stator current reaches i_max, given
    i_end > i_max, the current at end: the low end of a bracket around it
    |end| 2^-halvings wide (the current within the limit there), found from ``guess``
    (_bracket). |I_s| rises with the slip at rated flux and may dip where the voltage
    starts to limit the flux (below its value at no slip, but not below i_max), so a
    limit within that hump (tenths of an ampere above no slip at a few tens of volts)
    is crossed three times: the search gives one of them. 0 where even the current at
    no slip is past the limit."""
    i_0 = operating_point(c, 0.0, w_r, u_room, lm)[1]
    if i_0 >= i_max:
        return 0.0
    return _bracket(c, 1, i_max, end, i_0 - i_max, i_end - i_max, guess, w_r, u_room, lm,
                    halvings)[0]


@compiled
def breakdown_slip(c, sign, w_r, u_room, lm, steps):
    """The slip frequency of the largest torque (rad/s, signed) at this voltage and
    speed: golden-section search on the circuit's torque between a fifth and three
    times R_r / (L_ls + L_lr), the breakdown slip without R_s and the magnetising
    branch (its one maximum lies in there)."""
    w_k = c[CIRCUIT_RR] / (c[CIRCUIT_LLS] + c[CIRCUIT_LLR])
    lo, hi = 0.2 * w_k, 3.0 * w_k
    g = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = hi - g * (hi - lo), lo + g * (hi - lo)
    ta = abs(operating_point(c, sign * a, w_r, u_room, lm)[0])
    tb = abs(operating_point(c, sign * b, w_r, u_room, lm)[0])
    for _ in range(steps):
        if ta > tb:
            hi, b, tb = b, a, ta
            a = hi - g * (hi - lo)
            ta = abs(operating_point(c, sign * a, w_r, u_room, lm)[0])
        else:
            lo, a, ta = a, b, tb
            b = lo + g * (hi - lo)
            tb = abs(operating_point(c, sign * b, w_r, u_room, lm)[0])
    return sign * 0.5 * (lo + hi)
