"""Scalar (V/f) motor control of one inverter and its parallel motors.

Torque is set by the slip at a held main (air-gap) flux, the stator voltage and frequency
following from the steady-state equivalent circuit (T form, amplitude-invariant peak
vectors; Bose, *Modern Power Electronics and AC Drives*, 2002, ch. 8, slip-regulated
scalar control with stator-drop compensation; Fitzgerald, Kingsley & Umans, ch. 6):

    E_m = j w_s psi_m,  I_r = j psi_m w_sl / (R_r + j w_sl L_lr),  I_s = psi_m / L_m + I_r,
    U_s = (R_s + j w_s L_ls) I_s + E_m = psi_m G(w_sl),
    T = 3/2 p psi_m^2 w_sl R_r / (R_r^2 + (w_sl L_lr)^2),

w_s = p w_m + w_sl. The I R (and leakage) compensation is the whole stator branch, so the
flux holds at low frequency and in braking, where a fixed boost over- or under-fluxes.
Where U_s would pass the voltage the link gives, psi_m = U / |G(w_sl)| (field weakening:
the torque at a slip falls as (U / w_s)^2) and the slip for the torque is found on that
curve. The slip is limited to 0.9 of the breakdown slip of the circuit at that voltage
(Kloss: T / T_k = 2 / (s / s_k + s_k / s), 99 % of the breakdown torque there) and by the
inverter current limit. L_m is the secant of the magnetising curve at the flux.

Slip regulation is angle-based: the stator angle is the counted rotor angle (times p)
plus the integrated slip, so the slip is what the torque needs whatever the lag and
quantisation of the speed reading. The inverter's dead time is compensated by the sign of
each phase current (``modulation.duties``), so the voltage the circuit asks for is what the motor
gets at low frequency.

Modulation and dead-time compensation: ``modulation.duties``. Delay compensation: the
angle is advanced to the middle of the period in which the command acts (1.5 T).

``f_command_hz``: classic V/f with a boost, a frequency command instead of a torque
command (and optional slip compensation from the estimated air-gap power), for the
speed-regulation check.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from . import slip_circuit as sc
from .config import ControllerConfig
from .flux_curve import MagnetisingCurve
from .modulation import duties, space_vector

VOLTAGE_MARGIN = 0.97  # of U_dc / sqrt(3): what the plan uses (ripple, dead time)
SLIP_LIMIT_SHARE = 0.9  # of the breakdown slip: 99 % of the breakdown torque (Kloss)
CURRENT_LIMIT_FACTOR = 2.2  # peak current per motor, of the rated peak (inverter limit)
BISECTIONS = 16
BREAKDOWN_EVERY = 16  # periods between searches for the breakdown slip
FLUX_TRIM_S = 0.2  # time constant of the voltage trim that holds the flux on the current's
FLUX_TRIM_RANGE = 0.15  # the most the trim may change the voltage, of the circuit's
TRIM_UP_TO = 0.5  # of the rated frequency
LINK_FILTER_S = 0.02  # the link voltage the plan uses: its mean over the 2f ripple


class ScalarControl:
    """V/f with slip regulation and stator-drop compensation for one inverter."""

    def __init__(self, cfg: ControllerConfig, n_motors: int) -> None:
        self.cfg = cfg
        self.n_motors = n_motors
        self.T = cfg.period_s
        self.p = cfg.pole_pairs
        self.rs, self.rr = cfg.stator_resistance_ohm, cfg.rotor_resistance_ohm
        self.lls, self.llr = cfg.stator_leakage_h, cfg.rotor_leakage_h
        self.curve = MagnetisingCurve(cfg.magnetising_h, cfg.saturation_current_a,
                                      cfg.saturation_flux_vs)
        self.theta = 0.0
        self.theta_slip = 0.0  # angle-based slip regulation: the integrated slip, rad
        self.f_s = 0.0
        self.u_peak_rated = cfg.rated_voltage_v * math.sqrt(2 / 3)
        self.volts_per_hz = self.u_peak_rated / cfg.rated_frequency_hz
        i_rated = cfg.rated_power_w / (math.sqrt(3) * cfg.rated_voltage_v * 0.87)
        self.boost_v = math.sqrt(2) * cfg.stator_resistance_ohm * i_rated * 1.2
        self.i_max = CURRENT_LIMIT_FACTOR * math.sqrt(2) * i_rated
        self.sign_band_a = 0.05 * math.sqrt(2) * i_rated * n_motors  # 5 % of rated
        self.f_slip_rated = cfg.rated_slip * cfg.rated_frequency_hz
        self.psi_rated = self._rated_main_flux()
        self.circuit = np.array([self.rs, self.rr, self.lls, self.llr, float(self.p),
                                 self.psi_rated])  # slip_circuit's constants
        self.w_breakdown = [0.0, 0.0]  # motoring, generating: signed, rad/s
        self.breakdown_age = [0, 0]  # periods until each is found anew
        self.breakdown_key = 0  # the direction searched last
        self.psi_m = self.psi_rated
        self.w_slip = 0.0
        self.u_trim = 1.0
        self._i_prev: complex | None = None  # the last sample's current, per motor
        # what each command carried (voltage, stator frequency Hz, slip rad/s, main flux),
        # for the period just measured (sent two steps back) and the one after it
        self._history = ((0j, 0.0, 0.0, self.psi_rated),) * 2
        self.u_d_mean = 0.0
        self.u_vec = 0j
        self.torque_estimate = 0.0
        self._slip_torque = 0.0  # classic V/f's slip compensation: its filtered torque
        self.torque_limit = 0.0

    def _rated_main_flux(self) -> float:
        """The main flux at no load with the rated voltage and frequency, V s:
        U = w (psi_m + L_ls i_m(psi_m)), solved by bisection on the curve."""
        w = 2 * math.pi * self.cfg.rated_frequency_hz
        lo, hi = 0.0, self.u_peak_rated / w
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            u = w * (mid + self.lls * self.curve.current(mid))
            lo, hi = (mid, hi) if u < self.u_peak_rated else (lo, mid)
        return lo

    # --- the steady-state circuit, per motor, at the secant L_m of the present flux -----
    # (compiled: slip_circuit.py)
    def _branches(self, w_sl: float, lm: float) -> tuple[complex, float]:
        """(I_s / psi_m, T / psi_m^2) at a slip frequency (rad/s)."""
        return sc.branches(self.circuit, w_sl, lm)

    def operating_point(self, w_sl: float, w_r: float, u_room: float,
                        lm: float) -> tuple[float, float, float, complex]:
        """(torque N m, stator current A peak, main flux V s, stator voltage V) at a slip
        with the rotor at electrical speed w_r and u_room the voltage there is."""
        return sc.operating_point(self.circuit, w_sl, w_r, u_room, lm)

    def breakdown_slip(self, sign: float, w_r: float, u_room: float, lm: float) -> float:
        """The slip frequency of the largest torque (rad/s, signed) at this voltage and
        speed (golden-section search, slip_circuit.breakdown_slip)."""
        return sc.breakdown_slip(self.circuit, sign, w_r, u_room, lm, BISECTIONS)

    def slip_for(self, torque: float, w_r: float, u_room: float) -> float:
        """The slip frequency (rad/s) that gives the torque per motor, within the slip
        and current limits (the torque there otherwise); sets torque_limit. The slip
        limit is a share of the breakdown slip, found anew every BREAKDOWN_EVERY periods
        (it moves with the speed and the voltage, slowly beside a period)."""
        lm = self.curve.lm(self.psi_m)
        sign = 1.0 if torque >= 0 else -1.0
        key = 0 if sign > 0 else 1
        if key != self.breakdown_key:  # the other direction's cap is from another time
            self.breakdown_age[key] = 0
            self.breakdown_key = key
        if self.breakdown_age[key] <= 0:
            self.w_breakdown[key] = self.breakdown_slip(sign, w_r, u_room, lm)
            self.breakdown_age[key] = BREAKDOWN_EVERY
        self.breakdown_age[key] -= 1
        cap = SLIP_LIMIT_SHARE * self.w_breakdown[key]
        t_cap, i_cap, _, _ = self.operating_point(cap, w_r, u_room, lm)
        if i_cap > self.i_max:  # the current limit comes first: its slip
            cap = sc.slip_for_current(self.circuit, self.i_max, cap, w_r, u_room, lm,
                                      BISECTIONS)
            t_cap = self.operating_point(cap, w_r, u_room, lm)[0]
        self.torque_limit = abs(t_cap)
        if abs(torque) >= abs(t_cap):
            return cap
        return sc.slip_for_torque(self.circuit, abs(torque), cap, w_r, u_room, lm,
                                  BISECTIONS)

    def _low_frequency_weight(self, f_hz: float) -> float:
        """1 at standstill falling to 0 at TRIM_UP_TO of the rated frequency: how much the
        measured current's magnitude is trusted over the voltage (whose errors weigh at
        low frequency)."""
        return max(1.0 - abs(f_hz) / (TRIM_UP_TO * self.cfg.rated_frequency_hz), 0.0)

    def _trim(self, phase_currents, weight: float) -> None:
        """Hold the flux the circuit planned by the current it draws: the voltage is
        trimmed by the ratio of the planned flux to the one the measured current gives
        at the slip applied (|I_s| = psi_m |I_s / psi_m|), which no voltage error (dead
        time left over, device drops, R_s warm) biases."""
        i = abs(space_vector(phase_currents)) / self.n_motors
        _, _, slip_held, psi_held = self._history[0]  # what the sampled current answers
        y, _ = self._branches(slip_held, self.curve.lm(psi_held))
        psi_seen = i / abs(y)
        if psi_seen <= 0.2 * psi_held:
            return
        self.u_trim += weight * self.T / FLUX_TRIM_S * (psi_held / psi_seen - 1.0)
        self.u_trim = min(max(self.u_trim, 1.0 - FLUX_TRIM_RANGE), 1.0 + FLUX_TRIM_RANGE)

    def estimated_torque(self, phase_currents: tuple[float, float, float]) -> float:
        """Torque per motor over the period that has just ended, from the measured
        currents and the voltage held in it, N m (call once a period, before step).

        Air-gap power P = 3/2 Re(u i_mean*) - 3/2 R_s |i_mean|^2 (amplitude-invariant
        vectors), T = p P / w_s (Bose 2002, torque from the air-gap power). The voltage is
        the vector held over the period (computed two periods ago: the one-period command
        delay), with the dead time compensated; the period's mean current is the mean of
        its end samples, corrected for a vector turning by 2x within it (the trapezoid
        gives cos x of the fundamental, the mean sin(x)/x). Below half the rated frequency
        the current's magnitude at the slip applied is blended in. Low-pass 10 ms.
        """
        i = space_vector(phase_currents) / self.n_motors
        i_prev, self._i_prev = self._i_prev, i
        u_held, f_held, slip_held, psi_held = self._history[0]
        w_s = 2 * math.pi * f_held
        if i_prev is None or abs(w_s) < 1.0:
            return self.torque_estimate
        x = 0.5 * w_s * self.T
        mean = 0.5 * (i + i_prev) * (math.tan(x) / x if abs(x) > 1e-6 else 1.0)
        p_air = 1.5 * ((u_held * mean.conjugate()).real - self.rs * abs(mean) ** 2)
        t_now = self.p * p_air / w_s
        # at low frequency the voltage's own error (what the dead-time compensation
        # leaves) weighs: there the current's magnitude at the slip applied says more
        # (psi_m = |I_s| / |I_s / psi_m|, then T(psi_m)), blended in below half rated
        weight = self._low_frequency_weight(f_held)
        if weight > 0.0:
            y, t_per_psi2 = self._branches(slip_held, self.curve.lm(psi_held))
            psi = abs(mean) / abs(y)
            t_now = weight * t_per_psi2 * psi * psi + (1.0 - weight) * t_now
        self.torque_estimate += (t_now - self.torque_estimate) * min(self.T / 0.01, 1.0)
        return self.torque_estimate

    def airgap_torque(self, phase_currents: tuple[float, float, float]) -> float:
        """Torque per motor from the air-gap power of the voltage held in the period the
        sample ends (classic V/f's slip compensation), N m.

        P_airgap = 3/2 Re(u i*) - 3/2 R_s |i|^2 (amplitude-invariant vectors), T = P / w_s
        with w_s the synchronous mechanical speed (Bose 2002, slip compensation).
        """
        i = space_vector(phase_currents) / self.n_motors
        u_held, f_held, _, _ = self._history[0]
        p_air = 1.5 * ((u_held * i.conjugate()).real
                       - self.cfg.stator_resistance_ohm * abs(i) ** 2)
        w_sync = 2 * math.pi * f_held / self.cfg.pole_pairs
        return p_air / w_sync if abs(w_sync) > 1.0 else 0.0

    def step(self, torque_per_motor: float, rotor_speed_rad_s: float, u_d: float,
             f_command_hz: float | None = None,
             phase_currents: tuple[float, float, float] | None = None,
             rotor_angle_rad: float | None = None) -> tuple[list[float], float]:
        """Duties for this period and the stator frequency used, Hz.

        With f_command_hz, classic V/f with a boost; given phase_currents too, the
        estimated slip is added to the command (slip compensation). Otherwise torque
        control by the circuit, with rotor_angle_rad (the counted mechanical angle) for
        angle-based slip regulation and phase_currents for the dead-time compensation.
        """
        cfg = self.cfg
        u_max = u_d / math.sqrt(3)
        w_r = self.p * rotor_speed_rad_s
        f_rotor = w_r / (2 * math.pi)
        if f_command_hz is None:
            # the plan takes the link's mean (no more than nominal): the duty follows the
            # ripple each period, so the voltage planned is what the motor gets while the
            # trough leaves the margin
            if self.u_d_mean == 0.0:
                self.u_d_mean = u_d
            self.u_d_mean += (u_d - self.u_d_mean) * min(self.T / LINK_FILTER_S, 1.0)
            # a vector held over a period while the field turns by w_s T has a fundamental
            # of sin(x) / x of it, x = w_s T / 2 (the mean of e^(j w t) over the period):
            # the circuit is planned on what the motor gets, the command is raised by it
            x = 0.5 * abs(w_r + self.w_slip) * self.T
            hold = math.sin(x) / x if x > 1e-6 else 1.0
            u_room = hold * min(VOLTAGE_MARGIN * min(self.u_d_mean, cfg.link_nominal_v),
                                u_d) / math.sqrt(3)
            self.w_slip = self.slip_for(torque_per_motor, w_r, u_room)
            _, _, psi, u_s = self.operating_point(self.w_slip, w_r, u_room,
                                                  self.curve.lm(self.psi_m))
            f_s = f_rotor + self.w_slip / (2 * math.pi)
            # the trim acts at low frequency, where the voltage errors weigh; none from
            # half the rated frequency up (the sampled current's own error takes over)
            weight = self._low_frequency_weight(f_s)
            if phase_currents is not None and weight > 0.0:
                self._trim(phase_currents, weight)
            self.psi_m = psi
            u = abs(u_s) * (1.0 + weight * (self.u_trim - 1.0)) / hold
            lead = cmath.phase(u_s) if u > 0 else 0.0  # the voltage leads the flux's axis
        else:
            f_s = f_command_hz
            if phase_currents is not None and self.f_s:
                # slip compensation: the estimated torque, low-pass filtered (50 ms)
                t_est = self.airgap_torque(phase_currents)
                self._slip_torque += (t_est - self._slip_torque) * self.T / 0.05
                f_s += self.slip_for_torque(self._slip_torque, f_s)
            u = min(self.boost_v + self.volts_per_hz * abs(f_s), u_max)
            lead = 0.0
        if rotor_angle_rad is not None and f_command_hz is None:
            self.theta_slip = (self.theta_slip + self.w_slip * self.T) % (2 * math.pi)
            self.theta = (self.p * rotor_angle_rad + self.theta_slip) % (2 * math.pi)
        else:
            self.theta = (self.theta + 2 * math.pi * f_s * self.T) % (2 * math.pi)
        self.f_s = f_s
        u = min(u, u_max)
        angle = self.theta + lead + 2 * math.pi * f_s * 1.5 * self.T  # acts t+T to t+2T
        self.u_vec = cmath.rect(u, angle)
        self._history = (self._history[1], (self.u_vec, f_s, self.w_slip, self.psi_m))
        current = None
        if phase_currents is not None and f_command_hz is None:
            # the current turned on to the middle of the acting period
            current = (space_vector(phase_currents)
                       * cmath.exp(1j * 2 * math.pi * f_s * 1.5 * self.T))
        return duties(self.u_vec, u_d, current=current, dead_time_s=cfg.dead_time_s,
                      switching_frequency_hz=cfg.switching_frequency_hz,
                      sign_band_a=self.sign_band_a), f_s

    def slip_for_torque(self, torque_per_motor: float, f_s_estimate: float) -> float:
        """Slip frequency for a torque in classic V/f, Hz (linear region, 1/f flux above
        the base frequency)."""
        f_slip = torque_per_motor / self.cfg.rated_torque_nm * self.f_slip_rated
        ratio = abs(f_s_estimate) / self.cfg.rated_frequency_hz
        return f_slip * max(ratio, 1.0) ** 2
