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

The slip for a torque assumes the model's rotor resistance and the planned flux; a rotor
warmer than the model (R_r up by 0.393 % a kelvin) or a flux a little under the plan
leaves the torque short by as much. From half the rated frequency up, where the air-gap
power of the held voltage and the measured current is a sound torque estimate (Bose
2002, slip compensation), an integral trim on the slip brings the air-gap torque to the
torque asked for (``scalar_kernel.slip_trim``; not at the torque limit, nor with the
trimmed slip held at the slip limit: the breakdown's share, or the current limit's at
low speed). The estimate takes R_s at the stator winding's measured temperature. Below
half the rated frequency the flux trim works from the current's magnitude, on the
circuit with the rotor resistance the slip trim found, and the slip keeps its trim (the
two trims acting together there pulled each other to their limits).

Slip regulation is angle-based: the stator angle is the counted rotor angle (times p)
plus the integrated slip, so the slip is what the torque needs whatever the lag and
quantisation of the speed reading. The inverter's dead time is compensated by the sign of
each phase current (``modulation.duties``), so the voltage the circuit asks for is what the motor
gets at low frequency.

Modulation and dead-time compensation: ``modulation.duties``. Delay compensation: the
angle is advanced to the middle of the period in which the command acts (1.5 T).

The torque mode's period runs compiled (``scalar_kernel.py``, with the circuit and its
searches in ``slip_circuit.py``); this class holds the configuration and names the
state.

``f_command_hz``: classic V/f with a boost, a frequency command instead of a torque
command (and optional slip compensation from the estimated air-gap power), for the
speed-regulation check.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from . import scalar_kernel as sk
from .config import ControllerConfig
from .flux_curve import MagnetisingCurve
from .modulation import duties, space_vector
from .state_slots import slot

VOLTAGE_MARGIN = 0.97  # of U_dc / sqrt(3): what the plan uses (ripple, dead time)
SLIP_LIMIT_SHARE = 0.9  # of the breakdown slip: 99 % of the breakdown torque (Kloss)
CURRENT_LIMIT_FACTOR = 2.2  # peak current per motor, of the rated peak (inverter limit)
BISECTIONS = 16  # the searches' resolution: 2^-16 of their bracket (slip_circuit.py)
BREAKDOWN_EVERY = 16  # periods between searches for the breakdown slip
FLUX_TRIM_S = 0.2  # time constant of the voltage trim that holds the flux on the current's
FLUX_TRIM_RANGE = 0.15  # the most the trim may change the voltage, of the circuit's
TRIM_UP_TO = 0.5  # of the rated frequency
LINK_FILTER_S = 0.02  # the link voltage the plan uses: its mean over the 2f ripple
#: the voltage angle's advance per unit of the link's swing from its mean, rad (the link's
#: damping, scalar_kernel's docstring): chosen on the 15 kV Tern, about the geometric
#: middle of 0.1 (which left a ring braking at 120 km/h) and 1.0 (which tripped)
LINK_DAMPING_RAD = 0.3
SLIP_TRIM_S = 0.5  # the slip trim's integral time: a torque loop, slow beside the period
#: the trim learns while the torque asked moves less than this share of rated a period
#: (the jerk limit's ramp moves it 0.1 %: full effort in 1.5 s)
SLIP_TRIM_STEADY = 0.002
SLIP_TRIM_FROM = 0.5  # of the rated frequency: the slip trim learns from here up
SLIP_TRIM_LOW, SLIP_TRIM_HIGH = 0.3, 0.8  # its range: rotor from about -60 to 220 degC


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
        k = np.zeros(sk.N_CONSTS)
        k[sk.K_T], k[sk.K_N_MOTORS], k[sk.K_I_MAX] = self.T, n_motors, self.i_max
        k[sk.K_SIGN_BAND], k[sk.K_RATED_HZ] = self.sign_band_a, cfg.rated_frequency_hz
        k[sk.K_LINK_NOMINAL], k[sk.K_DEAD_TIME] = cfg.link_nominal_v, cfg.dead_time_s
        k[sk.K_FSW], k[sk.K_VOLTAGE_MARGIN] = cfg.switching_frequency_hz, VOLTAGE_MARGIN
        k[sk.K_SLIP_LIMIT_SHARE], k[sk.K_BISECTIONS] = SLIP_LIMIT_SHARE, BISECTIONS
        k[sk.K_BREAKDOWN_EVERY], k[sk.K_FLUX_TRIM_S] = BREAKDOWN_EVERY, FLUX_TRIM_S
        k[sk.K_FLUX_TRIM_RANGE], k[sk.K_TRIM_UP_TO] = FLUX_TRIM_RANGE, TRIM_UP_TO
        k[sk.K_LINK_FILTER_S] = LINK_FILTER_S
        k[sk.K_LINK_DAMPING] = LINK_DAMPING_RAD
        k[sk.K_LINK_RESONANCE_HZ] = cfg.link_resonance_hz
        k[sk.K_RATED_TORQUE], k[sk.K_SLIP_TRIM_S] = cfg.rated_torque_nm, SLIP_TRIM_S
        k[sk.K_SLIP_TRIM_FROM] = SLIP_TRIM_FROM
        k[sk.K_SLIP_TRIM_LOW], k[sk.K_SLIP_TRIM_HIGH] = SLIP_TRIM_LOW, SLIP_TRIM_HIGH
        k[sk.K_SLIP_TRIM_STEADY] = SLIP_TRIM_STEADY
        k[sk.K_CORE_G] = 1.0 / cfg.core_loss_resistance_ohm  # (0 without a core loss)
        k[sk.K_RS_ALPHA] = cfg.stator_temp_coeff_per_k
        k[sk.K_RS_REF_DEGC] = cfg.resistance_reference_degc
        self.consts = k  # the compiled step's constants (scalar_kernel.K_*)
        # the control's state (scalar_kernel.S_*), read by name through the properties
        # below: angles, stator frequency, main flux, slip, trim, the link's mean, the
        # voltage sent, the estimates, the breakdown search, and what each command carried
        # (voltage, stator frequency Hz, slip rad/s, main flux) for the period just
        # measured (sent two steps back) and the one after it
        self.state = np.zeros(sk.N_STATE)
        self.state[[sk.S_PSI_M, sk.S_H0_PSI, sk.S_H1_PSI]] = self.psi_rated
        self.state[sk.S_U_TRIM] = 1.0
        self._slip_torque = 0.0  # classic V/f's slip compensation: its filtered torque

    # (the classic V/f path writes the angle and the frequency itself)
    theta = slot(sk.S_THETA, "stator angle of the voltage's axis, rad", writable=True)
    theta_slip = slot(sk.S_THETA_SLIP, "angle-based slip regulation: the integrated slip")
    f_s = slot(sk.S_F_S, "stator frequency of the last command, Hz", writable=True)
    psi_m = slot(sk.S_PSI_M, "main flux planned, V s")
    w_slip = slot(sk.S_W_SLIP, "slip frequency of the last command, rad/s")
    u_trim = slot(sk.S_U_TRIM, "the flux trim's factor on the voltage")
    u_d_mean = slot(sk.S_U_D_MEAN, "the link's mean the plan uses, V")
    torque_estimate = slot(sk.S_TORQUE_ESTIMATE, "torque per motor estimated, N m")
    torque_limit = slot(sk.S_TORQUE_LIMIT, "the most torque per motor there is now, N m")
    slip_trim = slot(sk.S_SLIP_TRIM, "the slip's trim from the air-gap torque (0: none)")

    @property
    def u_vec(self) -> complex:
        """The stator voltage vector sent last, V."""
        return complex(self.state[sk.S_U_VEC_RE], self.state[sk.S_U_VEC_IM])

    @u_vec.setter
    def u_vec(self, u: complex) -> None:
        self.state[sk.S_U_VEC_RE], self.state[sk.S_U_VEC_IM] = u.real, u.imag

    def _held(self) -> tuple[complex, float, float, float]:
        """What the command acting in the period just measured carried: (voltage, stator
        frequency Hz, slip rad/s, main flux V s)."""
        s = self.state
        return (complex(s[sk.S_H0_U_RE], s[sk.S_H0_U_IM]), s[sk.S_H0_F], s[sk.S_H0_SLIP],
                s[sk.S_H0_PSI])

    def _push_history(self) -> None:
        s = self.state
        s[sk.S_H0_U_RE:sk.S_H0_PSI + 1] = s[sk.S_H1_U_RE:sk.S_H1_PSI + 1]
        u = self.u_vec
        s[sk.S_H1_U_RE], s[sk.S_H1_U_IM] = u.real, u.imag
        s[sk.S_H1_F], s[sk.S_H1_SLIP], s[sk.S_H1_PSI] = self.f_s, self.w_slip, self.psi_m

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

    def estimated_torque(self, phase_currents: tuple[float, float, float]) -> float:
        """Torque per motor over the period that has just ended, from the measured
        currents and the voltage held in it, N m (call once a period, before step;
        scalar_kernel.estimated_torque: the air-gap power of the held voltage and the
        period's mean current, Bose 2002, blended below half the rated frequency with
        the current's magnitude at the slip applied; low-pass 10 ms)."""
        ia, ib, ic = phase_currents
        return sk.estimated_torque(self.state, self.consts, self.circuit, self.curve.i,
                                   self.curve.psi, ia, ib, ic)

    def airgap_torque(self, phase_currents: tuple[float, float, float]) -> float:
        """Torque per motor from the air-gap power of the voltage held in the period the
        sample ends (classic V/f's slip compensation), N m.

        P_airgap = 3/2 Re(u i*) - 3/2 R_s |i|^2 (amplitude-invariant vectors), T = P / w_s
        with w_s the synchronous mechanical speed (Bose 2002, slip compensation).
        """
        i = space_vector(phase_currents) / self.n_motors
        u_held, f_held, _, _ = self._held()
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
        if f_command_hz is None:  # torque control by the circuit: scalar_kernel
            ia, ib, ic = phase_currents if phase_currents is not None else (0.0, 0.0, 0.0)
            d, f_s = sk.torque_step(self.state, self.consts, self.circuit, self.curve.i,
                                    self.curve.psi, torque_per_motor, rotor_speed_rad_s, u_d,
                                    ia, ib, ic, phase_currents is not None,
                                    rotor_angle_rad or 0.0, rotor_angle_rad is not None)
            return list(d), f_s
        u_max = u_d / math.sqrt(3)
        f_s = f_command_hz
        if phase_currents is not None and self.f_s:
            # slip compensation: the estimated torque, low-pass filtered (50 ms)
            t_est = self.airgap_torque(phase_currents)
            self._slip_torque += (t_est - self._slip_torque) * self.T / 0.05
            f_s += self.slip_for_torque(self._slip_torque, f_s)
        u = min(self.boost_v + self.volts_per_hz * abs(f_s), u_max)
        self.theta = (self.theta + 2 * math.pi * f_s * self.T) % (2 * math.pi)
        self.f_s = f_s
        self.u_vec = cmath.rect(u, self.theta + 2 * math.pi * f_s * 1.5 * self.T)
        self._push_history()
        return duties(self.u_vec, u_d), f_s

    def period(self, torque_per_motor: float, rotor_speed_rad_s: float, u_d: float,
               phase_currents: tuple[float, float, float], rotor_angle_rad: float,
               stator_degc: float, learns: bool) -> tuple[float, list[float]]:
        """One period of the torque mode as the reference controller runs it: the stator
        sensor's temperature, the torque estimate (N m a motor, returned) and the duties
        for the torque; with ``learns`` False (under the flux ramp, whose voltage is scaled
        after the plan, or an adhesion cut, whose torque swings with the wheelset) the
        command teaches the slip trim nothing."""
        self.stator_temperature(stator_degc)
        estimate = self.estimated_torque(phase_currents)
        duties, _ = self.step(torque_per_motor, rotor_speed_rad_s, u_d,
                              phase_currents=phase_currents, rotor_angle_rad=rotor_angle_rad)
        if not learns:
            self.forget_torque_asked()
        return estimate, duties

    def stator_temperature(self, degc: float) -> None:
        """The stator winding's temperature (its sensor, degC): the torque estimate takes
        R_s at it (scalar_kernel.stator_temperature)."""
        sk.stator_temperature(self.state, self.consts, self.circuit, degc)

    def forget_torque_asked(self) -> None:
        """The command just planned is no measure for the slip trim (its voltage was
        scaled after the plan: the flux ramp after the gates are released)."""
        self.state[sk.S_H1_T] = 0.0

    def slip_for_torque(self, torque_per_motor: float, f_s_estimate: float) -> float:
        """Slip frequency for a torque in classic V/f, Hz (linear region, 1/f flux above
        the base frequency)."""
        f_slip = torque_per_motor / self.cfg.rated_torque_nm * self.f_slip_rated
        ratio = abs(f_s_estimate) / self.cfg.rated_frequency_hz
        return f_slip * max(ratio, 1.0) ** 2
