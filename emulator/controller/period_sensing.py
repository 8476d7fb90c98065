"""The compiled reference controller's speed sensing: what encoder.EncoderSpeed and
speed_plausibility.SpeedPlausibility do, on the motor and inverter rows of
period_parts' layout (M_*, I_*). Split from period_parts.py; the reasons behind each
rule are given in the methods each function names."""

from __future__ import annotations

from .period_parts import (
    I_ANGLE_SHIFT,
    I_ANGLE_SOURCE,
    I_ANGLE_USED,
    I_FALLBACK_ANGLE,
    K_PERIOD,
    K_RAD_PER_COUNT,
    K_SENSOR_JUMP,
    K_SHORT,
    K_STOPPED_FLOOR,
    K_STOPPED_PERIODS,
    K_WINDOW,
    M_ANGLE,
    M_DIFFERENCES,
    M_HAS_JUDGED,
    M_HAS_LAST,
    M_HAS_RAW,
    M_INVERTER,
    M_JUDGED_RAW,
    M_LAST,
    M_OK,
    M_RING_POS,
    M_SPEED,
    M_SPEED_RAW,
    M_SPEED_SHORT,
    M_STOPPED,
    M_STOPPED_NET,
    M_WINDOW,
    compiled,
)
from .speed_plausibility import STOPPED_COUNTS


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
def rotor_angle(row, mot, first, n_m, speed, period_s):
    """SpeedPlausibility.rotor_angle for the inverter of ``row``, its motors from
    ``first``."""
    source, total, healthy = 0, 0.0, 0
    for j in range(n_m):
        if mot[first + j, M_OK] > 0.0:
            source |= 1 << j
            total += mot[first + j, M_ANGLE]
            healthy += 1
    if healthy:
        raw = total / healthy
    else:  # (SpeedPlausibility.fallback_angle)
        row[I_FALLBACK_ANGLE] = row[I_FALLBACK_ANGLE] + speed * period_s
        raw = row[I_FALLBACK_ANGLE]
    if source != row[I_ANGLE_SOURCE]:
        row[I_ANGLE_SHIFT] = (row[I_ANGLE_USED] + speed * period_s) - raw
        row[I_ANGLE_SOURCE] = source
    angle = raw + row[I_ANGLE_SHIFT]
    row[I_ANGLE_USED] = angle
    return angle


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
def _last_difference(row, k):
    """The count difference encoder_update took last (0 before the first)."""
    window = int(k[K_WINDOW])
    return row[M_WINDOW + (int(row[M_RING_POS]) - 1) % window]


@compiled
def judge_stopped(mot, k, traction):
    """SpeedPlausibility.judge_stopped: True if an encoder failed now. Whether it judges
    this period is decided on every encoder's state at its start, before any is
    marked (as the plain one does); those that stand must all be on one inverter."""
    n = mot.shape[0]
    any_turning = False
    all_placed = True  # every healthy encoder turns or stands
    standing_on = -1.0  # the inverter of those that stand (-2: more than one)
    for m in range(n):
        r = mot[m]
        if r[M_OK] <= 0.0:
            continue
        if abs(r[M_SPEED]) > k[K_STOPPED_FLOOR]:
            any_turning = True
        elif abs(r[M_STOPPED_NET] + _last_difference(r, k)) > STOPPED_COUNTS:
            all_placed = False
        elif standing_on == -1.0:
            standing_on = r[M_INVERTER]
        elif standing_on != r[M_INVERTER]:
            standing_on = -2.0
    judging = traction and any_turning and all_placed and standing_on >= 0.0
    failed = False
    for m in range(n):
        r = mot[m]
        net = r[M_STOPPED_NET] + _last_difference(r, k)
        if (judging and r[M_OK] > 0.0 and not abs(r[M_SPEED]) > k[K_STOPPED_FLOOR]
                and abs(net) <= STOPPED_COUNTS):
            r[M_STOPPED] += 1.0
            r[M_STOPPED_NET] = net
            if r[M_STOPPED] >= k[K_STOPPED_PERIODS]:
                r[M_OK] = 0.0
                failed = True
        else:
            r[M_STOPPED] = 0.0
            r[M_STOPPED_NET] = 0.0
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
