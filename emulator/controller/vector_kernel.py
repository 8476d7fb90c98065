"""The vector control's period, compiled: what motor_vector.py's docstring states (indirect
rotor-flux orientation, predictive current control for the one-period command delay, a
disturbance observer, field weakening), with the control's state in one array (V_*) and
its constants in another (K_*). Each function's ``py_func`` is the same code in plain
Python, which the tests compare with it; motor_vector.VectorControl keeps the
configuration and reads the state by name.
"""

from __future__ import annotations

import cmath
import math

import numba as nb

from emulator.kernel_cache import WITHOUT_RUNTIME

from .flux_curve import interpolate, secant_lm
from .modulation import clarke, leg_duties

compiled = nb.njit(cache=True, error_model="numpy", **WITHOUT_RUNTIME)

LAMBDA = 0.6  # share of the current's error removed per period
FLUX_KP = 2.0  # flux forcing: d current per flux error, in units of 1 / L_m
OFFSET_SHARE = 0.2  # per period: how fast the mean-to-end offset estimate follows
OBSERVER_GAIN = 0.3  # share of a period's prediction error taken into the voltage error
MARGIN = 0.93  # voltage the control plans to use, of U_dc / sqrt(3): room for dynamics
FW_GAIN = 0.5  # voltage-margin loop: flux change, of rated, per unit of excess voltage, per s

# the state: rotor flux model, slip angle, observed voltage error, mean-to-end offset, the
# prediction for this sample and the period just ended, the field-weakening loop, the
# voltages sent, and what the period reports
(V_PSI_R, V_THETA_SLIP, V_DU_RE, V_DU_IM, V_OFFSET_RE, V_OFFSET_IM, V_HAS_EXPECTED,
 V_EXPECTED_RE, V_EXPECTED_IM, V_HAS_PREV, V_PREV_MEAN_RE, V_PREV_MEAN_IM, V_PREV_THETA,
 V_PREV_TURN_RE, V_PREV_TURN_IM, V_DPSI, V_U_SENT_RE, V_U_SENT_IM, V_U_BEFORE_RE,
 V_U_BEFORE_IM, V_I_D, V_I_Q, V_PSI_REF, V_TORQUE_LIMIT, V_TORQUE_ESTIMATE, V_W_E,
 V_MODULATION, V_LIMITED, N_STATE) = range(29)
# the constants
(K_T, K_P, K_RS, K_RR, K_LLS, K_LLR, K_PSI_RATED, K_W_BASE_MECH, K_I_MAX, K_LINK_NOMINAL,
 K_RATED_POWER, K_CORE_LOSS_R, K_LEAD, K_N_MOTORS, N_CONSTS) = range(15)


@compiled
def magnetising_current(psi, curve_i, curve_psi):
    """The curve's magnetising current (A, peak) for a flux (V s), signed as the flux."""
    return math.copysign(interpolate(abs(psi), curve_psi, curve_i), psi)


@compiled
def main_flux(i_m, curve_i, curve_psi):
    """The curve's flux (V s) for a magnetising current (A, peak), signed as the current."""
    return math.copysign(interpolate(abs(i_m), curve_i, curve_psi), i_m)


@compiled
def machine(k, curve_i, curve_psi, psi):
    """(L_m, L_r, L_s, sigma L_s, tau_r) at a rotor flux (saturation by the curve)."""
    lm = secant_lm(max(psi, 0.05 * k[K_PSI_RATED]), curve_i, curve_psi)
    lr = lm + k[K_LLR]
    ls = lm + k[K_LLS]
    return lm, lr, ls, ls - lm * lm / lr, lr / k[K_RR]


@compiled
def rotor_flux_step(k, curve_i, curve_psi, psi_r, lm, lr, i_d):
    """The flux model's rotor d circuit over a period: the flux moves with the d current
    less the magnetising current its present level takes on the curve (L_m / L_r for the
    rotor leakage), psi_r + T R_r (L_m / L_r) (i_d - i_m(psi_r)), at least 0."""
    return max(psi_r + k[K_T] * k[K_RR] * lm / lr
               * (i_d - magnetising_current(psi_r, curve_i, curve_psi)), 0.0)


@compiled
def coast(v, k, curve_i, curve_psi):
    """A period with the gates blocked. The integrators, the observer and the voltage in
    flight are forgotten; the flux model goes on with the stator current zero: the rotor
    d circuit tau_r dpsi_r/dt = L_m i_d - psi_r with i_d = 0 (the step's own rotor
    circuit, in which the curve's magnetising current stands for psi_r / L_m: the decay
    takes the secant L_m), so the flux decays with the open-circuit time constant and
    turns with the rotor, no slip: the field angle, the counted rotor angle plus the slip
    integrated so far, holds (Novotny & Lipo, 1996, ch. 5, the rotor circuit with the
    stator current zero). The field-weakening loop's correction, learnt for this machine
    and speed, is kept too. A drive started again within a few tau_r of its stop meets
    its rotor's flux where its model has it: a model reset to zero had met it with the
    5 % floor's back-EMF at the wrong angle (1.4 kA at a restart 0.2 s after a trip at
    50 km/h, running 0.69 kA)."""
    psi_r, slip, dpsi = v[V_PSI_R], v[V_THETA_SLIP], v[V_DPSI]
    lm, lr, _, _, _ = machine(k, curve_i, curve_psi, psi_r)
    psi_r = rotor_flux_step(k, curve_i, curve_psi, psi_r, lm, lr, 0.0)
    v[:] = 0.0
    v[V_PREV_TURN_RE] = 1.0
    v[V_PSI_R], v[V_THETA_SLIP], v[V_DPSI] = psi_r, slip, dpsi


@compiled
def mean_turn(x):
    """Mean of e^{j x t / T} over one period, (e^{j x} - 1) / (j x); 1 for x = 0."""
    if abs(x) < 1e-9:
        return complex(1.0, 0.5 * x)
    return (cmath.exp(1j * x) - 1.0) / (1j * x)


@compiled
def fit_q(gain, offset, goal, u_lim):
    """The voltage gain (goal.real + j x) + offset of magnitude u_lim whose x is nearest
    goal.imag (keeping the d goal, cutting the q goal); the nearest vector scaled to u_lim
    where no x reaches it."""
    c = gain * goal.real + offset  # |c + j gain x|^2 = u_lim^2, a quadratic in x
    g = 1j * gain
    qa = abs(g) ** 2
    qb = 2.0 * (c.conjugate() * g).real
    qc = abs(c) ** 2 - u_lim * u_lim
    disc = qb * qb - 4.0 * qa * qc
    if disc < 0.0 or qa == 0.0:
        x = -qb / (2.0 * qa) if qa else 0.0  # the smallest voltage there is, scaled
        u = c + g * x
        return u * (u_lim / abs(u)) if abs(u) > 0 else u
    root = math.sqrt(disc)
    lo, hi = (-qb - root) / (2.0 * qa), (-qb + root) / (2.0 * qa)
    return c + g * min(max(goal.imag, lo), hi)


@compiled
def steady_voltage_squared(k, curve_i, curve_psi, psi, torque, w_e):
    """|u|^2 of the steady state of a torque at a rotor flux, with R_s:
    (R_s i_d - w_e sigma L_s i_q)^2 + (R_s i_q + w_e L_s i_d)^2."""
    rs = k[K_RS]
    lm, lr, ls, sigma_ls, _ = machine(k, curve_i, curve_psi, psi)
    i_d = magnetising_current(psi, curve_i, curve_psi)
    i_q = torque / (1.5 * k[K_P] * lm / lr * psi)
    return (rs * i_d - w_e * sigma_ls * i_q) ** 2 + (rs * i_q + w_e * ls * i_d) ** 2


@compiled
def flux_for(k, curve_i, curve_psi, torque, w_e, u_room):
    """The largest rotor flux, at most rated, at which the steady state of this torque
    needs no more voltage than u_room (i_d = i_m(psi), i_q = T / (3/2 p L_m/L_r psi));
    where no flux carries the torque, the flux of the breakdown torque,
    i_d = u / (sqrt 2 w_e L_s)."""
    psi_rated = k[K_PSI_RATED]
    if abs(w_e) < 1.0:
        return psi_rated
    room = u_room * u_room
    if steady_voltage_squared(k, curve_i, curve_psi, psi_rated, torque, w_e) <= room:
        return psi_rated
    # breakdown: the flux at which the voltage-limited torque is largest
    ls = machine(k, curve_i, curve_psi, 0.5 * psi_rated)[2]
    psi_k = main_flux(u_room / (math.sqrt(2) * abs(w_e) * ls), curve_i, curve_psi)
    if steady_voltage_squared(k, curve_i, curve_psi, psi_k, torque, w_e) > room:
        return min(psi_k, psi_rated)
    lo, hi = psi_k, psi_rated  # needs(lo) <= room < needs(hi): the largest flux
    for _ in range(16):
        mid = 0.5 * (lo + hi)
        if steady_voltage_squared(k, curve_i, curve_psi, mid, torque, w_e) <= room:
            lo = mid
        else:
            hi = mid
    return lo


@compiled
def i_q_window(k, i_d, emf_flux, w_e, sigma_ls, u_room):
    """The q currents (A) whose voltage stays within u_room beside the flux's:
    u_d = R_s i_d - w_e sigma L_s i_q, u_q = R_s i_q + w_e (sigma L_s i_d + L_m/L_r psi_r),
    |u| <= u_room, a quadratic in i_q: motoring and generating limits differ by R_s."""
    rs = k[K_RS]
    q = w_e * (sigma_ls * i_d + emf_flux)
    a2 = (w_e * sigma_ls) ** 2 + rs**2
    b1 = 2.0 * (-rs * i_d * w_e * sigma_ls + rs * q)
    c0 = (rs * i_d) ** 2 + q * q - u_room * u_room
    disc = b1 * b1 - 4.0 * a2 * c0
    if disc <= 0.0:
        return 0.0, 0.0  # the flux alone takes all the voltage
    root = math.sqrt(disc)
    return (-b1 - root) / (2.0 * a2), (-b1 + root) / (2.0 * a2)


@compiled
def interval(T, i0, u, e0, w_e, rp, sigma_ls):
    """Stator-frame current at the end of one period and its mean over the period, from
    i0, a held voltage u and a back-EMF e0 e^{j w_e t}: the exact solution of
    sigma L_s di/dt = u - R' i - e(t). With tau' = sigma L_s / R', a = e^{-T/tau'},
    alpha = tau' (1 - a) / T, s = 1/tau' + j w_e:
    i(T) = a i0 + (1 - a) u / R' - e0 (e^{j w_e T} - a) / (sigma L_s s) and
    mean = alpha i0 + (1 - alpha) u / R' - e0 (F - alpha) / (sigma L_s s),
    F = (e^{j w_e T} - 1) / (j w_e T) the mean of e^{j w_e t}."""
    tau = sigma_ls / rp
    a = math.exp(-T / tau)
    alpha = tau * (1.0 - a) / T
    s = complex(1.0 / tau, w_e)
    kk = e0 / (sigma_ls * s)
    end = a * i0 + (1.0 - a) * u / rp - kk * (cmath.exp(1j * w_e * T) - a)
    mean = alpha * i0 + (1.0 - alpha) * u / rp - kk * (mean_turn(w_e * T) - alpha)
    return end, mean


@compiled
def vector_step(v, k, curve_i, curve_psi, torque_per_motor, rotor_angle_rad,
                rotor_speed_rad_s, u_dc, ia, ib, ic):
    """Duties (three) for the period that starts one period from now; the rotor angle is
    the counted mechanical angle (mean of the inverter's motors), the speed their windowed
    speed, u_dc the link voltage now. The steps and their reasons: motor_vector.py."""
    T, p = k[K_T], k[K_P]
    rs, rr, psi_rated = k[K_RS], k[K_RR], k[K_PSI_RATED]
    w_m = rotor_speed_rad_s
    u_lim = max(u_dc, 1.0) / math.sqrt(3)
    # the flux and the torque limit are planned on no more than the nominal link
    u_plan = min(u_lim, k[K_LINK_NOMINAL] / math.sqrt(3))
    # --- flux reference: the most the voltage allows for this torque, then the loop ----
    w_e_est = p * w_m
    # planned for no less than the rated power's torque (rated torque up to base speed)
    reserve = k[K_RATED_POWER] / max(abs(w_m), k[K_W_BASE_MECH])
    planned = math.copysign(max(abs(torque_per_motor), reserve), torque_per_motor)
    psi_ff = flux_for(k, curve_i, curve_psi, planned, w_e_est, MARGIN * u_plan)
    v[V_PSI_REF] = max(psi_ff + v[V_DPSI], 0.1 * psi_rated)
    psi_ref = v[V_PSI_REF]
    sigma_ls = machine(k, curve_i, curve_psi, psi_ref)[3]
    i_d_ref = magnetising_current(psi_ref, curve_i, curve_psi)
    # --- measured current in the field frame (the angle at the sample instant) ---------
    theta = p * rotor_angle_rad + v[V_THETA_SLIP]
    u_before = complex(v[V_U_BEFORE_RE], v[V_U_BEFORE_IM])
    du = complex(v[V_DU_RE], v[V_DU_IM])
    # the measured current less what the core-loss branches draw (iron-loss compensation)
    i_s = clarke(ia, ib, ic) / k[K_N_MOTORS] - u_before / k[K_CORE_LOSS_R]
    psi_r = v[V_PSI_R]
    lm_now, lr_now, _, sigma_now, tau_now = machine(k, curve_i, curve_psi, psi_r)
    rp_now = rs + rr * (lm_now / lr_now) ** 2
    # the board's acquisition lag (filter and sample age) put back with the model's di/dt
    lead = k[K_LEAD]
    if lead > 0.0:
        emf = lm_now / lr_now * complex(-1.0 / tau_now, p * w_m) * psi_r
        u_acted = u_before - du * cmath.exp(1j * theta)
        i_s += lead * (u_acted - rp_now * i_s - emf * cmath.exp(1j * theta)) / sigma_now
    i_dq = i_s * cmath.exp(-1j * theta)
    v[V_I_D], v[V_I_Q] = i_dq.real, i_dq.imag
    # the disturbance observer in the field frame
    i_expected = complex(v[V_EXPECTED_RE], v[V_EXPECTED_IM])
    if v[V_HAS_EXPECTED] > 0.5:
        b_now = (1.0 - math.exp(-T * rp_now / sigma_now)) / rp_now
        miss = (i_expected - i_s) * cmath.exp(-1j * theta) / b_now
        du += OBSERVER_GAIN * miss
        cap = 0.1 * u_lim
        if abs(du) > cap:
            du *= cap / abs(du)
    # the flux follows the period's mean d current: the model's mean for the period just
    # ended, corrected by half of how far the sample ended from its prediction
    if v[V_HAS_PREV] > 0.5:
        mean_s = complex(v[V_PREV_MEAN_RE], v[V_PREV_MEAN_IM]) + 0.5 * (i_s - i_expected)
        mean_dq = (mean_s * cmath.exp(-1j * v[V_PREV_THETA])
                   / complex(v[V_PREV_TURN_RE], v[V_PREV_TURN_IM]))
    else:
        mean_dq = i_dq
    i_d_mean = mean_dq.real
    # the rotor d circuit on the period's mean d current
    psi_r = rotor_flux_step(k, curve_i, curve_psi, psi_r, lm_now, lr_now, i_d_mean)
    v[V_PSI_R] = psi_r
    psi = max(psi_r, 0.05 * psi_rated)
    # the d current for the flux reference, plus a forcing on the model's flux error
    flux_error = psi_ref - psi_r
    i_d_ref = min(max(i_d_ref + FLUX_KP * flux_error / lm_now, 0.0), 0.8 * k[K_I_MAX])
    k_t = 1.5 * p * lm_now / lr_now * psi  # N m per A of i_q
    v[V_TORQUE_ESTIMATE] = k_t * mean_dq.imag  # over the period just ended
    # --- torque and its limits: current, and the voltage left beside the flux's ---------
    i_q_cur = math.sqrt(max(k[K_I_MAX] ** 2 - i_d_ref**2, 0.0))
    lo, hi = i_q_window(k, i_d_ref, psi * lm_now / lr_now, w_e_est, sigma_ls, MARGIN * u_plan)
    lo, hi = max(lo, -i_q_cur), min(hi, i_q_cur)
    v[V_TORQUE_LIMIT] = k_t * (hi if torque_per_motor >= 0 else -lo)
    i_q_ref = min(max(torque_per_motor / k_t, lo), hi)
    # --- slip and field angle over the next two periods --------------------------------
    w_slip = lm_now * i_q_ref / (tau_now * psi)
    w_e = p * w_m + w_slip
    v[V_W_E] = w_e
    e0 = lm_now / lr_now * complex(-1.0 / tau_now, p * w_m) * psi
    rp = rs + rr * (lm_now / lr_now) ** 2  # R', the transient resistance
    # predicted current at t_(k+1) under the voltage already sent
    u_sent = complex(v[V_U_SENT_RE], v[V_U_SENT_IM])
    u_acting = u_sent - du * cmath.exp(1j * (theta + 0.5 * w_e * T))
    i_next, mean_now = interval(T, i_s, u_acting, e0 * cmath.exp(1j * theta), w_e, rp,
                                sigma_ls)
    theta_next = theta + w_e * T
    # the current at t_(k+2) steps a share LAMBDA of the way to the reference, shifted by
    # how far a period's mean lies from its end current at this operating point
    turn = mean_turn(w_e * T)  # a field-frame vector's mean over the period, turned
    ref = complex(i_d_ref, i_q_ref)
    next_dq = i_next * cmath.exp(-1j * theta_next)
    offset_now = mean_now / (cmath.exp(1j * theta) * turn) - next_dq
    mean_offset = complex(v[V_OFFSET_RE], v[V_OFFSET_IM])
    mean_offset += (offset_now - mean_offset) * OFFSET_SHARE
    goal_dq = next_dq + LAMBDA * (ref - mean_offset - next_dq)
    e_next = e0 * cmath.exp(1j * theta_next)
    end_free, _ = interval(T, i_next, 0j, e_next, w_e, rp, sigma_ls)
    a = math.exp(-T * rp / sigma_ls)
    # u = gain goal_dq + offset: affine in the goal, so a limit can be met on its q part
    gain = cmath.exp(1j * (theta_next + w_e * T)) * rp / (1.0 - a)
    offset = (-end_free * rp / (1.0 - a)
              + du * cmath.exp(1j * (theta_next + 0.5 * w_e * T)))
    u = gain * goal_dq + offset
    # --- voltage limit, field-weakening loop, anti-windup ------------------------------
    mag = abs(u)
    v[V_MODULATION] = mag / u_lim
    excess = mag / (MARGIN * u_plan) - 1.0
    # the loop lowers the flux while the voltage asked for passes the margin and gives
    # it back when there is room; it waits while the flux is still on its way
    settling = abs(psi_r - psi_ref) > 0.05 * psi_rated
    dpsi = v[V_DPSI]
    if not settling or excess < 0:
        dpsi = min(0.0, dpsi - FW_GAIN * T * excess * psi_rated)
    v[V_DPSI] = max(dpsi, -0.5 * psi_rated)
    limited = mag > u_lim
    v[V_LIMITED] = 1.0 if limited else 0.0
    if limited:
        # the flux first: keep the d goal and take from the q goal what the voltage
        # cannot carry; only if that is not enough, scale the whole vector
        u = fit_q(gain, offset, goal_dq, u_lim)
    # for the observer and the flux model at the next sample
    v[V_HAS_EXPECTED], v[V_EXPECTED_RE], v[V_EXPECTED_IM] = 1.0, i_next.real, i_next.imag
    v[V_HAS_PREV], v[V_PREV_MEAN_RE], v[V_PREV_MEAN_IM] = 1.0, mean_now.real, mean_now.imag
    v[V_PREV_THETA], v[V_PREV_TURN_RE], v[V_PREV_TURN_IM] = theta, turn.real, turn.imag
    v[V_U_BEFORE_RE], v[V_U_BEFORE_IM] = u_sent.real, u_sent.imag
    v[V_U_SENT_RE], v[V_U_SENT_IM] = u.real, u.imag
    v[V_DU_RE], v[V_DU_IM] = du.real, du.imag
    v[V_OFFSET_RE], v[V_OFFSET_IM] = mean_offset.real, mean_offset.imag
    v[V_THETA_SLIP] += w_slip * T
    # --- duties: the stator-frame vector held over the period (the dead time is the
    # observer's)
    return leg_duties(u, u_dc, 0j, False, 0.0, 1.0)
