"""Two-level three-phase voltage-source inverter, average (duty-cycle) model.

Leg voltage against the DC-link midpoint, averaged over a switching period (Holmes &
Lipo, *Pulse Width Modulation for Power Converters*, 2003, ch. 2 and the dead-time
section; Mohan, Undeland, Robbins, *Power Electronics*, ch. 8)::

    v_x0 = (d_x - 1/2) U_dc - sgn(i_x) [ t_d f_sw U_dc + v_drop(d_x, |i_x|) ]

The dead time t_d shifts the effective duty by -t_d f_sw sgn(i) (the diode conducts
during the blanking interval), so the DC current uses d_eff = d - t_d f_sw sgn(i).
On-state drops: for i > 0 the upper IGBT conducts during d, the lower diode during
1 - d; mirrored for i < 0; each device is V0 + r |i|. Switching loss per leg is
f_sw E_sw (U_dc / U_ref)(|i| / I_ref), drawn from the DC link (linear scaling of
datasheet switching energies: common practice).

``sgn`` changes linearly across a small current band so that the held voltage does
not flip between sub-steps at a zero crossing.

With the gates blocked each leg conducts through its freewheeling diodes by the sign
of its current and can only clamp to a rail: the bridge applies the voltage that would
bring the phase currents to zero at the end of the sub-step, clipped to the rails
(+-(U_dc/2 + V_F)). A current that would cross zero thus stops at zero within the
sub-step, and a back-EMF above the link voltage drives current into the link.

What the average model leaves out, which a firmware engineer tuning against it should
know: the PWM ripple. At the Tern's 800 Hz carrier a two-level leg puts about +-180 A
of ripple on each phase current at the rated point (about +-36 % of the fundamental,
with the two motors' leakage inductance in parallel: a carrier-based PWM simulation
outside the plant, 2026-12-04); here the currents are the switching-period averages. So
the current sensors read ripple-free values (what a board sampling in step with its
carrier reads). The gate drivers' overcurrent comparator (drive_substep.py) adds the
ripple's peak (ripple_peaks, for a centre-aligned carrier with the duties held over its
period) to the average, as a real detector sees the peak: at 0.9 of the linear
modulation the Tern's phases carry up to 160 A of it, so the drivers act from about
1440 A of average, not 1600. A board with another pattern (discontinuous PWM, or duties
updated twice a carrier period) has other peaks. The dead time's error changes sign across
``sign_band_a`` (5 A on the Tern), where with the ripple it changes across the ripple's
amplitude, so dead-time compensation tuned here over-compensates near zero crossings
on a real drive (Holmes & Lipo, ch. 5-6; Munoz & Lipo, IEEE TPEL 14(4), 1999; from
memory). At low pulse ratios (about 6 at 160 km/h) the low-order harmonics and
subharmonics of asynchronous PWM are missing too.
"""

from __future__ import annotations

import math

import numpy as np

from .jit import compiled, compiled_inline
from .layout import (
    IP_ESW,
    IP_ESW_IREF,
    IP_ESW_VREF,
    IP_FSW,
    IP_IBAND,
    IP_RCE,
    IP_RF,
    IP_TDEAD,
    IP_VCE0,
    IP_VF0,
    MP_LLR,
    MP_LLS,
    MP_LM,
)

SQRT3 = math.sqrt(3.0)


@compiled_inline
def phase_currents(i_vec: complex):
    """Inverse amplitude-invariant Clarke transform: phase currents a, b, c, A."""
    ia = i_vec.real
    ib = -0.5 * i_vec.real + 0.5 * SQRT3 * i_vec.imag
    ic = -0.5 * i_vec.real - 0.5 * SQRT3 * i_vec.imag
    return ia, ib, ic


@compiled_inline
def clarke_vec(va: float, vb: float, vc: float) -> complex:
    """Amplitude-invariant Clarke transform (zero sequence dropped)."""
    return complex((2.0 * va - vb - vc) / 3.0, (vb - vc) / SQRT3)


@compiled_inline
def soft_sign(i: float, band: float) -> float:
    """sgn(i) with a linear transition over |i| < band."""
    x = i / band
    if x > 1.0:
        return 1.0
    if x < -1.0:
        return -1.0
    return x


@compiled_inline
def leg_average(ipar: np.ndarray, k: int, duty: float, i: float, udc: float):
    """One leg's average voltage, effective duty, drop voltage and switching power.

    Returns (v_x0, d_eff, v_drop_signed, p_sw): v_x0 against the DC midpoint in V;
    d_eff the duty the DC side sees; v_drop_signed the conduction drop with the sign of
    the current (its product with i is the conduction loss); p_sw the switching loss W.
    """
    sg = soft_sign(i, ipar[k, IP_IBAND])
    ai = abs(i)
    v_igbt = ipar[k, IP_VCE0] + ipar[k, IP_RCE] * ai
    v_diode = ipar[k, IP_VF0] + ipar[k, IP_RF] * ai
    # i > 0: IGBT during d, diode during 1-d; i < 0: diode during d, IGBT during 1-d
    pos = 0.5 * (1.0 + sg)
    neg = 1.0 - pos
    mag = pos * (duty * v_igbt + (1.0 - duty) * v_diode) + neg * (duty * v_diode
                                                                  + (1.0 - duty) * v_igbt)
    v_drop = sg * mag
    d_eff = duty - ipar[k, IP_TDEAD] * ipar[k, IP_FSW] * sg
    v_x0 = (d_eff - 0.5) * udc - v_drop
    p_sw = (ipar[k, IP_FSW] * ipar[k, IP_ESW] * (udc / ipar[k, IP_ESW_VREF])
            * (ai / ipar[k, IP_ESW_IREF]))
    return v_x0, d_eff, v_drop, p_sw


def ripple_inductance(mpar: np.ndarray) -> float:
    """The inductance an inverter's PWM ripple sees, H: its motors' transient
    inductances sigma L_s = L_ls + L_m L_lr / (L_m + L_lr) in parallel (the carrier's
    harmonics meet the leakage paths; the unsaturated L_m: Holmes & Lipo, 2003, ch. 5)."""
    lm, lls, llr = mpar[:, MP_LM], mpar[:, MP_LLS], mpar[:, MP_LLR]
    return float(1.0 / np.sum(1.0 / (lls + lm * llr / (lm + llr))))


#: the largest ripple there is, in units of U_dc / (f_sw L): each leg's integral of
#: (h - d) over the first half period lies in [-d (1 - d) T/2, 0], within [-T/8, 0], and
#: r_x = (U/L) (2/3 g_x - 1/3 (g_y + g_z)), so |r_x| <= U T / (12 L), reached at duties
#: (0, 0, 1/2) (tests/plant/test_pwm_ripple.py)
RIPPLE_BOUND = 1.0 / 12.0


@compiled_inline
def ripple_peaks(d_a: float, d_b: float, d_c: float, udc: float, l_ripple: float,
                 f_sw: float):
    """The largest deviation of each phase current from its switching-period average, A,
    under a symmetric (centre-aligned) triangular carrier with the duties held over the
    carrier period, a star-connected load of inductance ``l_ripple`` and a back-EMF
    that does not change within the period (Holmes & Lipo, *Pulse Width Modulation for
    Power Converters*, 2003, ch. 5, the current ripple of regular-sampled PWM).

    In the first half period [0, T/2] leg x is low until t_x = (1 - d_x) T/2 and high
    after it (the second half mirrors it). The phase voltage is v_xn = U (h_x - (h_a +
    h_b + h_c)/3), h the legs' states, and the ripple r_x(t) = (1/L) int_0^t (v_xn -
    mean v_xn) dt, piecewise linear: zero at 0 and T/2, and -r_x(T - t) in the second
    half, so its extremes are at the switching instants of the first half.

    What a comparator of the average plus this peak makes of it: it trips at the first
    sub-step where the peak would pass the threshold, where a real one trips at the
    carrier period's own peak (on a slow rise up to a carrier period later); the
    leakage inductance is the unsaturated one (it falls at trip-level currents, and the
    ripple grows); and an open phase leaves no balanced star, for which the one
    inductance does not hold."""
    half = 0.5 / f_sw
    d0 = min(max(d_a, 0.0), 1.0)
    d1 = min(max(d_b, 0.0), 1.0)
    d2 = min(max(d_c, 0.0), 1.0)
    mean = (d0 + d1 + d2) / 3.0
    t0, t1, t2 = (1.0 - d0) * half, (1.0 - d1) * half, (1.0 - d2) * half
    k = udc / l_ripple
    r0 = r1 = r2 = 0.0  # the ripple of each phase at the instant reached, A
    p0 = p1 = p2 = 0.0  # its largest magnitude so far
    h0 = h1 = h2 = 0.0  # the legs' states
    t = 0.0
    for _ in range(3):  # the three switching instants in order
        nxt = min(t0 if h0 == 0.0 else half, t1 if h1 == 0.0 else half,
                  t2 if h2 == 0.0 else half)
        dt = nxt - t
        s = (h0 + h1 + h2) / 3.0
        r0 += k * ((h0 - s) - (d0 - mean)) * dt
        r1 += k * ((h1 - s) - (d1 - mean)) * dt
        r2 += k * ((h2 - s) - (d2 - mean)) * dt
        p0, p1, p2 = max(p0, abs(r0)), max(p1, abs(r1)), max(p2, abs(r2))
        t = nxt
        if h0 == 0.0 and t0 <= t:
            h0 = 1.0
        elif h1 == 0.0 and t1 <= t:
            h1 = 1.0
        elif h2 == 0.0 and t2 <= t:
            h2 = 1.0
    return p0, p1, p2


@compiled_inline
def _clamp_leg(v: float, rail: float, udc: float, v_diode: float):
    """Clip one leg to the rails; returns (v_x0, s, v_drop) with v_x0 = (s - 1/2) U - v_drop."""
    if v >= rail:
        return rail, 1.0, -v_diode
    if v <= -rail:
        return -rail, 0.0, v_diode
    return v, (v / udc + 0.5) if udc > 0.0 else 0.5, 0.0


@compiled
def blocked_bridge(u_target: complex, udc: float, v_diode: float):
    """Voltage a diode bridge applies when the gates are blocked.

    u_target is the voltage that would bring the phase currents to zero at the end of
    the sub-step. Its phase voltages are centred on the DC midpoint and clipped to the
    rails +-(U_dc/2 + V_F): a leg at the upper rail conducts through its upper diode
    (current flowing into the link), at the lower rail through the lower diode; a leg
    between the rails carries no current. Returns (u_vec, s_a, s_b, s_c, drop_a,
    drop_b, drop_c): the applied space vector, each leg's switching function as the DC
    side sees it, and its diode drop with v_x0 = (s_x - 1/2) U_dc - drop_x, so that
    drop_x * i_x is the diode loss.
    """
    va, vb, vc = phase_currents(u_target)  # the same inverse transform serves voltages
    vcm = -0.5 * (max(va, max(vb, vc)) + min(va, min(vb, vc)))
    rail = 0.5 * udc + v_diode
    va, sa, da = _clamp_leg(va + vcm, rail, udc, v_diode)
    vb, sb, db = _clamp_leg(vb + vcm, rail, udc, v_diode)
    vc, sc, dc = _clamp_leg(vc + vcm, rail, udc, v_diode)
    return clarke_vec(va, vb, vc), sa, sb, sc, da, db, dc
