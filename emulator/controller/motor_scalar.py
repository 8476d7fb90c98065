"""Scalar (V/f) motor control of one inverter and its parallel motors.

Torque is set by the slip frequency at (near) rated flux: the stator frequency is the
measured rotor frequency plus the slip that gives the torque, f_s = p n + f_slip(T), and
the voltage follows V/f with a low-speed boost (Bose, *Modern Power Electronics and AC
Drives*, 2002, ch. 8, slip-regulated scalar control; Mohan, *Advanced Electric Drives*,
from memory). Above the base frequency the voltage is at its limit and the flux falls
as 1/f: the slip for a torque grows as (f_s / f_base)^2 (constant-power region).

Modulation: space-vector equivalent by min-max zero-sequence injection, voltage up to
U_dc / sqrt(3) per phase; the duty is computed with the measured link voltage each period,
which also compensates the DC-link 2f ripple (beat suppression). Delay compensation:
the angle is advanced to the middle of the period in which the command acts (1.5 T).

``speed_mode``: classic V/f with a frequency command instead of a torque command (and
optional slip compensation from the estimated air-gap power), for the speed-regulation
check.
"""

from __future__ import annotations

import math

from .config import ControllerConfig

TWO_PI_3 = 2 * math.pi / 3


class ScalarControl:
    """V/f with slip regulation for one inverter."""

    def __init__(self, cfg: ControllerConfig, n_motors: int) -> None:
        self.cfg = cfg
        self.n_motors = n_motors
        self.T = cfg.period_s
        self.theta = 0.0
        self.theta_slip = 0.0  # angle-based slip regulation: the integrated slip, rad
        self.f_s = 0.0
        self.u_peak_rated = cfg.rated_voltage_v * math.sqrt(2 / 3)
        self.volts_per_hz = self.u_peak_rated / cfg.rated_frequency_hz
        i_rated = cfg.rated_power_w / (math.sqrt(3) * cfg.rated_voltage_v * 0.87)
        self.boost_v = math.sqrt(2) * cfg.stator_resistance_ohm * i_rated * 1.2
        self.f_slip_rated = cfg.rated_slip * cfg.rated_frequency_hz
        self.u_vec = 0j
        self.u_last = 0.0
        self.torque_estimate = 0.0

    def slip_for_torque(self, torque_per_motor: float, f_s_estimate: float) -> float:
        """Slip frequency for a torque, Hz (linear region, flux-weakening corrected)."""
        f_slip = torque_per_motor / self.cfg.rated_torque_nm * self.f_slip_rated
        ratio = abs(f_s_estimate) / self.cfg.rated_frequency_hz
        return f_slip * max(ratio, 1.0) ** 2

    def estimated_torque(self, phase_currents: tuple[float, float, float]) -> float:
        """Torque per motor from the air-gap power of the last applied voltage, N m.

        P_airgap = 3/2 Re(u i*) - 3/2 R_s |i|^2 (amplitude-invariant vectors), T = P / w_s
        with w_s the synchronous mechanical speed (Bose 2002, slip compensation).
        """
        ia, ib, ic = phase_currents
        i = complex((2 * ia - ib - ic) / 3, (ib - ic) / math.sqrt(3)) / self.n_motors
        p_air = 1.5 * ((self.u_vec * i.conjugate()).real
                       - self.cfg.stator_resistance_ohm * abs(i) ** 2)
        w_sync = 2 * math.pi * self.f_s / self.cfg.pole_pairs
        return p_air / w_sync if abs(w_sync) > 1.0 else 0.0

    def step(self, torque_per_motor: float, rotor_speed_rad_s: float, u_d: float,
             f_command_hz: float | None = None,
             phase_currents: tuple[float, float, float] | None = None,
             rotor_angle_rad: float | None = None) -> tuple[list[float], float]:
        """Duties for this period and the stator frequency used, Hz.

        With f_command_hz, classic V/f; given phase_currents too, the estimated slip is
        added to the command (slip compensation). With rotor_angle_rad (the counted
        mechanical angle), slip regulation is angle-based: the stator angle is the rotor's
        electrical angle plus the integrated slip, so the slip is what was asked for
        whatever the lag or quantisation of the speed reading.
        """
        cfg = self.cfg
        f_rotor = cfg.pole_pairs * rotor_speed_rad_s / (2 * math.pi)
        if f_command_hz is None:
            f_s = f_rotor + self.slip_for_torque(torque_per_motor, f_rotor)
            f_s = f_rotor + self.slip_for_torque(torque_per_motor, f_s)
        else:
            f_s = f_command_hz
            if phase_currents is not None and self.f_s:
                # slip compensation: the estimated torque, low-pass filtered (50 ms)
                t_est = self.estimated_torque(phase_currents)
                self.torque_estimate += (t_est - self.torque_estimate) * self.T / 0.05
                f_s += self.slip_for_torque(self.torque_estimate, f_s)
        if rotor_angle_rad is not None and f_command_hz is None:
            f_slip = f_s - f_rotor
            self.theta_slip = (self.theta_slip + 2 * math.pi * f_slip * self.T) % (2 * math.pi)
            self.theta = (cfg.pole_pairs * rotor_angle_rad + self.theta_slip) % (2 * math.pi)
        else:
            self.theta = (self.theta + 2 * math.pi * f_s * self.T) % (2 * math.pi)
        self.f_s = f_s
        u_max = u_d / math.sqrt(3)
        u = min(self.boost_v + self.volts_per_hz * abs(f_s), u_max)
        self.u_last = u
        angle = self.theta + 2 * math.pi * f_s * 1.5 * self.T  # acts from t+T to t+2T
        self.u_vec = complex(u * math.cos(angle), u * math.sin(angle))
        v = [u * math.cos(angle - x * TWO_PI_3) for x in range(3)]
        v_cm = -0.5 * (max(v) + min(v))
        duties = [min(max(0.5 + (vx + v_cm) / max(u_d, 1.0), 0.0), 1.0) for vx in v]
        return duties, f_s
