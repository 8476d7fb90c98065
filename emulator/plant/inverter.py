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
carrier reads); the gate drivers' overcurrent comparator (kernel.py) compares the
average with its threshold, where a real detector sees the peak (on the Tern it would
act near 1420 A of average, not 1600); and the dead time's error changes sign across
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
