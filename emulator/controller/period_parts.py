"""The compiled reference controller's parts and the layout of its state: what the
classes tcu.py composes do (pll.SogiPll, sequence.SwitchOnSequence,
adhesion.AdhesionControl, line_converter's LinkControl and functions, effort's
functions), as numba functions on arrays; the encoders' and their plausibility's are in
period_sensing.py. period_kernel.period composes them into the whole period. Each
function names the method it mirrors; the reasons behind each rule are given there, not
repeated.

Layout (filled by compiled_tcu.CompiledController):
- ``g``: the train-level state (G_*), the PLL's, the sequence's and the adhesion's;
- ``k``: the constants (K_*);
- ``mot``: one row per motor (M_*: encoder, plausibility, creep), the encoder's window
  from M_WINDOW on;
- ``inv``: one row per inverter (I_*: blocks, trips, adhesion factor);
- ``lnk``: one row per DC link (L_*: voltage control, notch, limits);
- ``u_applied``: the converter voltage acting this period, per line converter;
- the index tables (X_*): where each value sits in the measurement and command lists.
"""

from __future__ import annotations

import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

from . import effort, pll, ride_through

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)

TWO_PI = 2 * math.pi
SQRT2 = math.sqrt(2)

# the train's state, and the PLL's (tcu.ReferenceController, pll.SogiPll,
# sequence.SwitchOnSequence, adhesion.AdhesionControl)
(G_T, G_EVENT, G_EFFORT, G_SPEED_INTEGRAL, G_LINE_LIVE_S, G_LINE_RMS_F, G_ACHIEVED,
 G_AVAILABLE, G_RECENT_I, G_PLL_W, G_PLL_THETA, G_PLL_VA, G_PLL_VB, G_PLL_AMPLITUDE,
 G_PLL_INTEGRAL, G_SEQ_STATE, G_SEQ_TIMER, G_SEQ_RETRIES, G_SEQ_REASON, G_ADH_V_REF,
 G_ADH_HAS_V_REF, G_ADH_ENABLED, G_TRIP_NOW, G_DEAD_SAMPLES, G_BRAKE_LET_GO, G_ROLLED_BACK,
 N_G) = range(27)
# the constants
(K_PERIOD, K_LINE_SIDE, K_VECTOR, K_LINE_NOMINAL, K_U_MIN2, K_U_MIN1, K_U_MAX1, K_U_MAX2,
 K_TRANSFORMER_RATIO, K_LINK_NOMINAL, K_P_CHOP, K_MASS, K_MAX_SPEED, K_WHEEL_R, K_GEAR,
 K_N_MOTORS, K_T_MAX, K_P_MAX, K_NATURAL_MPS, K_GEAR_EFFICIENCY, K_FEEDFORWARD_EFFICIENCY,
 K_DRIVE_EFFICIENCY, K_FLUX_RAMP_S, K_LOCK_S, K_ROTATING_FACTOR, K_RESET_S, K_TRIPS_TO_ISOLATE,
 K_TRIP_WINDOW_S, K_MAGNETISED_MPS, K_FLUX_HOLD_S, K_PLL_K, K_PLL_W_NOM, K_PLL_KP, K_PLL_KI,
 K_PLL_MIN_AMPLITUDE, K_SEQ_CHARGED_V, K_SEQ_TIMEOUT_S, K_SEQ_RETRY_S, K_SEQ_MAX_RETRIES,
 K_ADH_CREEP_LIMIT, K_ADH_A_MAX, K_ADH_A_MARGIN, K_ADH_CUT, K_ADH_REAPPLY, K_RAD_PER_COUNT,
 K_WINDOW, K_SHORT, K_SENSOR_JUMP, K_LEAKAGE_H, K_RAMP_V_PER_S, K_DEADBEAT_GAIN, K_NOTCH_B0,
 K_NOTCH_B1, K_NOTCH_B2, K_NOTCH_A1, K_NOTCH_A2, K_LINK_STOP, K_LINK_RESTART, K_FLUX_DECAY_S,
 K_BUFFER_LINK, K_BUFFER_POWER, K_BUFFER_NONE_MPS, K_BUFFER_FULL_MPS, K_BUFFER_TORQUE,
 K_STOPPED_FLOOR, K_STOPPED_PERIODS, K_BRAKE_FADE_FROM, K_BRAKE_FADE_TO, K_BRAKE_RESUME,
 K_ROLL_BACK, N_K) = range(71)
# per motor: encoder, plausibility, creep; its count window from M_WINDOW on
(M_LAST, M_HAS_LAST, M_ANGLE, M_DIFFERENCES, M_SPEED_RAW, M_HAS_RAW, M_SPEED, M_SPEED_SHORT,
 M_RING_POS, M_OK, M_JUDGED_RAW, M_HAS_JUDGED, M_CREEP, M_INVERTER, M_STOPPED,
 M_STOPPED_NET, M_WINDOW) = range(17)
# per inverter
(I_ENABLED_FOR, I_BLOCK_UNTIL, I_LATCHED, I_DEMANDED_AT, I_RELEASED, I_N_TRIPS, I_TRIP_0,
 I_TRIP_1, I_TRIP_2, I_FALLBACK_ANGLE, I_FACTOR, I_LINK, I_N_MOTORS, I_FIRST_MOTOR,
 I_UNDERVOLTED, I_RESTART_AFTER, I_ANGLE_USED, I_ANGLE_SHIFT, I_ANGLE_SOURCE,
 N_I) = range(20)
# per DC link
(L_INTEGRAL, L_POWER_REF, L_U_RAMP, L_HAS_RAMP, L_HAS_APPLIED, L_HAS_NOTCH, L_X1, L_X2,
 L_Y1, L_Y2, L_KP, L_KI, L_I_MAX, L_N, L_P_RATED, L_ON_LINK, N_L) = range(17)
# where the train-level values sit (index in the measurements, or the commands: *_OUT)
(X_MODE, X_DEMAND, X_DIRECTION, X_NEUTRAL, X_REGEN, X_CRUISE, X_LINE_V, X_BREAKER,
 X_LINE_TRIP, X_BREAKER_OUT, X_ACHIEVED_OUT, X_AVAILABLE_OUT, X_STATUS_OUT, X_EVENT_OUT,
 N_X) = range(15)
# per inverter: phase currents, gate fault; duties, gates, reset
(XI_IA, XI_IB, XI_IC, XI_GATE_FAULT, XI_DUTY_A, XI_DUTY_B, XI_DUTY_C, XI_GATES_OUT,
 XI_RESET_OUT, N_XI) = range(10)
# per motor: encoder count and stator temperature
XM_COUNT, XM_TEMPERATURE, N_XM = range(3)
# per link: voltage, overvoltage flag; chopper
XL_VOLTAGE, XL_OVERVOLTAGE, XL_CHOPPER_OUT, N_XL = range(4)
# per line converter: its link, current, contactors' feedback; modulation, gates, contactors
(XC_LINK, XC_CURRENT, XC_PRECHARGE, XC_LINE, XC_MOD_OUT, XC_GATES_OUT, XC_PRECHARGE_OUT,
 XC_LINE_OUT, N_XC) = range(9)

# event codes (emulator.protocol.events; the kernel cannot import a dict)
SEQUENCE_TIMEOUT, INVERTER_OVERCURRENT, HARDWARE_TRIP = 1, 10, 11
LINK_OVERVOLTAGE, LINK_UNDERVOLTAGE, OVERSPEED, ROLL_BACK = 20, 21, 30, 31
MOTOR_TEMPERATURE_DERATING, MOTOR_OVERTEMPERATURE, LINK_WATCHDOG = 40, 41, 50
LINE_UNDERVOLTAGE, LINE_OVERCURRENT, WHEEL_SLIP, SPEED_SENSOR_FAULT = 60, 61, 70, 80
N_EVENT_CODES = 128
TRIP_SLOTS = 3  # hardware trips kept per inverter (I_TRIP_0..2): enough to isolate at 3
HARDWARE_TRIP_BIT = 8
# sequence states (sequence.py)
OFF, BREAKER, PRECHARGE, LINE, RUNNING, TRIPPED, NEUTRAL = range(7)


@compiled
def largest(a):
    """a.max() (NaN if any is), without numba's runtime, which its array.max() wants."""
    m = a[0]
    for i in range(1, a.shape[0]):
        if a[i] > m or a[i] != a[i]:
            m = a[i]
    return m


@compiled
def is_trip(code):
    """Whether an event code is a protective trip (emulator.protocol.events.TRIPS)."""
    return code in (SEQUENCE_TIMEOUT, INVERTER_OVERCURRENT, HARDWARE_TRIP, LINK_OVERVOLTAGE,
                    OVERSPEED, MOTOR_OVERTEMPERATURE, LINE_OVERCURRENT)


@compiled
def raise_event(g, counts, code):
    """ReferenceController._raise (counts[0] counts them all: code 0 is no event); a trip
    raised in this period (G_TRIP_NOW) is not overwritten by an event that is not one."""
    if is_trip(code):
        g[G_EVENT] = code
        g[G_TRIP_NOW] = 1.0
    elif g[G_TRIP_NOW] == 0.0:
        g[G_EVENT] = code
    counts[code] += 1
    counts[0] += 1


# --- pll.SogiPll.update -----------------------------------------------------------------
@compiled
def pll_update(g, k, v):
    """One sample of the SOGI-PLL; returns theta for the sample's instant."""
    w, T, ks = g[G_PLL_W], k[K_PERIOD], k[K_PLL_K]
    a = math.tan(w * T / 2)
    va0, vb0 = g[G_PLL_VA], g[G_PLL_VB]
    rhs1 = va0 + a * (ks * (v - va0) - vb0) + a * ks * v
    rhs2 = vb0 + a * va0
    det = (1 + a * ks) + a * a
    va = (rhs1 - a * rhs2) / det
    vb = (rhs2 * (1 + a * ks) + a * rhs1) / det
    g[G_PLL_VA], g[G_PLL_VB] = va, vb
    s, c = math.sin(g[G_PLL_THETA]), math.cos(g[G_PLL_THETA])
    v_q = va * c + vb * s
    magnitude = max(math.sqrt(va * va + vb * vb), 1e-9)
    err = v_q / magnitude
    g[G_PLL_AMPLITUDE] = magnitude * math.cos(w * T / 2)
    w_nom = k[K_PLL_W_NOM]
    lo, hi = 0.5 * w_nom, 1.5 * w_nom
    if g[G_PLL_AMPLITUDE] >= k[K_PLL_MIN_AMPLITUDE]:
        g[G_PLL_INTEGRAL] = min(max(g[G_PLL_INTEGRAL] + k[K_PLL_KI] * err * T, lo), hi)
        g[G_PLL_W] = min(max(g[G_PLL_INTEGRAL] + k[K_PLL_KP] * err, lo), hi)
    else:
        g[G_PLL_INTEGRAL] = w_nom
        g[G_PLL_W] = w_nom
    theta_now = g[G_PLL_THETA] - w * T / 2
    g[G_PLL_THETA] = (g[G_PLL_THETA] + g[G_PLL_W] * T) % TWO_PI
    return theta_now % TWO_PI


# --- pll.dead_samples: the plain function itself, compiled (pure arithmetic on numbers)
dead_samples = compiled(pll.dead_samples)
# --- ride_through.flux_wait_s: the plain function itself, compiled
flux_wait_s = compiled(ride_through.flux_wait_s)
# --- effort.brake_fade: the plain function itself, compiled
brake_fade = compiled(effort.brake_fade)
roll_back = compiled(effort.roll_back)  # (the same, for the roll-back)


# --- inverter_guard.InverterGuards.judge, .ready_share and .link ------------------------
@compiled
def guard_judge(g, counts, row, k, t, ia, ib, ic, gate_fault):
    """InverterGuards.judge on inverter row ``row``; returns its drivers' trip bit."""
    if max(abs(ia), abs(ib), abs(ic)) > 1200.0:
        raise_event(g, counts, INVERTER_OVERCURRENT)
        row[I_BLOCK_UNTIL] = max(row[I_BLOCK_UNTIL], t + 0.1)
    tripped = int(gate_fault) & HARDWARE_TRIP_BIT
    if tripped and row[I_LATCHED] == 0.0:
        raise_event(g, counts, HARDWARE_TRIP)
        kept = 0  # the trips within the window, then this one (the last three kept)
        for j in range(int(row[I_N_TRIPS])):
            if t - row[I_TRIP_0 + j] < k[K_TRIP_WINDOW_S]:
                row[I_TRIP_0 + kept] = row[I_TRIP_0 + j]
                kept += 1
        if kept == TRIP_SLOTS:
            row[I_TRIP_0], row[I_TRIP_1] = row[I_TRIP_1], row[I_TRIP_2]
            kept = TRIP_SLOTS - 1
        row[I_TRIP_0 + kept] = t
        row[I_N_TRIPS] = kept + 1
        if kept + 1 >= k[K_TRIPS_TO_ISOLATE]:
            row[I_BLOCK_UNTIL] = math.inf
        else:
            row[I_BLOCK_UNTIL] = max(row[I_BLOCK_UNTIL], t + k[K_RESET_S])
    row[I_LATCHED] = 1.0 if tripped else 0.0
    return tripped


@compiled
def guard_ready_share(inv, t):
    """InverterGuards.ready_share over the inverter rows."""
    ready, total = 0.0, 0.0
    for kk in range(inv.shape[0]):
        total += inv[kk, I_N_MOTORS]
        if t >= inv[kk, I_BLOCK_UNTIL]:
            ready += inv[kk, I_N_MOTORS]
    return ready / total


@compiled
def guard_link(g, counts, row, k, t, u_d, asked, u_stop, u_restart):
    """InverterGuards.link's stop on a low link while effort is asked for, and the restart
    once the link and the rotor flux allow (the caller tests u_d > u_stop itself)."""
    if asked and u_d <= u_stop:
        raise_event(g, counts, LINK_UNDERVOLTAGE)
        if row[I_UNDERVOLTED] == 0.0:
            row[I_UNDERVOLTED] = 1.0
            row[I_RESTART_AFTER] = t + k[K_FLUX_DECAY_S]
    elif (row[I_UNDERVOLTED] != 0.0 and u_d > u_restart
          and t >= row[I_RESTART_AFTER]):
        row[I_UNDERVOLTED] = 0.0


# --- sequence.SwitchOnSequence ----------------------------------------------------------
@compiled
def sequence_trip(g, code):
    """SwitchOnSequence.trip."""
    if g[G_SEQ_STATE] != TRIPPED:
        g[G_SEQ_STATE], g[G_SEQ_TIMER], g[G_SEQ_REASON] = TRIPPED, 0.0, code
        g[G_SEQ_RETRIES] += 1.0


@compiled
def sequence_step(g, k, breaker_closed, precharge_closed, line_closed, link_min_v,
                  neutral_ahead, line_locked):
    """SwitchOnSequence.step (enabled): returns (breaker, precharge, line contactor)."""
    g[G_SEQ_TIMER] += k[K_PERIOD]
    s = int(g[G_SEQ_STATE])
    closing = s in (BREAKER, PRECHARGE, LINE)
    if neutral_ahead and (closing or s == RUNNING):
        g[G_SEQ_STATE], g[G_SEQ_TIMER] = NEUTRAL, 0.0
    elif (s == NEUTRAL and not neutral_ahead) or (
            s == TRIPPED and g[G_SEQ_TIMER] >= k[K_SEQ_RETRY_S]
            and g[G_SEQ_RETRIES] <= k[K_SEQ_MAX_RETRIES]):
        g[G_SEQ_STATE], g[G_SEQ_TIMER] = OFF, 0.0
    elif s == OFF:
        g[G_SEQ_STATE], g[G_SEQ_TIMER] = BREAKER, 0.0
    elif s == BREAKER and breaker_closed:
        g[G_SEQ_STATE] = LINE if link_min_v >= k[K_SEQ_CHARGED_V] else PRECHARGE
        g[G_SEQ_TIMER] = 0.0
    elif s == PRECHARGE and link_min_v >= k[K_SEQ_CHARGED_V] and precharge_closed:
        g[G_SEQ_STATE], g[G_SEQ_TIMER] = LINE, 0.0
    elif s == LINE and line_closed and g[G_SEQ_TIMER] >= 0.05 and line_locked:
        g[G_SEQ_STATE], g[G_SEQ_TIMER] = RUNNING, 0.0
        g[G_SEQ_RETRIES] = 0.0
    elif closing and g[G_SEQ_TIMER] > k[K_SEQ_TIMEOUT_S]:
        sequence_trip(g, SEQUENCE_TIMEOUT)
    s = int(g[G_SEQ_STATE])
    return (s in (BREAKER, PRECHARGE, LINE, RUNNING),
            s == PRECHARGE or (s == LINE and not line_closed),
            s in (LINE, RUNNING))


# --- adhesion.AdhesionControl.step --------------------------------------------------------
@compiled
def adhesion_step(g, k, mot, inv, wheel_mps, braking, plausible_mps2):
    """Torque factors per inverter (I_FACTOR) from the axles' creep."""
    n = wheel_mps.shape[0]
    v_axles = wheel_mps[0]
    for m in range(1, n):
        v_axles = max(v_axles, wheel_mps[m]) if braking else min(v_axles, wheel_mps[m])
    if g[G_ADH_HAS_V_REF] == 0.0:
        g[G_ADH_V_REF], g[G_ADH_HAS_V_REF] = v_axles, 1.0
    dv = (abs(plausible_mps2) + k[K_ADH_A_MARGIN]) * k[K_PERIOD]
    g[G_ADH_V_REF] = min(max(v_axles, g[G_ADH_V_REF] - dv), g[G_ADH_V_REF] + dv)
    for m in range(n):
        mot[m, M_CREEP] = wheel_mps[m] - g[G_ADH_V_REF]
    if g[G_ADH_ENABLED] == 0.0:
        inv[:, I_FACTOR] = 1.0
        return
    for i in range(inv.shape[0]):
        worst = 0.0
        for m in range(n):
            if int(mot[m, M_INVERTER]) == i:
                worst = max(worst, -mot[m, M_CREEP] if braking else mot[m, M_CREEP])
        if worst > k[K_ADH_CREEP_LIMIT]:
            inv[i, I_FACTOR] = max(inv[i, I_FACTOR] - k[K_ADH_CUT] * k[K_PERIOD], 0.0)
        else:
            inv[i, I_FACTOR] = min(inv[i, I_FACTOR] + k[K_ADH_REAPPLY] * k[K_PERIOD], 1.0)


# --- effort.py and line_converter.py's functions -----------------------------------------
@compiled
def motor_torque_limit(k, v_mps):
    """effort.motor_torque_limit."""
    kk = k[K_GEAR] / k[K_WHEEL_R]
    w_motor = max(v_mps * kk, 1e-3)
    w_natural = k[K_NATURAL_MPS] * kk
    if w_motor > w_natural:
        return min(k[K_T_MAX], k[K_P_MAX] * w_natural / (w_motor * w_motor))
    return min(k[K_T_MAX], k[K_P_MAX] / w_motor)


@compiled
def gear_efficiency(k, rail_force):
    """effort.gear_efficiency."""
    return k[K_GEAR_EFFICIENCY] if rail_force >= 0 else 1.0 / k[K_GEAR_EFFICIENCY]


@compiled
def link_power(k, p_shaft):
    """effort.link_power."""
    if p_shaft >= 0.0:
        return p_shaft / k[K_FEEDFORWARD_EFFICIENCY]
    return p_shaft * k[K_FEEDFORWARD_EFFICIENCY]


@compiled
def power_limits(k, line_rms_v, regeneration_allowed, p_rated_w):
    """line_converter.power_limits."""
    span_low = max(k[K_U_MIN1] - k[K_U_MIN2], 1.0)
    traction = min(max((line_rms_v - k[K_U_MIN2]) / span_low, 0.0), 1.0)
    span_high = max(k[K_U_MAX2] - k[K_U_MAX1], 1.0)
    regen = min(max((k[K_U_MAX2] - line_rms_v) / span_high, 0.0), 1.0)
    if not regeneration_allowed:
        regen = 0.0
    return -regen * p_rated_w, traction * p_rated_w


@compiled
def chopper_duty(nominal_v, u_d):
    """line_converter.chopper_duty."""
    return min(max((u_d - nominal_v - 100.0) / 150.0, 0.0), 1.0)


@compiled
def notch(lk, k, x):
    """line_converter.Notch.__call__."""
    if lk[L_HAS_NOTCH] == 0.0:
        lk[L_X1] = lk[L_X2] = lk[L_Y1] = lk[L_Y2] = x
        lk[L_HAS_NOTCH] = 1.0
    y = (k[K_NOTCH_B0] * x + k[K_NOTCH_B1] * lk[L_X1] + k[K_NOTCH_B2] * lk[L_X2]
         - k[K_NOTCH_A1] * lk[L_Y1] - k[K_NOTCH_A2] * lk[L_Y2])
    lk[L_X2], lk[L_X1], lk[L_Y2], lk[L_Y1] = lk[L_X1], x, lk[L_Y1], y
    return y


@compiled
def link_reset(lk):
    """LinkControl.reset."""
    lk[L_INTEGRAL] = 0.0
    lk[L_HAS_APPLIED] = 0.0
    lk[L_HAS_RAMP] = 0.0


@compiled
def link_step(lk, k, link, xc, y, out, u_applied, u_d, theta, omega, u_sec_peak,
              p_feedforward, p_min, p_max):
    """LinkControl.step: the modulations of the link's converters (into out) and the
    chopper's duty."""
    T, L = k[K_PERIOD], k[K_LEAKAGE_H]
    u_f = notch(lk, k, u_d)
    if lk[L_HAS_RAMP] == 0.0:
        lk[L_U_RAMP], lk[L_HAS_RAMP] = u_f, 1.0
    lk[L_U_RAMP] = min(lk[L_U_RAMP] + k[K_RAMP_V_PER_S] * T, k[K_LINK_NOMINAL])
    err = lk[L_U_RAMP] - u_f
    p = p_feedforward + lk[L_KP] * err + lk[L_INTEGRAL]
    if p_min < p < p_max:
        lk[L_INTEGRAL] += lk[L_KI] * err * T
    p = min(max(p, p_min), p_max)
    lk[L_POWER_REF] = p
    i_peak = 2 * p / (lk[L_N] * max(u_sec_peak, 1.0))
    i_peak = min(max(i_peak, -lk[L_I_MAX]), lk[L_I_MAX])
    u_sec_now = u_sec_peak * math.sin(theta + 0.5 * omega * T)
    u_sec_next = u_sec_peak * math.sin(theta + 1.5 * omega * T)
    fresh = lk[L_HAS_APPLIED] == 0.0
    lk[L_HAS_APPLIED] = 1.0
    for j in range(xc.shape[0]):
        if xc[j, XC_LINK] != link:
            continue
        if fresh:
            u_applied[j] = u_sec_now
        i_pred = y[xc[j, XC_CURRENT]] + T / L * (u_sec_now - u_applied[j])
        i_ref = i_peak * math.sin(theta + 2.0 * omega * T)
        u = u_sec_next - k[K_DEADBEAT_GAIN] * L * (i_ref - i_pred) / T
        m = min(max(u / max(u_d, 1.0), -1.0), 1.0)
        u_applied[j] = m * u_d
        out[xc[j, XC_MOD_OUT]] = m
    return chopper_duty(k[K_LINK_NOMINAL], u_d)

