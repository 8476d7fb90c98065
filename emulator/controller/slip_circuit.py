"""The scalar control's steady-state circuit and its searches, compiled.

What motor_scalar.py states in its docstring, per motor, amplitude-invariant peak
vectors (Bose 2002, ch. 8; Fitzgerald, Kingsley & Umans, ch. 6):

    I_s / psi_m = 1 / L_m + j w_sl / (R_r + j w_sl L_lr),
    T / psi_m^2 = 3/2 p w_sl R_r / (R_r^2 + (w_sl L_lr)^2),
    U_s / psi_m = G = (R_s + j w_s L_ls) I_s / psi_m + j w_s,  w_s = w_r + w_sl,

psi_m = min(psi_rated, U / |G|). The searches run on it every period: the slip for a
torque and for the current limit (bisection), the breakdown slip (golden section).
These run once a period per inverter, dozens of circuit evaluations each: compiled with
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


@compiled
def slip_for_torque(c, torque_abs, end, w_r, u_room, lm, halvings):
    """The slip (between 0 and end, either sign) where |T| reaches torque_abs: the middle
    of the bracket after the halvings (|T| rising from 0 along the way)."""
    lo, hi = 0.0, end
    for _ in range(halvings):
        mid = 0.5 * (lo + hi)
        if abs(operating_point(c, mid, w_r, u_room, lm)[0]) < torque_abs:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


@compiled
def slip_for_current(c, i_max, end, w_r, u_room, lm, halvings):
    """The slip (between 0 and end) where the stator current reaches i_max: the low end
    of the bracket after the halvings (the current within the limit there)."""
    lo, hi = 0.0, end
    for _ in range(halvings):
        mid = 0.5 * (lo + hi)
        if operating_point(c, mid, w_r, u_room, lm)[1] < i_max:
            lo = mid
        else:
            hi = mid
    return lo


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
