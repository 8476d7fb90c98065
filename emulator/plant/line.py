"""Line side: catenary source, transformer, four-quadrant converters, DC links.

Supply and transformer (all secondaries coupled through the common source impedance,
quantities referred to the secondary by the ratio n = U_primary / U_secondary)::

    L_k di_k/dt + (L_c/n^2) sum_j di_j/dt = e/n - (R_c/n^2) sum_j i_j - R_k i_k - u_k
    i_primary = sum_k i_k / n,   u_pantograph = e - R_c i_p - L_c di_p/dt

stepped by the trapezoidal rule (second order, no numerical damping of the 50 Hz
current); the matrix is diagonal plus rank one, solved by the Sherman-Morrison formula.
The EMF e(t) = U sqrt(2) [sin(theta) + sum_h a_h sin(h theta + phi_h)] is evaluated at
each sub-step's midpoint from absolute time, theta = phi_ref + 2 pi f (t - t_ref), so a
line frequency that is no multiple of 1/T is not aliased by the emulator.

Four-quadrant converter (single-phase H-bridge), average model: u_k = m U_dc + 2 sgn(i)
(V0 + r |i|), i_dc = m i_k (Mohan, Undeland, Robbins, *Power Electronics*, ch. 8; Steimel,
*Electric Traction*, 2008, line-converter chapter, from memory). With its gates blocked it
is a diode bridge: it applies the voltage that would bring its current to zero, clipped to
+-(U_dc + 2 V_F), so the link charges to the secondary peak less the diode drops.

DC link: C dU/dt = sum i_dc,4QC - sum i_dc,inverter - i_chopper - U/R_dis - i_filter, with
an optional series-resonant filter (L_f di_f/dt = U - u_cf - R_f i_f, C_f du_cf/dt = i_f)
tuned to twice the line frequency, L_f C_f = 1/(2 omega)^2; the chopper is an average
model i_ch = d U / R_ch.

Switchgear (switchgear.py): the main breaker, the contactors and the substation's feeding
breaker open at their current's zero. An interruption opens the feeding breaker; once its
arc has cleared the section is isolated and the pantograph reads 0. With the primary
open (either breaker) the windings stay coupled through the core: with no magnetising
branch their currents sum to zero, the same equations with L_c -> infinity (the
EMF and the old sum drop out; the Sherman-Morrison correction becomes s_b / s_1), so a
current can circulate between two converters but none returns to the line (windings.py).
A dead line with the feeder closed (the EMF at 0 behind the source impedance, a dip to
0) is a short the converters can drive current into.

Left out: the transformer's magnetising branch (no inrush when the breaker closes, no
saturation from a DC offset of the converters' currents, so a firmware's DC-offset
control has nothing to act on), the islanding voltage at the roof while the feeder is
open (the pantograph reads 0; the windings' common voltage SS_U_SEC has it), and the
converters' switching harmonics (average models: no carrier-frequency
currents for an interference-current monitor).
"""

from __future__ import annotations

import math

import numpy as np

from .jit import compiled, compiled_inline
from .layout import (
    KP_C,
    KP_CF,
    KP_HW_ENABLE,
    KP_HW_OFF_V,
    KP_HW_ON_V,
    KP_IDEAL,
    KP_LF,
    KP_R_CH,
    KP_R_DIS,
    KP_RF,
    KP_TH_C,
    KP_TH_G,
    KP_U_IDEAL,
    KP_U_OVP,
    KU_CHOPPER,
    LP_L,
    LS2_I,
    LS2_IDC,
    LS2_U,
    LS_E_CH,
    LS_E_DIS,
    LS_E_RF,
    LS_HW_CHOP,
    LS_I4Q,
    LS_ICH,
    LS_IF,
    LS_OVP,
    LS_Q_CH,
    LS_T_RES,
    LS_UCF,
    LS_UDC,
    LU_ENABLE,
    SP_ACTIVE,
    SP_AMPLITUDE,
    SP_DROOP,
    SP_FREQUENCY,
    SP_HW_LINE_ON,
    SP_I_LINE_TRIP,
    SP_L,
    SP_MAX_ARC,
    SP_PHASE_REF,
    SP_R,
    SP_RATIO,
    SP_T_REF,
    SS_ARC,
    SS_BREAKER,
    SS_E_ARC,
    SS_E_SOURCE,
    SS_E_SOURCE_R,
    SS_EMF,
    SS_FEEDER,
    SS_FEEDER_ARC,
    SS_IP,
    SS_LINE_TRIP,
    SS_PQ_I2,
    SS_PQ_IC,
    SS_PQ_IS,
    SS_PQ_P,
    SS_PQ_T,
    SS_PQ_U2,
    SS_PQ_UC,
    SS_PQ_US,
    SS_REVERSE_W,
    SS_U_SEC,
    SS_UP,
)
from .switchgear import clear_contactor_arc, cleared, contactors, feeding_breaker
from .windings import (
    book_winding,
    islanded_substep,
    open_primary,
    path_resistance,
    winding_sums,
)


@compiled
def supply_phase(sp: np.ndarray, t: float) -> float:
    """Phase of the fundamental at time t, rad: phi_ref + 2 pi f (t - t_ref)."""
    return sp[SP_PHASE_REF] + 2.0 * math.pi * sp[SP_FREQUENCY] * (t - sp[SP_T_REF])


@compiled
def supply_emf(sp: np.ndarray, harmonics: np.ndarray, ss: np.ndarray, t: float) -> float:
    """Source EMF at time t, V (behind the feeding breaker: it runs on while that is
    open)."""
    theta = supply_phase(sp, t)
    amplitude = sp[SP_AMPLITUDE] + sp[SP_DROOP] * ss[SS_REVERSE_W] * math.sqrt(2.0)
    e = math.sin(theta)
    for h in range(harmonics.shape[0]):
        if harmonics[h, 1] != 0.0:
            e += harmonics[h, 1] * math.sin(harmonics[h, 0] * theta + harmonics[h, 2])
    return amplitude * e


@compiled
def line_substep(t, h, sp, harmonics, ss, lp, li, lu, ls2, kp, ku, lst, i_link):
    """Advance supply, transformer, line converters and DC links by one sub-step.

    i_link[link, 0] holds the mean DC current the inverters drew from each link over
    this sub-step (A), computed with the link voltages at its start; column 1 receives
    the line converters' current here.
    """
    n_lc = lp.shape[0]
    if sp[SP_ACTIVE] < 0.5:
        return
    contactors(lp, lu, ls2, sp, ss, h)
    n = sp[SP_RATIO]
    was_fed = ss[SS_FEEDER] > 0.5
    feeding_breaker(sp, ss, h)
    e = supply_emf(sp, harmonics, ss, t + 0.5 * h)  # held over the step: its mean
    # the primary closed to the source; open, the windings stay coupled through the core
    # alone: their currents sum to zero (windings.islanded_substep)
    primary = ss[SS_FEEDER] > 0.5 and ss[SS_BREAKER] > 0.5
    if not primary:
        islanded_substep(h, sp, ss, lp, li, lu, ls2, lst, i_link)
        _primary_side(t, h, sp, harmonics, ss, lp, lu, ls2, kp, ku, lst, i_link, e, 0.0,
                      0.0, False)
        return
    # the secondary's voltage at the start of the step: the pantograph's, or the line's
    # own on a reclose (the dead section's pantograph read 0)
    u_sec_est = (ss[SS_UP] if was_fed else supply_emf(sp, harmonics, ss, t)) / n
    lc_src = (sp[SP_L] + 0.5 * h * sp[SP_R]) / (n * n)  # c of Sherman-Morrison
    lc_old = (sp[SP_L] - 0.5 * h * sp[SP_R]) / (n * n)
    sum_i = 0.0
    for k in range(n_lc):
        sum_i += ls2[k, LS2_I]
    # converter voltages held over the step, and the rows of the active windings
    s_b, s_1 = winding_sums(h, u_sec_est, lc_old * sum_i, e / n, False, lp, li, lu, ls2, lst)
    corr = lc_src * s_b / (1.0 + lc_src * s_1)
    sum_new = 0.0
    sum_step = 0.0  # the windings' currents at the end of the step before any arc cleared
    for k in range(n_lc):
        i_old = ls2[k, LS2_I]
        r = path_resistance(lp, ls2, k)
        if r < 0.0:
            ls2[k, LS2_I] = 0.0
            continue
        a_k = lp[k, LP_L] + 0.5 * h * r
        b_k = (lp[k, LP_L] - 0.5 * h * r) * i_old + lc_old * sum_i + h * (e / n - ls2[k, LS2_U])
        i_new = (b_k - corr) / a_k
        if lu[k, LU_ENABLE] < 0.5 and i_new * i_old < 0.0:
            i_new = 0.0  # a diode bridge does not reverse its current within a step
        if clear_contactor_arc(h, k, i_old, i_new, sp, ss, lp, lu, ls2):
            new_i_after = 0.0
        else:
            new_i_after = i_new
        ls2[k, LS2_I] = new_i_after
        sum_new += new_i_after
        sum_step += i_new
        book_winding(h, k, i_old, i_new, r, lp, li, lu, ls2, lst, i_link)
    _primary_side(t, h, sp, harmonics, ss, lp, lu, ls2, kp, ku, lst, i_link, e, sum_new,
                  sum_step, True)


@compiled_inline
def _primary_side(t, h, sp, harmonics, ss, lp, lu, ls2, kp, ku, lst, i_link, e, sum_new,
                  sum_step, primary):
    """The primary's current, the switches on it, the pantograph, the books and the power
    quality's integrals, then the DC links."""
    n = sp[SP_RATIO]
    # a contactor's arc that cleared took the source inductance's share
    ip_old = ss[SS_IP]
    if primary:
        ss[SS_E_ARC] += 0.5 * sp[SP_L] * (sum_step * sum_step - sum_new * sum_new) / (n * n)
        ip_new = sum_new / n
    else:
        ip_new = 0.0
    ss[SS_IP] = ip_new
    if (cleared(ss[SS_ARC], ip_old, ip_new, sp[SP_MAX_ARC], h)
            or cleared(ss[SS_FEEDER_ARC], ip_old, ip_new, sp[SP_MAX_ARC], h)):
        open_primary(sp, ss, lp, lu, ls2)
    elif (sp[SP_HW_LINE_ON] > 0.5 and ss[SS_ARC] < 0.0
          and abs(ip_new) > sp[SP_I_LINE_TRIP]):
        # the breaker's overcurrent release: opens from the next step (while the breaker
        # is already opening, the arc's current is its to clear, not a new trip)
        ss[SS_LINE_TRIP] = 1.0
    ip_avg = 0.5 * (ip_old + ip_new)
    di_dt = (ip_new - ip_old) / h
    up = e - sp[SP_R] * ip_avg - sp[SP_L] * di_dt  # mean over the step
    if primary:
        ss[SS_U_SEC] = up / n
    # the sample at the end instant: the EMF there, the current there
    e_end = supply_emf(sp, harmonics, ss, t + h)
    ss[SS_EMF] = e_end
    ss[SS_UP] = e_end - sp[SP_R] * ip_new - sp[SP_L] * di_dt
    if ss[SS_FEEDER] < 0.5:  # an isolated section: the pantograph reads 0 (the roof's
        up = 0.0  # voltage the windings' would give it, islanding, is not shown)
        ss[SS_UP] = 0.0
    ss[SS_E_SOURCE] += e * ip_avg * h
    ss[SS_E_SOURCE_R] += sp[SP_R] * ip_avg * ip_avg * h
    theta = supply_phase(sp, t + 0.5 * h)
    c = math.cos(theta)
    sn = math.sin(theta)
    ss[SS_PQ_T] += h
    ss[SS_PQ_P] += up * ip_avg * h
    ss[SS_PQ_U2] += up * up * h
    ss[SS_PQ_I2] += ip_avg * ip_avg * h
    ss[SS_PQ_UC] += up * c * h
    ss[SS_PQ_US] += up * sn * h
    ss[SS_PQ_IC] += ip_avg * c * h
    ss[SS_PQ_IS] += ip_avg * sn * h
    _links_substep(h, kp, ku, lst, i_link)


@compiled
def _links_substep(h, kp, ku, lst, i_link):
    """DC links: filter, chopper, discharge and the capacitor (symplectic Euler)."""
    for link in range(kp.shape[0]):
        if kp[link, KP_IDEAL] > 0.5:
            lst[link, LS_UDC] = kp[link, KP_U_IDEAL]
            continue
        u = lst[link, LS_UDC]
        i_f = 0.0
        if kp[link, KP_LF] > 0.0:
            # L_f di/dt = U - u_cf - R_f i; C_f du_cf/dt = i
            i_f = lst[link, LS_IF] + h * (u - lst[link, LS_UCF]
                                          - kp[link, KP_RF] * lst[link, LS_IF]) / kp[link, KP_LF]
            lst[link, LS_E_RF] += kp[link, KP_RF] * i_f * i_f * h
            lst[link, LS_IF] = i_f
            lst[link, LS_UCF] += h * i_f / kp[link, KP_CF]
        duty = min(max(ku[link, KU_CHOPPER], 0.0), 1.0)
        # the hardware chopper: fires fully above its threshold, lets go below the lower
        # one (hysteresis), whatever the firmware commands
        if kp[link, KP_HW_ENABLE] > 0.5:
            if u > kp[link, KP_HW_ON_V]:
                lst[link, LS_HW_CHOP] = 1.0
            elif u < kp[link, KP_HW_OFF_V]:
                lst[link, LS_HW_CHOP] = 0.0
        else:
            lst[link, LS_HW_CHOP] = 0.0
        if lst[link, LS_HW_CHOP] > 0.5:
            duty = 1.0
        i_ch = duty * u / kp[link, KP_R_CH] if kp[link, KP_R_CH] > 0.0 else 0.0
        i_dis = u / kp[link, KP_R_DIS] if kp[link, KP_R_DIS] > 0.0 else 0.0
        # C dU/dt = i_4QC - i_inverters - i_chopper - i_discharge - i_filter; the bridges'
        # freewheeling diodes keep the link from reversing (clamp at zero)
        u_new = u + h * (i_link[link, 1] - i_link[link, 0] - i_ch - i_dis - i_f) / kp[link, KP_C]
        u_new = max(u_new, 0.0)
        lst[link, LS_UDC] = u_new
        lst[link, LS_ICH] += i_ch * h
        e_ch = i_ch * u * h
        lst[link, LS_E_CH] += e_ch
        lst[link, LS_Q_CH] += e_ch
        lst[link, LS_E_DIS] += i_dis * u * h
        if u_new > kp[link, KP_U_OVP]:
            lst[link, LS_OVP] = 1.0
        elif u_new < 0.95 * kp[link, KP_U_OVP]:
            lst[link, LS_OVP] = 0.0


@compiled
def line_frame_start(ss, ls2, lst):
    """Reset the per-frame accumulators of the line side."""
    for col in range(SS_PQ_T, SS_PQ_IS + 1):
        ss[col] = 0.0
    for k in range(ls2.shape[0]):
        ls2[k, LS2_IDC] = 0.0
    for link in range(lst.shape[0]):
        lst[link, LS_I4Q] = 0.0
        lst[link, LS_ICH] = 0.0


@compiled
def line_frame_end(frame, sp, ss, ls2, kp, lst, ambient):
    """Frame means and the brake resistors' heat (the stepper sets the reverse power)."""
    for k in range(ls2.shape[0]):
        ls2[k, LS2_IDC] /= frame
    for link in range(lst.shape[0]):
        lst[link, LS_I4Q] /= frame
        lst[link, LS_ICH] /= frame
        # one-node resistor: C dT/dt = P - G (T - Ta), exact for the frame's mean power
        c = kp[link, KP_TH_C]
        g = kp[link, KP_TH_G]
        if c > 0.0 and g > 0.0:
            p = lst[link, LS_Q_CH] / frame
            decay = math.exp(-frame * g / c)
            t_inf = ambient + p / g
            lst[link, LS_T_RES] = t_inf + (lst[link, LS_T_RES] - t_inf) * decay
        lst[link, LS_Q_CH] = 0.0


#: EN 50163 / IEC 60850 supply voltages, rms V (REFERENCES.md, seen in IEC 60038 and a
#: secondary table); U_max3 deliberately absent.
SUPPLY_LEVELS: dict[float, dict[str, float]] = {
    25000.0: {"U_min2": 17500.0, "U_min1": 19000.0, "U_n": 25000.0, "U_max1": 27500.0,
              "U_max2": 29000.0},
    15000.0: {"U_min2": 11000.0, "U_min1": 12000.0, "U_n": 15000.0, "U_max1": 17250.0,
              "U_max2": 18000.0},
}
