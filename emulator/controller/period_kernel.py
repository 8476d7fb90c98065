"""The reference controller's whole period, compiled: what tcu.py's ``ReferenceController``
does with its Python classes (PLL, switch-on sequence, encoders, speed plausibility,
adhesion, line-converter control, protections), composed of period_parts.py's functions
on the state arrays laid out there, with the motor controls' compiled steps
(scalar_kernel.py, vector_kernel.py) called per inverter.

The Python classes stay the readable description, the configuration and the reference:
``ReferenceController.step`` is the plain-Python path, and the tests
(tests/controller/test_compiled_controller*.py, the scenario library's twins) run the two
side by side and compare their commands bit for bit.
"""

from __future__ import annotations

import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

from . import scalar_kernel as sk
from . import vector_kernel as vk
from .period_parts import (
    G_ACHIEVED,
    G_ADH_HAS_V_REF,
    G_AVAILABLE,
    G_BRAKE_LET_GO,
    G_DEAD_SAMPLES,
    G_EFFORT,
    G_EVENT,
    G_LINE_LIVE_S,
    G_LINE_RMS_F,
    G_PLL_AMPLITUDE,
    G_PLL_W,
    G_RECENT_I,
    G_ROLLED_BACK,
    G_SEQ_STATE,
    G_SPEED_INTEGRAL,
    G_T,
    G_TRIP_NOW,
    I_BLOCK_UNTIL,
    I_DEMANDED_AT,
    I_ENABLED_FOR,
    I_FACTOR,
    I_FIRST_MOTOR,
    I_LINK,
    I_N_MOTORS,
    I_RELEASED,
    I_UNDERVOLTED,
    K_BRAKE_FADE_FROM,
    K_BRAKE_FADE_TO,
    K_BRAKE_RESUME,
    K_BUFFER_FULL_MPS,
    K_BUFFER_LINK,
    K_BUFFER_NONE_MPS,
    K_BUFFER_POWER,
    K_BUFFER_TORQUE,
    K_DRIVE_EFFICIENCY,
    K_FEEDFORWARD_EFFICIENCY,
    K_FLUX_DECAY_S,
    K_FLUX_HOLD_S,
    K_FLUX_RAMP_S,
    K_GEAR,
    K_GEAR_EFFICIENCY,
    K_LINE_NOMINAL,
    K_LINE_SIDE,
    K_LINK_NOMINAL,
    K_LINK_RESTART,
    K_LINK_STOP,
    K_LOCK_S,
    K_MAGNETISED_MPS,
    K_MASS,
    K_MAX_SPEED,
    K_N_MOTORS,
    K_P_CHOP,
    K_ROLL_BACK,
    K_ROTATING_FACTOR,
    K_TRANSFORMER_RATIO,
    K_U_MIN2,
    K_VECTOR,
    K_WHEEL_R,
    K_WINDOW,
    L_ON_LINK,
    L_P_RATED,
    LINE_OVERCURRENT,
    LINE_UNDERVOLTAGE,
    LINK_OVERVOLTAGE,
    LINK_WATCHDOG,
    M_DIFFERENCES,
    M_SPEED,
    M_SPEED_SHORT,
    MOTOR_OVERTEMPERATURE,
    MOTOR_TEMPERATURE_DERATING,
    OVERSPEED,
    ROLL_BACK,
    RUNNING,
    SEQUENCE_TIMEOUT,
    SPEED_SENSOR_FAULT,
    SQRT2,
    TRIPPED,
    WHEEL_SLIP,
    X_ACHIEVED_OUT,
    X_AVAILABLE_OUT,
    X_BREAKER,
    X_BREAKER_OUT,
    X_CRUISE,
    X_DEMAND,
    X_DIRECTION,
    X_EVENT_OUT,
    X_LINE_TRIP,
    X_LINE_V,
    X_MODE,
    X_NEUTRAL,
    X_REGEN,
    X_STATUS_OUT,
    XC_GATES_OUT,
    XC_LINE,
    XC_LINE_OUT,
    XC_LINK,
    XC_MOD_OUT,
    XC_PRECHARGE,
    XC_PRECHARGE_OUT,
    XI_DUTY_A,
    XI_DUTY_B,
    XI_DUTY_C,
    XI_GATE_FAULT,
    XI_GATES_OUT,
    XI_IA,
    XI_IB,
    XI_IC,
    XI_RESET_OUT,
    XL_CHOPPER_OUT,
    XL_OVERVOLTAGE,
    XL_VOLTAGE,
    XM_COUNT,
    XM_TEMPERATURE,
    adhesion_step,
    brake_fade,
    chopper_duty,
    dead_samples,
    flux_wait_s,
    gear_efficiency,
    guard_judge,
    guard_link,
    guard_ready_share,
    largest,
    link_power,
    link_reset,
    link_step,
    motor_torque_limit,
    pll_update,
    power_limits,
    raise_event,
    roll_back,
    sequence_step,
    sequence_trip,
)
from .period_sensing import encoder_update, fill, judge, judge_stopped, rotor_angle
from .pll import DEAD_SAMPLES

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)


# --- tcu.ReferenceController.step ---------------------------------------------------------
@compiled
def period(y, flags, period_s, out, g, k, counts, recent, mot, inv, lnk, u_applied,
           sc_state, sc_consts, circuit, vc_state, vc_consts, curve_i, curve_psi,
           x, xi, xm, xl, xc, per_motor, per_link):
    """One control period: measurements y (SI, map order) in, commands out.
    per_motor (3 x motors) and per_link (3 x links): the period's scratch rows (it
    allocates nothing: compiled without numba's runtime)."""
    g[G_T] += period_s
    g[G_TRIP_NOW] = 0.0
    t = g[G_T]
    if flags & 1:
        raise_event(g, counts, LINK_WATCHDOG)
    n_links, n_inv, n_mot = xl.shape[0], xi.shape[0], xm.shape[0]
    u_link_min = y[xl[0, XL_VOLTAGE]]
    for i in range(1, n_links):
        u_link_min = min(u_link_min, y[xl[i, XL_VOLTAGE]])
    mode = round(y[x[X_MODE]])
    demand = y[x[X_DEMAND]]
    direction = y[x[X_DIRECTION]]
    if direction == 0.0:
        direction = 1.0
    neutral = y[x[X_NEUTRAL]] > 0.5
    regen_ok = y[x[X_REGEN]] > 0.5
    cruise_mps = y[x[X_CRUISE]] / 3.6
    line_side = k[K_LINE_SIDE] > 0.0

    # --- line side: PLL, protections, sequence
    line_rms = k[K_LINE_NOMINAL]
    regen_rms = line_rms
    theta = 0.0
    if line_side:
        theta = pll_update(g, k, y[x[X_LINE_V]])
        g[G_LINE_RMS_F] += (g[G_PLL_AMPLITUDE] / SQRT2 - g[G_LINE_RMS_F]) * min(
            period_s / 0.2, 1.0)
        line_rms = g[G_LINE_RMS_F]
        regen_rms = max(g[G_LINE_RMS_F], g[G_PLL_AMPLITUDE] / SQRT2)
        for i in range(n_links):
            if y[xl[i, XL_OVERVOLTAGE]] > 0.5:
                raise_event(g, counts, LINK_OVERVOLTAGE)
                sequence_trip(g, LINK_OVERVOLTAGE)
                break
        if y[x[X_LINE_TRIP]] > 0.5:
            raise_event(g, counts, LINE_OVERCURRENT)
            sequence_trip(g, LINE_OVERCURRENT)
        pre = True
        line = True
        for j in range(xc.shape[0]):
            pre = pre and y[xc[j, XC_PRECHARGE]] > 0.5
            line = line and y[xc[j, XC_LINE]] > 0.5
        peak = k[K_LINE_NOMINAL] * SQRT2
        ri = int(g[G_RECENT_I])
        recent[ri] = abs(y[x[X_LINE_V]])
        g[G_RECENT_I] = (ri + 1) % recent.shape[0]
        amplitude = g[G_PLL_AMPLITUDE]
        g[G_DEAD_SAMPLES] = dead_samples(y[x[X_LINE_V]], theta, amplitude, largest(recent),
                                         peak, k[K_U_MIN2] * SQRT2, g[G_DEAD_SAMPLES])
        live = g[G_DEAD_SAMPLES] < DEAD_SAMPLES
        g[G_LINE_LIVE_S] = g[G_LINE_LIVE_S] + period_s if live else 0.0
        was_tripped = g[G_SEQ_STATE] == TRIPPED
        breaker, precharge, line_contactor = sequence_step(
            g, k, y[x[X_BREAKER]] > 0.5, pre, line, u_link_min, neutral,
            g[G_LINE_LIVE_S] >= k[K_LOCK_S])
        if g[G_SEQ_STATE] == TRIPPED and not was_tripped:  # its own timeout
            raise_event(g, counts, SEQUENCE_TIMEOUT)
        running = g[G_SEQ_STATE] == RUNNING
        out[x[X_BREAKER_OUT]] = 1.0 if breaker else 0.0
        for j in range(xc.shape[0]):
            out[xc[j, XC_PRECHARGE_OUT]] = 1.0 if precharge else 0.0
            out[xc[j, XC_LINE_OUT]] = 1.0 if line_contactor else 0.0
    else:
        running = True

    # --- train speed, effort demand, limits
    r, gear = k[K_WHEEL_R], k[K_GEAR]
    for m in range(n_mot):
        encoder_update(mot[m], k, y[xm[m, XM_COUNT]])
    if judge(mot, k):
        raise_event(g, counts, SPEED_SENSOR_FAULT)
    if judge_stopped(mot, k, g[G_EFFORT] > 0.0):
        raise_event(g, counts, SPEED_SENSOR_FAULT)
    speeds = per_motor[0]
    fill(mot, M_SPEED, speeds)
    quick = per_motor[1]
    fill(mot, M_SPEED_SHORT, quick)
    k_wheel = r / gear
    wheel_mps = per_motor[2]
    total = 0.0
    for m in range(n_mot):
        wheel_mps[m] = quick[m] * k_wheel
        total += wheel_mps[m]
    v = total / n_mot
    g[G_ROLLED_BACK], rolled = roll_back(g[G_ROLLED_BACK], direction, v, period_s,
                                         k[K_ROLL_BACK])
    if rolled:
        raise_event(g, counts, ROLL_BACK)
    f_max = k[K_N_MOTORS] * motor_torque_limit(k, abs(v)) * gear * k[K_GEAR_EFFICIENCY] / r
    g[G_AVAILABLE] = f_max * guard_ready_share(inv, t) if running else 0.0  # (tcu.py)
    if mode == 1:
        target = max(demand, 0.0) * f_max
    elif mode == 2:
        err = cruise_mps - abs(v)
        kp = k[K_MASS] * 0.5
        g[G_SPEED_INTEGRAL] = min(max(g[G_SPEED_INTEGRAL] + kp * 0.1 * err * period_s,
                                      -f_max), f_max)
        target = min(max(kp * err + g[G_SPEED_INTEGRAL], -f_max), f_max)
    elif mode == 4:
        target = -abs(demand) * f_max
    else:
        target = 0.0
        g[G_SPEED_INTEGRAL] = 0.0
    if abs(v) > 1.05 * k[K_MAX_SPEED] and target > 0:
        raise_event(g, counts, OVERSPEED)
        target = 0.0
    hottest = y[xm[0, XM_TEMPERATURE]]
    for m in range(1, n_mot):
        hottest = max(hottest, y[xm[m, XM_TEMPERATURE]])
    derate = min(max((180.0 - hottest) / 20.0, 0.0), 1.0)
    if derate < 1.0:
        raise_event(g, counts, MOTOR_TEMPERATURE_DERATING if derate > 0
                    else MOTOR_OVERTEMPERATURE)
    target *= derate
    if not running or (line_side and neutral):
        target = 0.0
    jerk = f_max / 1.5 * period_s
    g[G_EFFORT] += min(max(target - g[G_EFFORT], -jerk), jerk)
    effort = g[G_EFFORT]
    braking = effort < 0

    # --- adhesion and motor control per inverter
    settled = True
    for m in range(n_mot):
        settled = settled and mot[m, M_DIFFERENCES] >= k[K_WINDOW]
    if settled:
        plausible = effort / (k[K_MASS] * k[K_ROTATING_FACTOR])
        if effort == 0.0:
            g[G_ADH_HAS_V_REF] = 0.0
        adhesion_step(g, k, mot, inv, wheel_mps, braking, plausible)
    torque_motor = effort * r / (gear * gear_efficiency(k, effort) * k[K_N_MOTORS])
    if effort < 0.0:  # (tcu.py: the electric brake fades out towards standstill)
        share, let_go = brake_fade(abs(v), direction * v >= 0.0, g[G_BRAKE_LET_GO] > 0.5,
                                   k[K_BRAKE_FADE_FROM], k[K_BRAKE_FADE_TO], k[K_BRAKE_RESUME])
        torque_motor *= share
        g[G_BRAKE_LET_GO] = 1.0 if let_go else 0.0
    else:
        g[G_BRAKE_LET_GO] = 0.0
    per_link[:] = 0.0  # (np.zeros before)
    p_links = per_link[0]
    achieved = 0.0
    u_stop = k[K_LINK_STOP] * k[K_LINK_NOMINAL]
    u_restart = k[K_LINK_RESTART] * k[K_LINK_NOMINAL]
    line_live = not line_side or g[G_LINE_LIVE_S] >= k[K_LOCK_S]
    p_lo = per_link[1]
    p_hi = per_link[2]
    for i in range(n_links):
        if line_live:
            p_lo[i] = power_limits(k, regen_rms, regen_ok, lnk[i, L_P_RATED])[0]
            p_hi[i] = power_limits(k, line_rms, regen_ok, lnk[i, L_P_RATED])[1]
    for kk in range(n_inv):
        row = inv[kk]
        link = int(row[I_LINK])
        n_m = int(row[I_N_MOTORS])
        first = int(row[I_FIRST_MOTOR])
        u_d = y[xl[link, XL_VOLTAGE]]
        ia, ib, ic = y[xi[kk, XI_IA]], y[xi[kk, XI_IB]], y[xi[kk, XI_IC]]
        tripped = guard_judge(g, counts, row, k, t, ia, ib, ic, y[xi[kk, XI_GATE_FAULT]])
        out[xi[kk, XI_RESET_OUT]] = (
            1.0 if tripped != 0 and row[I_BLOCK_UNTIL] - t < 3.5 * period_s else 0.0)
        if row[I_FACTOR] < 0.95 and g[G_TRIP_NOW] == 0.0:
            g[G_EVENT] = WHEEL_SLIP
        demanded = mode == 1 or mode == 2 or mode == 4
        guard_link(g, counts, row, k, t, u_d, running and demanded, u_stop, u_restart)
        if demanded:
            row[I_DEMANDED_AT] = t
            row[I_RELEASED] = 0.0
        held = (row[I_RELEASED] == 0.0 and (abs(v) > k[K_MAGNETISED_MPS] or effort != 0.0)
                and t - row[I_DEMANDED_AT] < k[K_FLUX_HOLD_S])  # (ramps out: tcu.py)
        active = (running and (demanded or held) and t >= row[I_BLOCK_UNTIL]
                  and u_d > u_stop and row[I_UNDERVOLTED] == 0.0 and g[G_BRAKE_LET_GO] == 0.0
                  and (effort != 0.0 or mode == 2 or abs(v) > k[K_MAGNETISED_MPS]))
        torque = direction * torque_motor * row[I_FACTOR]
        motor_speed = 0.0
        stator_degc = 0.0
        for a in range(first, first + n_m):
            motor_speed += speeds[a]
            stator_degc += y[xm[a, XM_TEMPERATURE]]
        motor_speed = motor_speed / n_m
        stator_degc = stator_degc / n_m
        angle = rotor_angle(row, mot, first, n_m, motor_speed, period_s)
        if line_side and torque * motor_speed > 0:  # motoring
            sag = min(max((u_d - 0.75 * k[K_LINK_NOMINAL])
                          / (0.15 * k[K_LINK_NOMINAL]), 0.0), 1.0)
            p_draw = p_hi[link] * k[K_DRIVE_EFFICIENCY] / lnk[link, L_ON_LINK]
            t_power = p_draw / max(abs(motor_speed) * n_m, 1.0)
            torque = math.copysign(min(abs(torque), t_power) * sag, torque)
        elif line_side and torque * motor_speed < 0:  # generating
            p_feed = ((k[K_P_CHOP] - 0.5 * p_lo[link]) / k[K_FEEDFORWARD_EFFICIENCY]
                      / lnk[link, L_ON_LINK])
            t_power = p_feed / max(abs(motor_speed) * n_m, 1.0)
            torque = math.copysign(min(abs(torque), t_power), torque)
        if (line_side and running and not line_live and abs(v) > k[K_BUFFER_NONE_MPS]
                and abs(motor_speed) > 1.0):
            short = k[K_BUFFER_LINK] * k[K_LINK_NOMINAL] - u_d
            fade = min((abs(v) - k[K_BUFFER_NONE_MPS])
                       / (k[K_BUFFER_FULL_MPS] - k[K_BUFFER_NONE_MPS]), 1.0)
            p_buffer = (min(max(short / (0.1 * k[K_LINK_NOMINAL]), 0.0), 1.0) * fade
                        * k[K_BUFFER_POWER] * lnk[link, L_P_RATED])
            t_buffer = row[I_FACTOR] * min(
                p_buffer / (lnk[link, L_ON_LINK] * n_m * abs(motor_speed)),
                k[K_BUFFER_TORQUE])
            if motor_speed > 0:
                torque = min(torque, -t_buffer)
            else:
                torque = max(torque, t_buffer)
        if active:
            row[I_ENABLED_FOR] += period_s
            if k[K_VECTOR] > 0.0:
                d = vk.vector_step(vc_state[kk], vc_consts[kk], curve_i, curve_psi, torque,
                                   angle, motor_speed, u_d, ia, ib, ic)
                ramp = 1.0
                estimate = vc_state[kk, vk.V_TORQUE_ESTIMATE]
                limit = vc_state[kk, vk.V_TORQUE_LIMIT]
            else:
                sk.stator_temperature(sc_state[kk], sc_consts[kk], circuit, stator_degc)
                estimate = sk.estimated_torque(sc_state[kk], sc_consts[kk], circuit,
                                               curve_i, curve_psi, ia, ib, ic)
                d, _ = sk.torque_step(sc_state[kk], sc_consts[kk], circuit, curve_i,
                                      curve_psi, torque, motor_speed, u_d, ia, ib, ic, True,
                                      angle, True)
                ramp = min(row[I_ENABLED_FOR] / k[K_FLUX_RAMP_S], 1.0)
                if ramp < 1.0 or row[I_FACTOR] < 1.0:  # (ScalarControl.period)
                    sc_state[kk, sk.S_H1_T] = 0.0
                limit = sc_state[kk, sk.S_TORQUE_LIMIT]
            out[xi[kk, XI_DUTY_A]] = 0.5 + ramp * (d[0] - 0.5)
            out[xi[kk, XI_DUTY_B]] = 0.5 + ramp * (d[1] - 0.5)
            out[xi[kk, XI_DUTY_C]] = 0.5 + ramp * (d[2] - 0.5)
            given = math.copysign(min(abs(torque), limit), torque) * (ramp * ramp)  # (tcu.py)
            p_links[link] += given * motor_speed * n_m
            achieved += estimate * n_m
        else:
            if (k[K_VECTOR] <= 0.0 and row[I_ENABLED_FOR] > 0.0
                    and abs(v) > k[K_MAGNETISED_MPS]):  # (InverterGuards.stopped_at_speed)
                share = min(row[I_ENABLED_FOR] / k[K_FLUX_RAMP_S], 1.0)
                row[I_BLOCK_UNTIL] = max(row[I_BLOCK_UNTIL],
                                         t + flux_wait_s(k[K_FLUX_DECAY_S], share))
            row[I_ENABLED_FOR] = 0.0
            row[I_RELEASED] = 0.0 if demanded else 1.0
            if k[K_VECTOR] > 0.0:  # (VectorControl.coast)
                vk.coast(vc_state[kk], vc_consts[kk], curve_i, curve_psi)
            out[xi[kk, XI_DUTY_A]] = 0.5
            out[xi[kk, XI_DUTY_B]] = 0.5
            out[xi[kk, XI_DUTY_C]] = 0.5
        out[xi[kk, XI_GATES_OUT]] = 1.0 if active else 0.0
    g[G_ACHIEVED] = (achieved * gear * gear_efficiency(k, achieved * direction) / r
                     * direction)

    # --- line converters
    if line_side:
        amplitude = g[G_PLL_AMPLITUDE]
        if amplitude / SQRT2 < k[K_U_MIN2] and not neutral and running:
            raise_event(g, counts, LINE_UNDERVOLTAGE)
        u_sec_peak = amplitude / k[K_TRANSFORMER_RATIO]
        enabled = running and line_live
        for i in range(n_links):
            u_d = y[xl[i, XL_VOLTAGE]]
            if enabled:
                chopper = link_step(lnk[i], k, i, xc, y, out, u_applied, u_d, theta,
                                    g[G_PLL_W], u_sec_peak, link_power(k, p_links[i]),
                                    p_lo[i], max(p_hi[i], k[K_BUFFER_POWER]
                                                 * lnk[i, L_P_RATED] * line_rms
                                                 / k[K_LINE_NOMINAL]))
            else:
                link_reset(lnk[i])
                for j in range(xc.shape[0]):
                    if xc[j, XC_LINK] == i:
                        out[xc[j, XC_MOD_OUT]] = 0.0
                chopper = chopper_duty(k[K_LINK_NOMINAL], u_d)
            for j in range(xc.shape[0]):
                if xc[j, XC_LINK] == i:
                    out[xc[j, XC_GATES_OUT]] = 1.0 if enabled else 0.0
            out[xl[i, XL_CHOPPER_OUT]] = chopper
    out[x[X_ACHIEVED_OUT]] = g[G_ACHIEVED] / 1e3
    out[x[X_AVAILABLE_OUT]] = g[G_AVAILABLE] / 1e3
    out[x[X_STATUS_OUT]] = g[G_SEQ_STATE]
    out[x[X_EVENT_OUT]] = g[G_EVENT]
