"""Indirect rotor-flux-oriented (field-oriented) control of one inverter's motors.

Rotor-flux orientation (Novotny & Lipo, *Vector Control and Dynamics of AC Drives*, 1996,
ch. 5 and 6; Blaschke's field orientation, indirect form after Hasse):

    psi_r* = L_m i_d*                       flux set by the d current (steady state)
    T = 3/2 p (L_m / L_r) psi_r i_q         torque by the q current
    omega_slip = (L_m / tau_r) i_q / psi_r,  tau_r = L_r / R_r
    theta_e = integral (p omega_m + omega_slip) dt

Current control in the rotating frame by PI with decoupling of the cross terms and the
back-EMF, u_d = R i_d - omega_e sigma L_s i_q, u_q = R i_q + omega_e sigma L_s i_d + omega_e
(L_m/L_r) psi_r (+ the PI outputs); sigma = 1 - L_m^2/(L_s L_r). Tuning by pole-zero
cancellation of the stator transient time constant sigma L_s / R_s, crossover at about
1/(3T) to leave margin for the period of computation and the half period of hold
(Buso & Mattavelli, digital control delay, from memory). The voltage is rotated forward
by 1.5 periods of rotation (it acts from t + T to t + 2T); the motors of one inverter share
one current (the measured sum divided by their number).

Field weakening: above the base speed the flux falls as base/speed, and the voltage
vector is clipped to the inverter's limit U_dc/sqrt(3).
"""

from __future__ import annotations

import cmath
import math

from .config import ControllerConfig
from .motor_scalar import TWO_PI_3


class VectorControl:
    """Indirect RFOC with dq current control for one inverter."""

    def __init__(self, cfg: ControllerConfig, n_motors: int, crossover_periods: float = 3.0
                 ) -> None:
        self.cfg = cfg
        self.n = n_motors
        self.T = cfg.period_s
        lm, llr = cfg.magnetising_h, cfg.rotor_leakage_h
        self.lm = lm
        self.lr = lm + llr
        self.ls = lm + cfg.stator_leakage_h
        self.sigma_ls = self.ls - lm * lm / self.lr
        self.rs = cfg.stator_resistance_ohm
        self.tau_r = self.lr / cfg.rotor_resistance_ohm
        w_base = 2 * math.pi * cfg.rated_frequency_hz
        self.psi_rated = cfg.rated_voltage_v * math.sqrt(2 / 3) / w_base * 0.97
        self.w_base_mech = w_base / cfg.pole_pairs * (1 - cfg.rated_slip)
        wc = 1.0 / (crossover_periods * self.T)
        self.kp = wc * self.sigma_ls
        self.ki = self.kp * self.rs / self.sigma_ls
        self.theta = 0.0
        self.int_d = 0.0
        self.int_q = 0.0
        self.psi_r = 0.0  # model of the rotor flux (first order from i_d)
        self.i_d = 0.0
        self.i_q = 0.0

    def reset(self) -> None:
        """Forget integrators and the flux model (gates were blocked)."""
        self.int_d = self.int_q = 0.0
        self.psi_r = 0.0

    def step(self, torque_per_motor: float, rotor_speed_rad_s: float, u_d: float,
             phase_currents: tuple[float, float, float]) -> list[float]:
        """Duties for this period."""
        cfg, T = self.cfg, self.T
        p = cfg.pole_pairs
        # flux reference with field weakening above base speed
        w_m = abs(rotor_speed_rad_s)
        psi_ref = self.psi_rated * min(1.0, self.w_base_mech / max(w_m, 1e-3))
        i_d_ref = psi_ref / self.lm
        psi = max(self.psi_r, 0.05 * self.psi_rated)
        i_q_ref = torque_per_motor / (1.5 * p * self.lm / self.lr * psi)
        # measured current of one motor in the rotating frame (at the sample instant)
        ia, ib, ic = phase_currents
        i_ab = complex((2 * ia - ib - ic) / 3, (ib - ic) / math.sqrt(3)) / self.n
        i_dq = i_ab * cmath.exp(-1j * self.theta)
        self.i_d, self.i_q = i_dq.real, i_dq.imag
        # rotor flux model and slip, tau_r dpsi/dt = L_m i_d - psi (exact for held i_d)
        self.psi_r = self.lm * self.i_d + (self.psi_r - self.lm * self.i_d) * math.exp(
            -T / self.tau_r)
        w_slip = self.lm / self.tau_r * i_q_ref / psi
        w_e = p * rotor_speed_rad_s + w_slip
        # PI current control with decoupling
        e_d, e_q = i_d_ref - self.i_d, i_q_ref - self.i_q
        u_dc_lim = u_d / math.sqrt(3)
        v_d = self.kp * e_d + self.int_d + self.rs * i_d_ref - w_e * self.sigma_ls * i_q_ref
        v_q = (self.kp * e_q + self.int_q + self.rs * i_q_ref + w_e * self.sigma_ls * i_d_ref
               + w_e * self.lm / self.lr * self.psi_r)
        mag = math.hypot(v_d, v_q)
        if mag > u_dc_lim:  # clip; integrate only when not saturated (anti-windup)
            v_d, v_q = v_d * u_dc_lim / mag, v_q * u_dc_lim / mag
        else:
            self.int_d += self.ki * e_d * T
            self.int_q += self.ki * e_q * T
        # the command acts from t + T to t + 2T: rotate to the middle of that interval
        angle = self.theta + w_e * 1.5 * T
        self.theta = (self.theta + w_e * T) % (2 * math.pi)
        u = complex(v_d, v_q) * cmath.exp(1j * angle)
        mag_u, ang_u = abs(u), cmath.phase(u)
        v = [mag_u * math.cos(ang_u - x * TWO_PI_3) for x in range(3)]
        v_cm = -0.5 * (max(v) + min(v))
        return [min(max(0.5 + (vx + v_cm) / max(u_d, 1.0), 0.0), 1.0) for vx in v]
