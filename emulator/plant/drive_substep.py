"""One inverter's sub-step with its motors, in two halves around the pass over all the
machines (machine_columns.held_voltage_step) that kernel.advance_frame runs between them:
the bridge voltage before it, and after it the motors the pass does not step (a sine
source's) or corrects (an open phase), the core loss, the energies, the shafts, the phase
currents with the gate drivers' trip, and the DC side.
"""

from __future__ import annotations

import cmath
import math

from .columns import (
    B_PS_RE,
    C_E_CU_R,
    C_E_CU_S,
    C_E_IN,
    C_INT_RE,
    C_IR_RE,
    C_IS_RE,
    C_PR_RE,
    C_PS_RE,
    C_T1,
    C_U_RE,
    IW_DR_A,
    IW_DR_B,
    IW_DR_C,
    IW_P_SW,
    IW_S_A,
    IW_S_B,
    IW_S_C,
    IW_U1_RE,
    W,
    get_c,
    put_c,
)
from .inverter import (
    RIPPLE_BOUND,
    blocked_bridge,
    clarke_vec,
    leg_average,
    phase_currents,
    ripple_peaks,
)
from .jit import compiled_inline
from .layout import (
    II_FIRST_MOTOR,
    II_LINK,
    II_MOTOR_COUNT,
    II_SOURCE,
    IP_FSW,
    IP_HW_ON,
    IP_I_TRIP,
    IP_L_RIPPLE,
    IP_VF0,
    IS_E_COND,
    IS_E_DC,
    IS_E_SW,
    IS_HW_TRIP,
    IS_IA,
    IS_IB,
    IS_IC,
    IS_IDC,
    IS_Q,
    IS_U_ALPHA,
    IS_U_BETA,
    IU_DA,
    IU_DB,
    IU_DC,
    IU_ENABLE,
    IU_SINE_AMP,
    IU_SINE_FREQ,
    IU_SINE_PHASE,
    LS_UDC,
    MP_G_CORE,
    MP_POLE_PAIRS,
    MS_CSR,
    MS_CSS,
    MS_E_CU_R,
    MS_E_CU_S,
    MS_E_IRON,
    MS_E_TERMINAL,
    MS_Q_ROTOR,
    MS_Q_STATOR,
    MS_RR,
    MS_RS,
    MS_TORQUE,
    MU_OPEN_PHASE,
    MX_CG,
    MX_PHI11,
    MX_PHI12,
    MX_PHI21,
    MX_PHI22,
    SOURCE_SINE,
)
from .machine import (
    abs2,
    currents_frozen,
    open_phase_flux,
    scaled,
    step_flux_sine,
    torque,
)
from .machine_columns import keep_start
from .shaft import shaft_step


@compiled_inline
def gates_blocked(k, iint, iu, ist):
    """Whether inverter k's gates are off this sub-step: commanded off, or latched by the
    gate drivers' hardware trip (a sine source has no gates). The trip is set only at a
    sub-step's end (inverter_substep), so both halves of the sub-step see the same."""
    return iint[k, II_SOURCE] != SOURCE_SINE and (iu[k, IU_ENABLE] < 0.5
                                                  or ist[k, IS_HW_TRIP] > 0.5)


@compiled_inline
def bridge_voltage(k, t, h, mpar, mu, ms, mx, ipar, iint, iu, ist, lst, c, any_held):
    """Inverter k's stator voltage for the sub-step, from the phase currents at its start:
    into C_U_* for each of its motors, and for the inverter (IW_*) with its legs'
    switching functions, drops and switching power. Keeps aside the start of each motor
    the scalar path steps (a sine source's, an open phase's)."""
    first = iint[k, II_FIRST_MOTOR]
    last = first + iint[k, II_MOTOR_COUNT]
    udc = lst[iint[k, II_LINK], LS_UDC]
    source = iint[k, II_SOURCE]
    i_tot = 0j
    g0 = 0j
    g1 = 0j
    blocked = gates_blocked(k, iint, iu, ist)
    u_prev = complex(ist[k, IS_U_ALPHA], ist[k, IS_U_BETA])
    for m in range(first, last):
        i_tot += get_c(c, C_IS_RE, m)
        if not blocked:
            i_tot += scaled(mpar[m, MP_G_CORE], u_prev)  # the core-loss branch's current
        else:
            ps = get_c(c, C_PS_RE, m)
            pr = get_c(c, C_PR_RE, m)
            # end-of-step current with zero voltage, and its sensitivity to the voltage
            ps_h = mx[m, MX_PHI11] * ps + mx[m, MX_PHI12] * pr
            pr_h = mx[m, MX_PHI21] * ps + mx[m, MX_PHI22] * pr
            g0 += scaled(ms[m, MS_CSS], ps_h) - scaled(ms[m, MS_CSR], pr_h)
            g1 += mx[m, MX_CG]
    p_sw = 0.0
    s_a = s_b = s_c = 0.5
    dr_a = dr_b = dr_c = 0.0
    u1 = 0j  # a sine source's voltage at the end of the sub-step
    if source == SOURCE_SINE:
        amp = iu[k, IU_SINE_AMP]
        om_s = 2.0 * math.pi * iu[k, IU_SINE_FREQ]
        th0 = om_s * t + iu[k, IU_SINE_PHASE]
        u = scaled(amp, cmath.exp(complex(0.0, th0)))
        u1 = scaled(amp, cmath.exp(complex(0.0, th0 + om_s * h)))
    elif blocked:
        u_target = -g0 / g1 if g1 != 0j else 0j
        u, s_a, s_b, s_c, dr_a, dr_b, dr_c = blocked_bridge(u_target, udc, ipar[k, IP_VF0])
    else:
        ia, ib, ic = phase_currents(i_tot)
        va, s_a, dr_a, pa = leg_average(ipar, k, iu[k, IU_DA], ia, udc)
        vb, s_b, dr_b, pb = leg_average(ipar, k, iu[k, IU_DB], ib, udc)
        vc, s_c, dr_c, pc = leg_average(ipar, k, iu[k, IU_DC], ic, udc)
        u = clarke_vec(va, vb, vc)
        p_sw = pa + pb + pc
    ist[k, IS_U_ALPHA] = u.real
    ist[k, IS_U_BETA] = u.imag
    if source == SOURCE_SINE:
        put_c(c, IW_U1_RE, k, u1)
        if any_held:
            for m in range(first, last):
                keep_start(c, m)
    else:
        c[IW_S_A * W + k] = s_a
        c[IW_S_B * W + k] = s_b
        c[IW_S_C * W + k] = s_c
        c[IW_DR_A * W + k] = dr_a
        c[IW_DR_B * W + k] = dr_b
        c[IW_DR_C * W + k] = dr_c
        c[IW_P_SW * W + k] = p_sw
        for m in range(first, last):
            put_c(c, C_U_RE, m, u)
            if mu[m, MU_OPEN_PHASE] > 0.0:
                keep_start(c, m)


@compiled_inline
def inverter_substep(k, h, mpar, mint, mu, ms, mx, ipar, iint, iu, ist, lst, v, a_train,
                      i_link, c, any_held):
    """The rest of inverter k's sub-step after every motor's held-voltage step
    (machine_columns.held_voltage_step): the motors of a sine source and with an open
    phase, the core losses, the energies, the shafts, the phase currents and the DC side;
    returns the creep force on the train."""
    first = iint[k, II_FIRST_MOTOR]
    last = first + iint[k, II_MOTOR_COUNT]
    udc = lst[iint[k, II_LINK], LS_UDC]
    source = iint[k, II_SOURCE]
    blocked = gates_blocked(k, iint, iu, ist)
    u = complex(ist[k, IS_U_ALPHA], ist[k, IS_U_BETA])
    u1 = get_c(c, IW_U1_RE, k) if source == SOURCE_SINE else 0j
    force_sum = 0.0
    int_i = 0j
    i_end = 0j
    for m in range(first, last):
        pp = mpar[m, MP_POLE_PAIRS]
        open_phase = int(mu[m, MU_OPEN_PHASE])
        if source == SOURCE_SINE or open_phase > 0:
            start = B_PS_RE if any_held else C_PS_RE  # (kept aside if the pass ran)
            ps0 = get_c(c, start, m)
            pr0 = get_c(c, start + 2, m)
            is0 = get_c(c, start + 4, m)
            ir0 = get_c(c, start + 6, m)
            if source == SOURCE_SINE:
                ps1, pr1 = step_flux_sine(mx, m, u, u1, ps0, pr0)
                is1, ir1 = currents_frozen(ms, m, ps1, pr1)
                # source energy by the trapezoid rule (the source is not held)
                e_in = 0.75 * h * ((u * is0.conjugate()).real + (u1 * is1.conjugate()).real)
            else:
                ps1 = get_c(c, C_PS_RE, m)  # the held-voltage step's end
                pr1 = get_c(c, C_PR_RE, m)
                int_i += get_c(c, C_INT_RE, m)
                e_in = c[C_E_IN * W + m]
            if open_phase > 0:
                ps1 = open_phase_flux(ms, m, ps1, pr1, open_phase - 1)
                is1, ir1 = currents_frozen(ms, m, ps1, pr1)
            put_c(c, C_PS_RE, m, ps1)
            put_c(c, C_PR_RE, m, pr1)
            put_c(c, C_IS_RE, m, is1)
            put_c(c, C_IR_RE, m, ir1)
            e_cu_s = 0.75 * h * ms[m, MS_RS] * (abs2(is0) + abs2(is1))
            e_cu_r = 0.75 * h * ms[m, MS_RR] * (abs2(ir0) + abs2(ir1))
            t1 = torque(ps1, is1, pp)
        else:
            is1 = get_c(c, C_IS_RE, m)
            int_i += get_c(c, C_INT_RE, m)
            e_in = c[C_E_IN * W + m]
            e_cu_s = c[C_E_CU_S * W + m]
            e_cu_r = c[C_E_CU_R * W + m]
            t1 = c[C_T1 * W + m]
        i_end += is1
        # iron loss: a core-loss resistance across the terminals carries u / R_c (held u;
        # a sine source's amplitude is constant); none while the gates are blocked
        g_core = mpar[m, MP_G_CORE]
        if g_core > 0.0 and not blocked:
            if source == SOURCE_SINE:
                i_end += scaled(g_core, u1)
                e_core = 1.5 * g_core * iu[k, IU_SINE_AMP] ** 2 * h
            else:
                i_end += scaled(g_core, u)
                int_i += scaled(h, scaled(g_core, u))
                e_core = 1.5 * g_core * abs2(u) * h
            e_in += e_core
            ms[m, MS_E_IRON] += e_core
            ms[m, MS_Q_STATOR] += e_core
        ms[m, MS_E_TERMINAL] += e_in
        # copper losses 3/2 R |i|^2, trapezoid rule
        ms[m, MS_E_CU_S] += e_cu_s
        ms[m, MS_E_CU_R] += e_cu_r
        ms[m, MS_Q_STATOR] += e_cu_s
        ms[m, MS_Q_ROTOR] += e_cu_r
        t0 = ms[m, MS_TORQUE]  # end of the last sub-step (set again at each refresh)
        ms[m, MS_TORQUE] = t1
        force_sum += shaft_step(mpar, mint, mu, ms, c, m, 0.5 * (t0 + t1), v, a_train, h)

    ia, ib, ic = phase_currents(i_end)
    ist[k, IS_IA] = ia
    ist[k, IS_IB] = ib
    ist[k, IS_IC] = ic
    # the gate drivers' hardware trip, an overcurrent comparator on the phase currents
    # (a desaturation detector acts alike on a shorted leg): a current past the threshold
    # at a sub-step's end blocks the gates from the next sub-step and latches until the
    # controller resets it. Real comparators act within microseconds; here the block
    # comes up to a sub-step later, an overshoot of about di/dt h (100-150 A on the Tern
    # at 125 us), and the comparator also sees diode currents with the gates blocked.
    # It sees the instantaneous current: the average plus the PWM ripple's peak at the
    # sub-step's duties (inverter.ripple_peaks), worked out only where the ripple's
    # bound (inverter.RIPPLE_BOUND: U_dc / (12 f_sw L) at most) could reach the threshold
    if ipar[k, IP_HW_ON] > 0.5 and source != SOURCE_SINE:
        trip_a = ipar[k, IP_I_TRIP]
        largest = max(abs(ia), abs(ib), abs(ic))
        if not blocked and largest + RIPPLE_BOUND * udc / (
                ipar[k, IP_FSW] * ipar[k, IP_L_RIPPLE]) > trip_a:
            ra, rb, rc = ripple_peaks(c[IW_S_A * W + k], c[IW_S_B * W + k], c[IW_S_C * W + k],
                                      udc, ipar[k, IP_L_RIPPLE], ipar[k, IP_FSW])
            largest = max(abs(ia) + ra, abs(ib) + rb, abs(ic) + rc)
        if largest > trip_a:
            ist[k, IS_HW_TRIP] = 1.0
    if source != SOURCE_SINE:
        p_sw = c[IW_P_SW * W + k]
        ja, jb, jc = phase_currents(int_i)  # integrals of the phase currents, A s
        q_dc = (c[IW_S_A * W + k] * ja + c[IW_S_B * W + k] * jb + c[IW_S_C * W + k] * jc
                + (p_sw * h / udc if udc > 0.0 else 0.0))
        e_cond = c[IW_DR_A * W + k] * ja + c[IW_DR_B * W + k] * jb + c[IW_DR_C * W + k] * jc
        ist[k, IS_E_DC] += udc * q_dc
        ist[k, IS_IDC] += q_dc  # charge; divided by the frame length at the end
        i_link[iint[k, II_LINK], 0] += q_dc / h
        ist[k, IS_E_COND] += e_cond
        ist[k, IS_E_SW] += p_sw * h
        ist[k, IS_Q] += e_cond + p_sw * h
    return force_sum
