"""Indirect rotor-flux-oriented (field-oriented) control of one inverter's motors.

Machine model in the rotor-flux frame (Novotny & Lipo, *Vector Control and Dynamics of
AC Drives*, 1996, ch. 5 and 6), amplitude-invariant space vectors:

    u_s = R' i_s + sigma L_s di_s/dt + j w_e sigma L_s i_s + e,
    e = (L_m / L_r) (j p w_m - 1 / tau_r) psi_r,      R' = R_s + R_r (L_m / L_r)^2,
    tau_r dpsi_r/dt = L_m i_d - psi_r,   w_slip = L_m i_q / (tau_r psi_r),
    T = 3/2 p (L_m / L_r) psi_r i_q.

R' is the stator transient resistance: the rotor's share of the current's damping, nearly
as large as R_s here. The field angle is the counted rotor angle (p theta_m) plus the
integrated slip; L_m follows the motor's magnetising curve (the secant at the flux
reference), so the flux and torque references hold under saturation.

Current control for the one-period command delay (the duties computed from the samples
at t_k act from t_(k+1) to t_(k+2), held constant in the stator frame): in the stator
frame the current obeys sigma L_s di/dt = u - R' i - e(t) with no rotation term, so over
one period of held voltage i(t+T) = a i + b u - g(e), a = exp(-T/tau'), b = (1 - a)/R',
tau' = sigma L_s / R', and g the exact response to the back-EMF rotating at w_e. The
controller predicts i(t_(k+1)) from the sample and the voltage already sent, then
chooses the voltage that moves the current a fraction LAMBDA of the way to the
reference by t_(k+2) (a gain-reduced deadbeat, i.e. predictive current control: Holmes
& Lipo, *PWM for Power Converters*, 2003, ch. on current regulation; Buso & Mattavelli,
*Digital Control in Power Electronics*, 2006, delay compensation; from memory). The
torque and the flux follow the period's mean current, which at a few samples per
electrical period differs from the sample by tens of amperes: the sample is aimed at the
reference shifted by the modelled mean-to-end offset, and the flux model is fed the
model's mean over the period just ended, corrected by half the sample's prediction error.
A disturbance observer in the field frame takes what the model misses (dead time,
drops, parameters) into the voltage.

Field weakening: the flux reference is the largest flux (at most rated) whose steady
state carries the torque within MARGIN of the voltage U_dc / sqrt(3) (linear modulation
with min-max injection), planned on no more than the nominal link; where no flux carries
it, the breakdown flux. A slow voltage-margin loop lowers it further where the model
misses. The torque is limited by the current limit and by the q current the voltage can
carry beside the flux's (steady state with R_s, so motoring and braking differ); its
largest value is the breakdown torque T_k = 3/2 p (L_m^2 / L_r) U^2 / (2 w_e^2 L_s sigma
L_s) (any drives text). At the voltage limit the flux goes first: the q part of the goal
is cut until the voltage fits.
"""

from __future__ import annotations

import cmath
import math

from .config import ControllerConfig
from .flux_curve import MagnetisingCurve
from .modulation import duties, space_vector

LAMBDA = 0.6  # share of the current's error removed per period
FLUX_KP = 2.0  # flux forcing: d current per flux error, in units of 1 / L_m
OFFSET_SHARE = 0.2  # per period: how fast the mean-to-end offset estimate follows
OBSERVER_GAIN = 0.3  # share of a period's prediction error taken into the voltage error
MARGIN = 0.93  # voltage the control plans to use, of U_dc / sqrt(3): room for dynamics
FW_GAIN = 0.5  # voltage-margin loop: flux change, of rated, per unit of excess voltage, per s
CURRENT_LIMIT_FACTOR = 2.2  # peak current per motor, of the rated peak (inverter limit)


def _fit_q(gain: complex, offset: complex, goal: complex, u_lim: float) -> complex:
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


def _mean_turn(x: float) -> complex:
    """Mean of e^{j x t / T} over one period, (e^{j x} - 1) / (j x); 1 for x = 0."""
    if abs(x) < 1e-9:
        return complex(1.0, 0.5 * x)
    return (cmath.exp(1j * x) - 1.0) / (1j * x)


class VectorControl:
    """Indirect RFOC with predictive current control for one inverter."""

    def __init__(self, cfg: ControllerConfig, n_motors: int) -> None:
        self.cfg = cfg
        self.n = n_motors
        self.T = cfg.period_s
        self.p = cfg.pole_pairs
        self.curve = MagnetisingCurve(cfg.magnetising_h, cfg.saturation_current_a,
                                      cfg.saturation_flux_vs)
        self.rs = cfg.stator_resistance_ohm
        self.rr = cfg.rotor_resistance_ohm
        w_base = 2 * math.pi * cfg.rated_frequency_hz
        # rated rotor flux: the rated phase voltage (peak) over the rated frequency, less
        # the stator's share (about the leakage's); the loop lowers it where U_dc is short
        self.psi_rated = cfg.rated_voltage_v * math.sqrt(2 / 3) / w_base * 0.95
        self.w_base_mech = w_base / self.p * (1 - cfg.rated_slip)
        self.i_max = CURRENT_LIMIT_FACTOR * math.sqrt(2) * cfg.rated_power_w / (
            math.sqrt(3) * cfg.rated_voltage_v * 0.87)
        self.reset()

    def reset(self) -> None:
        """Forget the flux model, integrators and the voltage in flight (gates blocked)."""
        self.psi_r = 0.0
        self.theta_slip = 0.0
        self.du = 0j  # observed voltage error (dead time, drops, model), field frame, V
        self.mean_offset = 0j  # a period's mean current less its end current, field frame
        self.i_expected: complex | None = None  # the current predicted for this sample
        self.prev_mean: complex | None = None  # the model's mean current over the period
        self.prev_theta = 0.0  # under way, stator frame; the field angle at its start
        self.prev_turn = 1 + 0j
        self.dpsi = 0.0  # field-weakening loop's flux reduction, V s (<= 0)
        self.u_sent = 0j  # stator-frame voltage acting from now to the next sample
        self.u_before = 0j  # the one that acted up to this sample
        self.i_d = self.i_q = 0.0
        self.psi_ref = 0.0
        self.torque_limit = 0.0
        self.torque_estimate = 0.0
        self.w_e = 0.0  # the stator's electrical frequency, rad/s
        self.modulation = 0.0
        self.limited = False

    def _machine(self, psi: float) -> tuple[float, float, float, float, float]:
        """(L_m, L_r, L_s, sigma L_s, tau_r) at a rotor flux (saturation by the curve)."""
        lm = self.curve.lm(max(psi, 0.05 * self.psi_rated))
        lr = lm + self.cfg.rotor_leakage_h
        ls = lm + self.cfg.stator_leakage_h
        return lm, lr, ls, ls - lm * lm / lr, lr / self.rr

    def flux_for(self, torque: float, w_e: float, u_room: float) -> float:
        """The largest rotor flux, at most rated, at which the steady state of this torque
        needs no more voltage than u_room: (R_s i_d - w_e sigma L_s i_q)^2 + (R_s i_q +
        w_e L_s i_d)^2 <= u^2, i_d = i_m(psi), i_q = T / (3/2 p L_m/L_r psi) (the loop takes
        what that misses). Where no flux carries the torque, the flux of the breakdown
        torque, i_d = u / (sqrt 2 w_e L_s)."""
        if abs(w_e) < 1.0:
            return self.psi_rated

        rs = self.rs

        def needs(psi: float) -> float:  # |u|^2 in the steady state, with R_s
            lm, lr, ls, sigma_ls, _ = self._machine(psi)
            i_d = self.curve.current(psi)
            i_q = torque / (1.5 * self.p * lm / lr * psi)
            return (rs * i_d - w_e * sigma_ls * i_q) ** 2 + (rs * i_q + w_e * ls * i_d) ** 2

        room = u_room * u_room
        if needs(self.psi_rated) <= room:
            return self.psi_rated
        # breakdown: the flux at which the voltage-limited torque is largest
        ls = self._machine(0.5 * self.psi_rated)[2]
        psi_k = self.curve.flux(u_room / (math.sqrt(2) * abs(w_e) * ls))
        if needs(psi_k) > room:
            return min(psi_k, self.psi_rated)
        lo, hi = psi_k, self.psi_rated  # needs(lo) <= room < needs(hi): the largest flux
        for _ in range(16):
            mid = 0.5 * (lo + hi)
            lo, hi = (mid, hi) if needs(mid) <= room else (lo, mid)
        return lo

    def _i_q_window(self, i_d: float, emf_flux: float, w_e: float, sigma_ls: float,
                    u_room: float) -> tuple[float, float]:
        """The q currents (A) whose voltage stays within u_room beside the flux's:
        u_d = R_s i_d - w_e sigma L_s i_q, u_q = R_s i_q + w_e (sigma L_s i_d + L_m/L_r psi_r),
        |u| <= u_room, a quadratic in i_q: motoring and generating limits differ by R_s."""
        q = w_e * (sigma_ls * i_d + emf_flux)
        a2 = (w_e * sigma_ls) ** 2 + self.rs**2
        b1 = 2.0 * (-self.rs * i_d * w_e * sigma_ls + self.rs * q)
        c0 = (self.rs * i_d) ** 2 + q * q - u_room * u_room
        disc = b1 * b1 - 4.0 * a2 * c0
        if disc <= 0.0:
            return 0.0, 0.0  # the flux alone takes all the voltage
        root = math.sqrt(disc)
        return (-b1 - root) / (2.0 * a2), (-b1 + root) / (2.0 * a2)

    def _interval(self, i0: complex, u: complex, e0: complex, w_e: float, rp: float,
                  sigma_ls: float) -> tuple[complex, complex]:
        """Stator-frame current at the end of one period and its mean over the period,
        from i0, a held voltage u and a back-EMF e0 e^{j w_e t}: the exact solution of
        sigma L_s di/dt = u - R' i - e(t).

        With tau' = sigma L_s / R', a = e^{-T/tau'}, alpha = tau' (1 - a) / T,
        s = 1/tau' + j w_e: i(T) = a i0 + (1 - a) u / R' - e0 (e^{j w_e T} - a) / (sigma L_s s)
        and mean = alpha i0 + (1 - alpha) u / R' - e0 (F - alpha) / (sigma L_s s),
        F = (e^{j w_e T} - 1) / (j w_e T) the mean of e^{j w_e t}.
        """
        T = self.T
        tau = sigma_ls / rp
        a = math.exp(-T / tau)
        alpha = tau * (1.0 - a) / T
        s = complex(1.0 / tau, w_e)
        k = e0 / (sigma_ls * s)
        end = a * i0 + (1.0 - a) * u / rp - k * (cmath.exp(1j * w_e * T) - a)
        mean = alpha * i0 + (1.0 - alpha) * u / rp - k * (_mean_turn(w_e * T) - alpha)
        return end, mean

    def step(self, torque_per_motor: float, rotor_angle_rad: float, rotor_speed_rad_s: float,
             u_dc: float, phase_currents: tuple[float, float, float]) -> list[float]:
        """Duties for the period that starts one period from now.

        rotor_angle_rad: the counted mechanical angle (mean of the inverter's motors);
        rotor_speed_rad_s: their windowed speed; u_dc: the link voltage now.
        """
        T, p = self.T, self.p
        w_m = rotor_speed_rad_s
        u_lim = max(u_dc, 1.0) / math.sqrt(3)
        # the flux and the torque limit are planned on no more than the nominal link: a
        # link that rides high on regeneration can fall by a tenth within a 2f half-period,
        # faster than the rotor flux can follow (tau_r), and the current control would lose
        # its voltage
        u_plan = min(u_lim, self.cfg.link_nominal_v / math.sqrt(3))
        # --- flux reference: the most the voltage allows for this torque, then the loop --
        w_e_est = p * w_m
        # planned for no less than the rated power's torque (rated torque up to base
        # speed): a step to full torque then finds the voltage there, not a flux to lower
        reserve = self.cfg.rated_power_w / max(abs(w_m), self.w_base_mech)
        planned = math.copysign(max(abs(torque_per_motor), reserve), torque_per_motor)
        psi_ff = self.flux_for(planned, w_e_est, MARGIN * u_plan)
        self.psi_ref = max(psi_ff + self.dpsi, 0.1 * self.psi_rated)
        sigma_ls = self._machine(self.psi_ref)[3]
        i_d_ref = self.curve.current(self.psi_ref)
        # --- measured current in the field frame (the angle at the sample instant) -------
        theta = p * rotor_angle_rad + self.theta_slip
        # the measured current less what the core-loss branches draw (u / R_c at the
        # voltage that acted up to the sample): iron-loss compensation, or the field
        # orientation takes that current for torque current and falls short
        i_s = (space_vector(phase_currents) / self.n
               - self.u_before / self.cfg.core_loss_resistance_ohm)
        lm_now, lr_now, _, sigma_now, tau_now = self._machine(self.psi_r)
        rp_now = self.rs + self.rr * (lm_now / lr_now) ** 2
        # the board's acquisition shows the current as it was a little earlier: a
        # first-order filter tau_f follows a current that is locally a ramp at tau_f behind
        # it (y = i - tau_f di/dt), and a sample taken t_a before the exchange is t_a
        # behind; the model's di/dt at the sample, sigma L_s di/dt = u - R' i - e, puts it
        # back (common practice of drive firmware: the acquisition delay is compensated;
        # a 20 us lag at 140 Hz moves the torque at the voltage limit by percents)
        lead = self.cfg.current_filter_s + self.cfg.current_sample_age_s
        if lead > 0.0:
            emf = lm_now / lr_now * complex(-1.0 / tau_now, p * w_m) * self.psi_r
            u_acted = self.u_before - self.du * cmath.exp(1j * theta)
            i_s += lead * (u_acted - rp_now * i_s - emf * cmath.exp(1j * theta)) / sigma_now
        i_dq = i_s * cmath.exp(-1j * theta)
        self.i_d, self.i_q = i_dq.real, i_dq.imag
        # the voltage the model misses, from how far the current is from its prediction:
        # a disturbance observer in the field frame (dead time and drops turn with it)
        if self.i_expected is not None:
            b_now = (1.0 - math.exp(-T * rp_now / sigma_now)) / rp_now
            miss = (self.i_expected - i_s) * cmath.exp(-1j * theta) / b_now
            self.du += OBSERVER_GAIN * miss
            cap = 0.1 * u_lim
            if abs(self.du) > cap:
                self.du *= cap / abs(self.du)
        # the flux follows the period's mean d current, not the sample's: the mean the
        # model gave for the period that has just ended, corrected by half of how far the
        # sample ended from its prediction (an error that grows through the period shows
        # at its end and half of it in its mean), so the model stays on the measurement
        if self.prev_mean is not None:
            mean_s = self.prev_mean + 0.5 * (i_s - self.i_expected)
            mean_dq = mean_s * cmath.exp(-1j * self.prev_theta) / self.prev_turn
        else:
            mean_dq = i_dq
        i_d_mean = mean_dq.real
        # rotor d circuit, 0 = R_r i_rd + dpsi_r/dt with i_rd = i_m - i_d: the flux moves
        # with the difference between the d current and the magnetising current its
        # present level takes on the curve (L_m/L_r for the rotor leakage). In saturation
        # a large i_d builds the flux faster than psi(i_d) / tau_r would say: the
        # magnetising current, not i_d, sets L_m while the flux is still low.
        self.psi_r = max(self.psi_r + T * self.rr * lm_now / lr_now
                         * (i_d_mean - self.curve.current(self.psi_r)), 0.0)
        psi = max(self.psi_r, 0.05 * self.psi_rated)
        # the d current the curve gives for the flux reference, plus a forcing on the
        # model's flux error: the flux gets there faster than its rotor time constant
        flux_error = self.psi_ref - self.psi_r
        i_d_ref = min(max(i_d_ref + FLUX_KP * flux_error / lm_now, 0.0), 0.8 * self.i_max)
        k_t = 1.5 * p * lm_now / lr_now * psi  # N m per A of i_q
        self.torque_estimate = k_t * mean_dq.imag  # over the period just ended
        # --- torque and its limits: current, and the voltage left beside the flux's -------
        i_q_cur = math.sqrt(max(self.i_max**2 - i_d_ref**2, 0.0))
        lo, hi = self._i_q_window(i_d_ref, psi * lm_now / lr_now, w_e_est, sigma_ls,
                                  MARGIN * u_plan)
        lo, hi = max(lo, -i_q_cur), min(hi, i_q_cur)
        self.torque_limit = k_t * (hi if torque_per_motor >= 0 else -lo)
        i_q_ref = min(max(torque_per_motor / k_t, lo), hi)
        # --- slip and field angle over the next two periods ------------------------------
        w_slip = lm_now * i_q_ref / (tau_now * psi)
        w_e = p * w_m + w_slip
        self.w_e = w_e
        e0 = lm_now / lr_now * complex(-1.0 / tau_now, p * w_m) * psi
        rp = self.rs + self.rr * (lm_now / lr_now) ** 2  # R', the transient resistance
        # predicted current at t_(k+1) under the voltage already sent (the inverter applies
        # what was sent less the observed voltage error)
        u_acting = self.u_sent - self.du * cmath.exp(1j * (theta + 0.5 * w_e * T))
        i_next, mean_now = self._interval(i_s, u_acting, e0 * cmath.exp(1j * theta), w_e, rp,
                                          sigma_ls)
        theta_next = theta + w_e * T
        # the current at t_(k+2) steps a share LAMBDA of the way from the one at t_(k+1)
        # to the reference, shifted by how far a period's mean lies from its end current
        # at this operating point (the voltage is held while the field turns: at a few
        # samples per electrical period the two differ by tens of amperes, and the torque
        # and the flux follow the mean)
        turn = _mean_turn(w_e * T)  # a field-frame vector's mean over the period, turned
        ref = complex(i_d_ref, i_q_ref)
        next_dq = i_next * cmath.exp(-1j * theta_next)
        offset_now = mean_now / (cmath.exp(1j * theta) * turn) - next_dq
        self.mean_offset += (offset_now - self.mean_offset) * OFFSET_SHARE
        goal_dq = next_dq + LAMBDA * (ref - self.mean_offset - next_dq)
        e_next = e0 * cmath.exp(1j * theta_next)
        end_free, _ = self._interval(i_next, 0j, e_next, w_e, rp, sigma_ls)
        a = math.exp(-T * rp / sigma_ls)
        # u = gain goal_dq + offset: affine in the goal, so a limit can be met on its q part
        gain = cmath.exp(1j * (theta_next + w_e * T)) * rp / (1.0 - a)
        offset = (-end_free * rp / (1.0 - a)
                  + self.du * cmath.exp(1j * (theta_next + 0.5 * w_e * T)))
        u = gain * goal_dq + offset
        # --- voltage limit, field-weakening loop, anti-windup ----------------------------
        mag = abs(u)
        self.modulation = mag / u_lim
        excess = mag / (MARGIN * u_plan) - 1.0
        # the loop lowers the flux further while the voltage asked for passes the margin
        # (what the steady-state feed-forward missed) and gives it back when there is
        # room; it waits while the flux is still on its way (tau_r), or it would wind up
        settling = abs(self.psi_r - self.psi_ref) > 0.05 * self.psi_rated
        if not settling or excess < 0:
            self.dpsi = min(0.0, self.dpsi - FW_GAIN * T * excess * self.psi_rated)
        self.dpsi = max(self.dpsi, -0.5 * self.psi_rated)
        self.limited = mag > u_lim
        if self.limited:
            # the flux first: keep the d goal and take from the q goal (the torque) what
            # the voltage cannot carry; only if that is not enough, scale the whole vector
            u = _fit_q(gain, offset, goal_dq, u_lim)
        # what the voltage under way makes of the current by the next sample and over the
        # period: for the observer and the flux model at the next sample
        self.i_expected = i_next
        self.prev_mean, self.prev_theta, self.prev_turn = mean_now, theta, turn
        self.u_before = self.u_sent
        self.u_sent = u
        self.theta_slip += w_slip * T
        # --- duties: the stator-frame vector held over the period (the dead time is the
        # observer's: a feed-forward by the current's sign made the steps overshoot more)
        return duties(u, u_dc)
