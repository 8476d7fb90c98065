"""The scalar control's torque mode, one period, compiled: what motor_scalar.py's
docstring states, with the control's state in one array (S_*) and its constants in
another (K_*). Each function's ``py_func`` is the same code in plain Python, which the
tests compare with it; motor_scalar.ScalarControl keeps the configuration and reads the
state by name.

The period's steps: the torque estimate from the measured currents and the voltage held
(air-gap power, Bose 2002), then the plan: the link's mean, the slip for the torque on
the circuit at the voltage there is (slip_circuit.py), the flux trim at low frequency,
the voltage vector turned to the middle of the period it acts in (1.5 T), and the duties
with the dead time compensated (modulation.py).

The drive and its link's filter. The link's capacitor C_d and its series-resonant 2f
filter (L_2, C_2) resonate in parallel at 2 f sqrt(1 + C_2 / C_d): 45.9 Hz on the 15 kV
16.7 Hz Tern, 120 Hz on the 25 kV one, where only the filter's resistance damps the link
(R_p = X^2 / R_2 with X = 1 / (w_p C_d): 18.6 ohm on the 15 kV Tern). A drive whose
duties divide by the link voltage sampled each period gives its motors the same voltage
whatever the link does, and draws a constant power P: an incremental resistance of
-U^2 / P (R. D. Middlebrook, "Input filter considerations in design and application of
switching regulators", IEEE IAS 1976; from memory), which set the 15 kV links ringing at
41-44 Hz and the 25 kV ones at 115 Hz at 160 km/h (DEVELOPERS.md, "The V/f drive and the
link's filter"). Two parts now:

- the duties divide by the middle of the link's 20 ms mean and the sampled voltage: on
  swings faster than the mean the motor gets U_s (1 + u~ / 2U), its power (as U_s^2 at
  the slip held) P (1 + u~ / U), its current P / U unchanged (a quasi-static view: it
  leaves out the motor's currents at the resonance and the command's delay of 1.5-2.5
  periods, and with them the drive still fed the 15 kV resonance braking at full effort
  from 70 km/h up);
- the voltage's angle is advanced, in the field's direction, by K_LINK_DAMPING radians
  per unit of the link's swing from its mean (at most LINK_DAMPING_MAX_RAD): with the
  stator's frequency above the swing's, the stator flux follows the voltage's angle and
  the rotor's flux does not, so the angle moves the load angle and the torque, and the
  drive takes more power from a link that rises and less from one that falls, whether
  it motors or brakes (a damping conductance; where the power itself were modulated
  with the voltage, its sign would follow the power's). Below the resonance the stator
  flux lags the angle's swing and the sign turns (a review measured a gain of 1.0
  ringing the 15 kV links braking at 40-45 km/h, which without it are quiet), so the
  term fades in from the link's resonance (ControllerConfig.link_resonance_hz, from the
  profile's link and filter) to LINK_DAMPING_FADE above it: on the 15 kV Tern from
  45.9 Hz (about 53 km/h), on the 25 kV one from 120 Hz (about 141 km/h; there the
  command's delay, 65-108 degrees at 120 Hz, leaves the term next to no effect, and the
  middle above holds the links).

The gain is chosen on the plant (motor_scalar.LINK_DAMPING_RAD). The voltage stored as
sent (S_U_VEC, the torque estimate's "voltage held") is the one sent, its angle nudged
and its magnitude as planned: the motor gets it times u_d / (the middle), half the
link's swing off (under 1.5 %: the links now hold within 15-47 V of 1800 V peak to peak
over the points of tests/scenario/test_link_damping.py).
"""

from __future__ import annotations

import cmath
import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

from . import slip_circuit as sc
from .flux_curve import secant_lm
from .modulation import clarke, leg_duties

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)

# the state: angles, frequency, flux, slip, trim, the last current, the link's mean, the
# voltage sent, the estimates, the breakdown search, and what the last two commands
# carried (H0: the period just measured, H1: the one after it); the slip trim, and the
# torque the last two commands asked for
(S_THETA, S_THETA_SLIP, S_F_S, S_PSI_M, S_W_SLIP, S_U_TRIM, S_I_PREV_RE, S_I_PREV_IM,
 S_HAS_I_PREV, S_U_D_MEAN, S_U_VEC_RE, S_U_VEC_IM, S_TORQUE_ESTIMATE, S_TORQUE_LIMIT,
 S_BREAKDOWN_0, S_BREAKDOWN_1, S_BREAKDOWN_AGE_0, S_BREAKDOWN_AGE_1, S_BREAKDOWN_KEY,
 S_H0_U_RE, S_H0_U_IM, S_H0_F, S_H0_SLIP, S_H0_PSI, S_H1_U_RE, S_H1_U_IM, S_H1_F,
 S_H1_SLIP, S_H1_PSI, S_SLIP_TRIM, S_H0_T, S_H1_T, S_T_PREV, S_SLIP_CAP, S_RS_WARM,
 N_STATE) = range(36)
# the constants besides the circuit's (slip_circuit.CIRCUIT_*)
(K_T, K_N_MOTORS, K_I_MAX, K_SIGN_BAND, K_RATED_HZ, K_LINK_NOMINAL, K_DEAD_TIME, K_FSW,
 K_VOLTAGE_MARGIN, K_SLIP_LIMIT_SHARE, K_BISECTIONS, K_BREAKDOWN_EVERY, K_FLUX_TRIM_S,
 K_FLUX_TRIM_RANGE, K_TRIM_UP_TO, K_LINK_FILTER_S, K_RATED_TORQUE, K_SLIP_TRIM_S,
 K_SLIP_TRIM_FROM, K_SLIP_TRIM_LOW, K_SLIP_TRIM_HIGH, K_SLIP_TRIM_STEADY, K_CORE_G,
 K_RS_ALPHA, K_RS_REF_DEGC, K_LINK_DAMPING, K_LINK_RESONANCE_HZ, N_CONSTS) = range(28)

TWO_PI = 2 * math.pi
#: the link's damping fades in from the link's resonance to this share above it
LINK_DAMPING_FADE = 0.2
#: ... and turns the voltage by no more than this, rad (a 17 % swing at 0.3 rad a unit)
LINK_DAMPING_MAX_RAD = 0.05


@compiled
def low_frequency_weight(k, f_hz):
    """1 at standstill falling to 0 at K_TRIM_UP_TO of the rated frequency: how much the
    measured current's magnitude is trusted over the voltage."""
    return max(1.0 - abs(f_hz) / (k[K_TRIM_UP_TO] * k[K_RATED_HZ]), 0.0)


@compiled
def estimated_torque(s, k, c, curve_i, curve_psi, ia, ib, ic):
    """Torque per motor over the period that has just ended (N m, low-pass 10 ms): the
    air-gap power P = 3/2 Re(u i_mean*) - 3/2 R_s |i_mean|^2, T = p P / w_s, from the
    voltage held and the mean of the period's end samples (corrected for a vector turning
    by 2x within it: tan(x)/x); below half the rated frequency the current's magnitude at
    the slip applied is blended in."""
    T = k[K_T]
    i = clarke(ia, ib, ic) / k[K_N_MOTORS]
    had = s[S_HAS_I_PREV] > 0.5
    i_prev = complex(s[S_I_PREV_RE], s[S_I_PREV_IM])
    s[S_I_PREV_RE], s[S_I_PREV_IM], s[S_HAS_I_PREV] = i.real, i.imag, 1.0
    u_held = complex(s[S_H0_U_RE], s[S_H0_U_IM])
    f_held, slip_held, psi_held = s[S_H0_F], s[S_H0_SLIP], s[S_H0_PSI]
    w_s = TWO_PI * f_held
    if not had or abs(w_s) < 1.0:
        return s[S_TORQUE_ESTIMATE]
    x = 0.5 * w_s * T
    mean = 0.5 * (i + i_prev) * (math.tan(x) / x if abs(x) > 1e-6 else 1.0)
    rs = s[S_RS_WARM] if s[S_RS_WARM] > 0.0 else c[sc.CIRCUIT_RS]
    p_air = 1.5 * ((u_held * mean.conjugate()).real - rs * abs(mean) ** 2
                   - k[K_CORE_G] * abs(u_held) ** 2)  # less the core loss across the terminals
    t_now = c[sc.CIRCUIT_P] * p_air / w_s
    slip_trim(s, k, t_now, f_held)
    weight = low_frequency_weight(k, f_held)
    if weight > 0.0:
        # (the circuit with the rotor resistance the slip trim has found: R_r (1 + trim)
        # at a slip is the model's R_r at the slip over (1 + trim), exactly)
        y, t_per_psi2 = sc.branches(c, slip_held / (1.0 + s[S_SLIP_TRIM]),
                                    secant_lm(psi_held, curve_i, curve_psi))
        psi = abs(mean) / abs(y)
        t_now = weight * t_per_psi2 * psi * psi + (1.0 - weight) * t_now
    s[S_TORQUE_ESTIMATE] += (t_now - s[S_TORQUE_ESTIMATE]) * min(T / 0.01, 1.0)
    return s[S_TORQUE_ESTIMATE]


@compiled
def stator_temperature(s, k, c, degc):
    """The stator's resistance the torque estimate takes, from the stator winding's
    temperature sensor: R_s (1 + alpha (T - T_ref)) (copper, REFERENCES.md). A reading
    outside -60..250 degC (a broken sensor, NaN) is not taken: the last good one stays."""
    if -60.0 <= degc <= 250.0:
        s[S_RS_WARM] = c[sc.CIRCUIT_RS] * (1.0 + k[K_RS_ALPHA] * (degc - k[K_RS_REF_DEGC]))


@compiled
def slip_trim(s, k, t_airgap, f_held):
    """Trim the slip by the air-gap torque (N m a motor) the period just measured gave
    against the torque its command asked for (S_H0_T; 0 where it teaches nothing):
    integral action, T / K_SLIP_TRIM_S a period, on the relative error, within
    [-K_SLIP_TRIM_LOW, K_SLIP_TRIM_HIGH]. The circuit's slip for a torque assumes the
    rotor resistance and flux of the model; the torque at a slip goes as 1 / R_r (small
    slip), so a rotor warmer than the model, or a flux a little under the plan, leaves
    the torque short by as much (R(T) = R_20 (1 + 0.00393 (T - 20 degC)), REFERENCES.md:
    x 0.76 at -40 degC, x 1.71 at 200 degC). Only from K_SLIP_TRIM_FROM of the rated
    frequency up, where the flux trim has let go and the air-gap power is not swamped by
    the stator's drop, and above a fifth of the rated torque."""
    asked = s[S_H0_T]
    if (abs(f_held) < k[K_SLIP_TRIM_FROM] * k[K_RATED_HZ]
            or abs(asked) < 0.2 * k[K_RATED_TORQUE]):
        return
    trim = s[S_SLIP_TRIM] - k[K_T] / k[K_SLIP_TRIM_S] * (t_airgap / asked - 1.0)
    s[S_SLIP_TRIM] = min(max(trim, -k[K_SLIP_TRIM_LOW]), k[K_SLIP_TRIM_HIGH])


@compiled
def slip_for(s, k, c, lm, torque, w_r, u_room):
    """The slip frequency (rad/s) that gives the torque per motor within the slip and
    current limits (the torque there otherwise); sets the torque limit. The slip limit
    is a share of the breakdown slip, found anew every K_BREAKDOWN_EVERY periods. The
    searches start from the last period's slip (S_W_SLIP)."""
    halvings = int(k[K_BISECTIONS])
    sign = 1.0 if torque >= 0 else -1.0
    key = 0 if sign > 0 else 1
    if key != int(s[S_BREAKDOWN_KEY]):  # the other direction's cap is from another time
        s[S_BREAKDOWN_AGE_0 + key] = 0.0
        s[S_BREAKDOWN_KEY] = key
    if s[S_BREAKDOWN_AGE_0 + key] <= 0:
        s[S_BREAKDOWN_0 + key] = sc.breakdown_slip(c, sign, w_r, u_room, lm, halvings)
        s[S_BREAKDOWN_AGE_0 + key] = k[K_BREAKDOWN_EVERY]
    s[S_BREAKDOWN_AGE_0 + key] -= 1.0
    cap = k[K_SLIP_LIMIT_SHARE] * s[S_BREAKDOWN_0 + key]
    t_cap, i_cap, _, _ = sc.operating_point(c, cap, w_r, u_room, lm)
    if i_cap > k[K_I_MAX]:  # the current limit comes first: its slip
        cap = sc.slip_for_current(c, k[K_I_MAX], cap, i_cap, s[S_W_SLIP], w_r, u_room, lm,
                                  halvings)
        t_cap = sc.operating_point(c, cap, w_r, u_room, lm)[0]
    s[S_TORQUE_LIMIT] = abs(t_cap)
    s[S_SLIP_CAP] = cap
    if abs(torque) >= abs(t_cap):
        return cap
    return sc.slip_for_torque(c, abs(torque), cap, abs(t_cap), s[S_W_SLIP], w_r, u_room, lm,
                              halvings)


@compiled
def trim(s, k, c, curve_i, curve_psi, ia, ib, ic, weight):
    """Hold the flux the circuit planned by the current it draws: the voltage is trimmed
    by the ratio of the planned flux to the one the measured current gives at the slip
    applied (|I_s| = psi_m |I_s / psi_m|), which no voltage error biases."""
    i = abs(clarke(ia, ib, ic)) / k[K_N_MOTORS]
    slip_held, psi_held = s[S_H0_SLIP], s[S_H0_PSI]  # what the sampled current answers
    # on the circuit with the rotor resistance the slip trim has found (as in
    # estimated_torque), so that the two trims do not both take up one model error
    y, _ = sc.branches(c, slip_held / (1.0 + s[S_SLIP_TRIM]),
                       secant_lm(psi_held, curve_i, curve_psi))
    psi_seen = i / abs(y)
    if psi_seen <= 0.2 * psi_held:
        return
    u_trim = s[S_U_TRIM] + weight * k[K_T] / k[K_FLUX_TRIM_S] * (psi_held / psi_seen - 1.0)
    s[S_U_TRIM] = min(max(u_trim, 1.0 - k[K_FLUX_TRIM_RANGE]), 1.0 + k[K_FLUX_TRIM_RANGE])


@compiled
def torque_step(s, k, c, curve_i, curve_psi, torque, speed, u_d, ia, ib, ic, has_currents,
                angle, has_angle):
    """Duties (three) for the period that starts one period from now and the stator
    frequency (Hz), for a torque per motor at a rotor speed (rad/s, mechanical), the link
    at u_d, the sampled phase currents (has_currents: for the trim and the dead-time
    compensation) and the counted rotor angle (rad; has_angle: angle-based slip
    regulation, else the stator angle integrates its frequency)."""
    T = k[K_T]
    p = c[sc.CIRCUIT_P]
    w_r = p * speed
    f_rotor = w_r / TWO_PI
    # the plan takes the link's mean (no more than nominal); the duties take the middle
    # of the mean and the voltage sampled, so the drive draws a constant current on the
    # link's swings faster than the mean, where duties on the voltage sampled alone would
    # hold its power (a negative resistance, which set the link's filter ringing: the
    # module's docstring)
    if s[S_U_D_MEAN] == 0.0:
        s[S_U_D_MEAN] = u_d
    s[S_U_D_MEAN] += (u_d - s[S_U_D_MEAN]) * min(T / k[K_LINK_FILTER_S], 1.0)
    u_duty = 0.5 * (s[S_U_D_MEAN] + u_d)
    u_max = u_duty / math.sqrt(3)
    # a vector held over a period while the field turns by w_s T has a fundamental of
    # sin(x) / x of it, x = w_s T / 2: the circuit is planned on what the motor gets, the
    # command is raised by it
    x = 0.5 * abs(w_r + s[S_W_SLIP]) * T
    hold = math.sin(x) / x if x > 1e-6 else 1.0
    u_room = hold * min(k[K_VOLTAGE_MARGIN] * min(s[S_U_D_MEAN], k[K_LINK_NOMINAL]),
                        u_d) / math.sqrt(3)
    w_slip = slip_for(s, k, c, secant_lm(s[S_PSI_M], curve_i, curve_psi), torque, w_r,
                      u_room)
    # the torque this command asks for, for the slip trim to learn from: none at the
    # torque limit, nor with the trimmed slip held at the slip limit (breakdown's or
    # current's: the trim would wind up against it), nor while the torque asked moves
    # faster than the jerk limit moves it (the adhesion control's cuts, whose transients
    # are no measure of the slip's error)
    given = 0.0
    if abs(torque) < s[S_TORQUE_LIMIT]:
        trimmed = abs(w_slip * (1.0 + s[S_SLIP_TRIM]))
        cap = abs(s[S_SLIP_CAP])
        w_slip = math.copysign(min(trimmed, cap), w_slip)
        if (trimmed < cap
                and abs(torque - s[S_T_PREV]) < k[K_SLIP_TRIM_STEADY] * k[K_RATED_TORQUE]):
            given = torque
    s[S_T_PREV] = torque
    s[S_W_SLIP] = w_slip
    _, _, psi, u_s = sc.operating_point(c, w_slip, w_r, u_room,
                                        secant_lm(s[S_PSI_M], curve_i, curve_psi))
    f_s = f_rotor + w_slip / TWO_PI
    # the trim acts at low frequency, where the voltage errors weigh; none from half the
    # rated frequency up (the sampled current's own error takes over)
    weight = low_frequency_weight(k, f_s)
    if has_currents and weight > 0.0:
        trim(s, k, c, curve_i, curve_psi, ia, ib, ic, weight)
    s[S_PSI_M] = psi
    u = abs(u_s) * (1.0 + weight * (s[S_U_TRIM] - 1.0)) / hold
    lead = cmath.phase(u_s) if u > 0 else 0.0  # the voltage leads the flux's axis
    # angle-based slip regulation: the stator angle is the counted rotor angle plus the
    # integrated slip
    if has_angle:
        s[S_THETA_SLIP] = (s[S_THETA_SLIP] + w_slip * T) % TWO_PI
        s[S_THETA] = (p * angle + s[S_THETA_SLIP]) % TWO_PI
    else:
        s[S_THETA] = (s[S_THETA] + TWO_PI * f_s * T) % TWO_PI
    s[S_F_S] = f_s
    u = min(u, u_max)
    # the link's damping: the voltage's angle advanced (in the field's direction) by
    # K_LINK_DAMPING radians per unit of the link's swing from its mean, so the drive
    # draws more power where the link rises and less where it falls, motoring or braking;
    # only where the stator's frequency is above the link's resonance (faded in over
    # LINK_DAMPING_FADE of it), bounded (the module's docstring)
    nudge = 0.0
    if k[K_LINK_RESONANCE_HZ] > 0.0 and s[S_U_D_MEAN] > 0.0:  # (a dead link: none)
        above = abs(f_s) / k[K_LINK_RESONANCE_HZ] - 1.0
        weight = min(max(above / LINK_DAMPING_FADE, 0.0), 1.0)
        nudge = weight * k[K_LINK_DAMPING] * (u_d - s[S_U_D_MEAN]) / s[S_U_D_MEAN]
        nudge = min(max(nudge, -LINK_DAMPING_MAX_RAD), LINK_DAMPING_MAX_RAD)
        if f_s < 0.0:
            nudge = -nudge
    u_vec = cmath.rect(u, s[S_THETA] + lead + nudge + TWO_PI * f_s * 1.5 * T)  # t+T..t+2T
    s[S_U_VEC_RE], s[S_U_VEC_IM] = u_vec.real, u_vec.imag
    for j in range(5):  # the history moves on: H0 <- H1 <- this command
        s[S_H0_U_RE + j] = s[S_H1_U_RE + j]
    s[S_H0_T] = s[S_H1_T]
    s[S_H1_U_RE], s[S_H1_U_IM] = u_vec.real, u_vec.imag
    s[S_H1_F], s[S_H1_SLIP], s[S_H1_PSI], s[S_H1_T] = f_s, w_slip, psi, given
    # the current turned on to the middle of the acting period
    current = clarke(ia, ib, ic) * cmath.exp(1j * TWO_PI * f_s * 1.5 * T)
    d = leg_duties(u_vec, u_duty, current, has_currents and k[K_DEAD_TIME] > 0.0,
                   k[K_DEAD_TIME] * k[K_FSW] * u_duty, k[K_SIGN_BAND])
    return d, f_s
