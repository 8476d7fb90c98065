"""The reference controller's whole period, compiled: what tcu.py's ``ReferenceController``
does with its Python classes (PLL, switch-on sequence, encoders, speed plausibility,
adhesion, line-converter control, protections), with their state in arrays and the
motor controls' compiled steps (scalar_kernel.py, vector_kernel.py) called per inverter.

The Python classes stay the readable description, the configuration and the reference:
``ReferenceController.step`` is the plain-Python path, and tests/controller/
test_compiled_controller.py runs the two side by side and compares their commands bit
for bit. Each function here names the class method it mirrors; the reasons behind each
rule are given there, not repeated.

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
import numpy as np

from . import scalar_kernel as sk
from . import vector_kernel as vk

compiled = nb.njit(cache=True, error_model="numpy")

TWO_PI = 2 * math.pi
SQRT2 = math.sqrt(2)

# the train's state, and the PLL's (tcu.ReferenceController, pll.SogiPll,
# sequence.SwitchOnSequence, adhesion.AdhesionControl)
(G_T, G_EVENT, G_EFFORT, G_SPEED_INTEGRAL, G_LINE_LIVE_S, G_LINE_RMS_F, G_ACHIEVED,
 G_AVAILABLE, G_RECENT_I, G_PLL_W, G_PLL_THETA, G_PLL_VA, G_PLL_VB, G_PLL_AMPLITUDE,
 G_PLL_INTEGRAL, G_SEQ_STATE, G_SEQ_TIMER, G_SEQ_RETRIES, G_SEQ_REASON, G_ADH_V_REF,
 G_ADH_HAS_V_REF, G_ADH_ENABLED, N_G) = range(23)
# the constants
(K_PERIOD, K_LINE_SIDE, K_VECTOR, K_LINE_NOMINAL, K_U_MIN2, K_U_MIN1, K_U_MAX1, K_U_MAX2,
 K_TRANSFORMER_RATIO, K_LINK_NOMINAL, K_P_CHOP, K_MASS, K_MAX_SPEED, K_WHEEL_R, K_GEAR,
 K_N_MOTORS, K_T_MAX, K_P_MAX, K_NATURAL_MPS, K_GEAR_EFFICIENCY, K_FEEDFORWARD_EFFICIENCY,
 K_DRIVE_EFFICIENCY, K_FLUX_RAMP_S, K_LOCK_S, K_ROTATING_FACTOR, K_RESET_S, K_TRIPS_TO_ISOLATE,
 K_TRIP_WINDOW_S, K_MAGNETISED_MPS, K_FLUX_HOLD_S, K_PLL_K, K_PLL_W_NOM, K_PLL_KP, K_PLL_KI,
 K_PLL_MIN_AMPLITUDE, K_SEQ_CHARGED_V, K_SEQ_TIMEOUT_S, K_SEQ_RETRY_S, K_SEQ_MAX_RETRIES,
 K_ADH_CREEP_LIMIT, K_ADH_A_MAX, K_ADH_A_MARGIN, K_ADH_CUT, K_ADH_REAPPLY, K_RAD_PER_COUNT,
 K_WINDOW, K_SHORT, K_SENSOR_JUMP, K_LEAKAGE_H, K_RAMP_V_PER_S, K_DEADBEAT_GAIN, K_NOTCH_B0,
 K_NOTCH_B1, K_NOTCH_B2, K_NOTCH_A1, K_NOTCH_A2, N_K) = range(57)
# per motor: encoder, plausibility, creep; its count window from M_WINDOW on
(M_LAST, M_HAS_LAST, M_ANGLE, M_DIFFERENCES, M_SPEED_RAW, M_HAS_RAW, M_SPEED, M_SPEED_SHORT,
 M_RING_POS, M_OK, M_JUDGED_RAW, M_HAS_JUDGED, M_CREEP, M_INVERTER, M_WINDOW) = range(15)
# per inverter
(I_ENABLED_FOR, I_BLOCK_UNTIL, I_LATCHED, I_DEMANDED_AT, I_RELEASED, I_N_TRIPS, I_TRIP_0,
 I_TRIP_1, I_TRIP_2, I_FALLBACK_ANGLE, I_FACTOR, I_LINK, I_N_MOTORS, I_FIRST_MOTOR,
 N_I) = range(15)
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
LINK_OVERVOLTAGE, LINK_UNDERVOLTAGE, OVERSPEED = 20, 21, 30
MOTOR_TEMPERATURE_DERATING, MOTOR_OVERTEMPERATURE, LINK_WATCHDOG = 40, 41, 50
LINE_UNDERVOLTAGE, LINE_OVERCURRENT, WHEEL_SLIP, SPEED_SENSOR_FAULT = 60, 61, 70, 80
N_EVENT_CODES = 128
TRIP_SLOTS = 3  # hardware trips kept per inverter (I_TRIP_0..2): enough to isolate at 3
HARDWARE_TRIP_BIT = 8
# sequence states (sequence.py)
OFF, BREAKER, PRECHARGE, LINE, RUNNING, TRIPPED, NEUTRAL = range(7)


@compiled
def raise_event(g, counts, code):
    """ReferenceController._raise (counts[0] counts them all: code 0 is no event)."""
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


# --- encoder.EncoderSpeed.update ----------------------------------------------------------
@compiled
def encoder_update(row, k, count):
    """One motor's counter value: angle, speeds (windowed, short, raw)."""
    modulus = 65536
    c = int(count) % modulus
    if row[M_HAS_LAST] == 0.0:
        row[M_LAST], row[M_HAS_LAST] = c, 1.0
        return
    delta = (c - int(row[M_LAST]) + modulus // 2) % modulus - modulus // 2
    row[M_LAST] = c
    rpc, T = k[K_RAD_PER_COUNT], k[K_PERIOD]
    window, short = int(k[K_WINDOW]), int(k[K_SHORT])
    row[M_ANGLE] += delta * rpc
    row[M_DIFFERENCES] += 1.0
    pos = int(row[M_RING_POS])
    if row[M_HAS_RAW] == 0.0:  # the first difference stands for the whole window
        for j in range(window):
            row[M_WINDOW + j] = delta
    else:
        row[M_WINDOW + pos] = delta
        pos = (pos + 1) % window
        row[M_RING_POS] = pos
    row[M_SPEED_RAW], row[M_HAS_RAW] = delta * rpc / T, 1.0
    total = 0.0
    for j in range(window):
        total += row[M_WINDOW + j]
    row[M_SPEED] = total * rpc / (window * T)
    recent = 0.0
    for j in range(short):  # the newest ``short`` differences
        recent += row[M_WINDOW + (pos - 1 - j) % window]
    row[M_SPEED_SHORT] = recent * rpc / (short * T)


# --- speed_plausibility.SpeedPlausibility ------------------------------------------------
@compiled
def judge(mot, k):
    """SpeedPlausibility.judge: True if an encoder failed now."""
    failed = False
    for m in range(mot.shape[0]):
        r = mot[m]
        if (r[M_OK] > 0.0 and r[M_HAS_JUDGED] > 0.0 and r[M_HAS_RAW] > 0.0
                and abs(r[M_SPEED_RAW] - r[M_JUDGED_RAW]) > k[K_SENSOR_JUMP]):
            r[M_OK] = 0.0
            failed = True
        r[M_JUDGED_RAW], r[M_HAS_JUDGED] = r[M_SPEED_RAW], r[M_HAS_RAW]
    return failed


@compiled
def fill(mot, column, out):
    """SpeedPlausibility.fill: the readings of ``column``, the failed ones replaced by
    their inverter's healthy ones, or the train's."""
    n = mot.shape[0]
    all_ok = True
    healthy_sum, n_healthy = 0.0, 0
    for m in range(n):
        out[m] = mot[m, column]
        if mot[m, M_OK] > 0.0:
            healthy_sum += mot[m, column]
            n_healthy += 1
        else:
            all_ok = False
    if all_ok:
        return
    for m in range(n):
        if mot[m, M_OK] > 0.0:
            continue
        own_sum, n_own = 0.0, 0
        for a in range(n):
            if mot[a, M_INVERTER] == mot[m, M_INVERTER] and mot[a, M_OK] > 0.0:
                own_sum += mot[a, column]
                n_own += 1
        if n_own:
            out[m] = own_sum / n_own
        elif n_healthy:
            out[m] = healthy_sum / n_healthy


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


@compiled
def vector_reset(v):
    """VectorControl.reset."""
    v[:] = 0.0
    v[vk.V_PREV_TURN_RE] = 1.0


# --- tcu.ReferenceController.step ---------------------------------------------------------
@compiled
def period(y, flags, period_s, out, g, k, counts, recent, mot, inv, lnk, u_applied,
           sc_state, sc_consts, circuit, vc_state, vc_consts, curve_i, curve_psi,
           x, xi, xm, xl, xc):
    """One control period: measurements y (SI, map order) in, commands out."""
    g[G_T] += period_s
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
        live = 0.7 * peak < amplitude < 1.3 * peak and recent.max() > 0.5 * peak
        g[G_LINE_LIVE_S] = g[G_LINE_LIVE_S] + period_s if live else 0.0
        breaker, precharge, line_contactor = sequence_step(
            g, k, y[x[X_BREAKER]] > 0.5, pre, line, u_link_min, neutral,
            g[G_LINE_LIVE_S] >= k[K_LOCK_S])
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
    speeds = np.empty(n_mot)
    fill(mot, M_SPEED, speeds)
    quick = np.empty(n_mot)
    fill(mot, M_SPEED_SHORT, quick)
    k_wheel = r / gear
    wheel_mps = np.empty(n_mot)
    total = 0.0
    for m in range(n_mot):
        wheel_mps[m] = quick[m] * k_wheel
        total += wheel_mps[m]
    v = total / n_mot
    f_max = k[K_N_MOTORS] * motor_torque_limit(k, abs(v)) * gear * k[K_GEAR_EFFICIENCY] / r
    g[G_AVAILABLE] = f_max if running else 0.0
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
    p_links = np.zeros(n_links)
    achieved = 0.0
    u_min_run = 0.6 * k[K_LINK_NOMINAL]
    line_live = not line_side or g[G_LINE_LIVE_S] >= k[K_LOCK_S]
    p_lo = np.zeros(n_links)
    p_hi = np.zeros(n_links)
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
        if max(abs(ia), abs(ib), abs(ic)) > 1200.0:
            raise_event(g, counts, INVERTER_OVERCURRENT)
            row[I_BLOCK_UNTIL] = max(row[I_BLOCK_UNTIL], t + 0.1)
        tripped = int(y[xi[kk, XI_GATE_FAULT]]) & HARDWARE_TRIP_BIT
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
        out[xi[kk, XI_RESET_OUT]] = (
            1.0 if tripped != 0 and row[I_BLOCK_UNTIL] - t < 3.5 * period_s else 0.0)
        if row[I_FACTOR] < 0.95:
            g[G_EVENT] = WHEEL_SLIP
        demanded = mode == 1 or mode == 2 or mode == 4
        if running and demanded and u_d <= u_min_run:
            raise_event(g, counts, LINK_UNDERVOLTAGE)
        if demanded:
            row[I_DEMANDED_AT] = t
            row[I_RELEASED] = 0.0
        held = (row[I_RELEASED] == 0.0 and abs(v) > k[K_MAGNETISED_MPS]
                and t - row[I_DEMANDED_AT] < k[K_FLUX_HOLD_S])
        active = (running and (demanded or held) and t >= row[I_BLOCK_UNTIL]
                  and u_d > u_min_run
                  and (effort != 0.0 or mode == 2 or abs(v) > k[K_MAGNETISED_MPS]))
        torque = direction * torque_motor * row[I_FACTOR]
        motor_speed = 0.0
        for a in range(first, first + n_m):
            motor_speed += speeds[a]
        motor_speed = motor_speed / n_m
        angle_sum, n_healthy = 0.0, 0
        for a in range(first, first + n_m):
            if mot[a, M_OK] > 0.0:
                angle_sum += mot[a, M_ANGLE]
                n_healthy += 1
        if n_healthy:
            angle = angle_sum / n_healthy
        else:
            row[I_FALLBACK_ANGLE] = row[I_FALLBACK_ANGLE] + motor_speed * period_s
            angle = row[I_FALLBACK_ANGLE]
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
        if active:
            row[I_ENABLED_FOR] += period_s
            if k[K_VECTOR] > 0.0:
                d = vk.vector_step(vc_state[kk], vc_consts[kk], curve_i, curve_psi, torque,
                                   angle, motor_speed, u_d, ia, ib, ic)
                ramp = 1.0
                estimate = vc_state[kk, vk.V_TORQUE_ESTIMATE]
                limit = vc_state[kk, vk.V_TORQUE_LIMIT]
            else:
                estimate = sk.estimated_torque(sc_state[kk], sc_consts[kk], circuit,
                                               curve_i, curve_psi, ia, ib, ic)
                d, _ = sk.torque_step(sc_state[kk], sc_consts[kk], circuit, curve_i,
                                      curve_psi, torque, motor_speed, u_d, ia, ib, ic, True,
                                      angle, True)
                ramp = min(row[I_ENABLED_FOR] / k[K_FLUX_RAMP_S], 1.0)
                limit = sc_state[kk, sk.S_TORQUE_LIMIT]
            out[xi[kk, XI_DUTY_A]] = 0.5 + ramp * (d[0] - 0.5)
            out[xi[kk, XI_DUTY_B]] = 0.5 + ramp * (d[1] - 0.5)
            out[xi[kk, XI_DUTY_C]] = 0.5 + ramp * (d[2] - 0.5)
            given = math.copysign(min(abs(torque), limit), torque)
            p_links[link] += given * motor_speed * n_m
            achieved += estimate * n_m
        else:
            row[I_ENABLED_FOR] = 0.0
            row[I_RELEASED] = 0.0 if demanded else 1.0
            if k[K_VECTOR] > 0.0:
                vector_reset(vc_state[kk])
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
                                    p_lo[i], p_hi[i])
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
