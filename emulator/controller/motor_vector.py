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

The period runs compiled (``vector_kernel.py``, which holds the gains); this class holds
the configuration and names the state.
"""

from __future__ import annotations

import math

import numpy as np

from . import vector_kernel as vk
from .config import ControllerConfig
from .flux_curve import MagnetisingCurve
from .state_slots import slot

CURRENT_LIMIT_FACTOR = 2.2  # peak current per motor, of the rated peak (inverter limit)


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
        k = np.zeros(vk.N_CONSTS)
        k[vk.K_T], k[vk.K_P], k[vk.K_RS], k[vk.K_RR] = self.T, self.p, self.rs, self.rr
        k[vk.K_LLS], k[vk.K_LLR] = cfg.stator_leakage_h, cfg.rotor_leakage_h
        k[vk.K_PSI_RATED], k[vk.K_W_BASE_MECH] = self.psi_rated, self.w_base_mech
        k[vk.K_I_MAX], k[vk.K_LINK_NOMINAL] = self.i_max, cfg.link_nominal_v
        k[vk.K_RATED_POWER], k[vk.K_CORE_LOSS_R] = (cfg.rated_power_w,
                                                    cfg.core_loss_resistance_ohm)
        # the board's acquisition lag the control puts back: filter and sample age
        k[vk.K_LEAD] = cfg.current_filter_s + cfg.current_sample_age_s
        k[vk.K_N_MOTORS] = n_motors
        self.consts = k  # the compiled step's constants (vector_kernel.K_*)
        self.state = np.zeros(vk.N_STATE)  # its state (vector_kernel.V_*)
        self.reset()

    psi_r = slot(vk.V_PSI_R, "the flux model's rotor flux, V s")
    psi_ref = slot(vk.V_PSI_REF, "rotor flux reference, V s")
    i_d = slot(vk.V_I_D, "measured d current (field frame), A")
    i_q = slot(vk.V_I_Q, "measured q current (field frame), A")
    torque_estimate = slot(vk.V_TORQUE_ESTIMATE, "torque per motor over the period "
                             "just ended, N m")
    torque_limit = slot(vk.V_TORQUE_LIMIT, "the most torque per motor there is now, N m")
    w_e = slot(vk.V_W_E, "the stator's electrical frequency, rad/s")
    modulation = slot(vk.V_MODULATION, "voltage asked for, of U_dc / sqrt 3")
    dpsi = slot(vk.V_DPSI, "the field-weakening loop's flux reduction, V s (<= 0)")

    @property
    def limited(self) -> bool:
        """Whether the voltage asked for passed the limit (the q goal was cut)."""
        return self.state[vk.V_LIMITED] > 0.5

    def reset(self) -> None:
        """Forget the flux model, integrators and the voltage in flight (at the start)."""
        self.state[:] = 0.0
        self.state[vk.V_PREV_TURN_RE] = 1.0

    def coast(self) -> None:
        """A period with the gates blocked: forget the integrators and the voltage in
        flight; the flux model decays with the rotor (vector_kernel.coast)."""
        vk.coast(self.state, self.consts, self.curve.i, self.curve.psi)

    def flux_for(self, torque: float, w_e: float, u_room: float) -> float:
        """The largest rotor flux, at most rated, at which the steady state of this torque
        needs no more voltage than u_room (vector_kernel.flux_for)."""
        return vk.flux_for(self.consts, self.curve.i, self.curve.psi, torque, w_e, u_room)

    def step(self, torque_per_motor: float, rotor_angle_rad: float, rotor_speed_rad_s: float,
             u_dc: float, phase_currents: tuple[float, float, float]) -> list[float]:
        """Duties for the period that starts one period from now.

        rotor_angle_rad: the counted mechanical angle (mean of the inverter's motors);
        rotor_speed_rad_s: their windowed speed; u_dc: the link voltage now.
        """
        ia, ib, ic = phase_currents
        return list(vk.vector_step(self.state, self.consts, self.curve.i, self.curve.psi,
                                   torque_per_motor, rotor_angle_rad, rotor_speed_rad_s,
                                   u_dc, ia, ib, ic))
