"""The controller's own parameter set, as a TCU would hold it.

Read from the trainset profile's nominal data (machine rating, gear, wheel, transformer,
links); the controller never sees the plant's state, only telegrams.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from emulator.profiles.reader import load_trainset


@dataclass(frozen=True)
class ControllerConfig:
    """Nominal data and limits of the drive, SI units."""

    period_s: float
    line_frequency_hz: float
    line_nominal_v: float  # rms
    line_u_min2_v: float
    line_u_min1_v: float
    line_u_max1_v: float
    line_u_max2_v: float
    transformer_ratio: float
    secondary_v: float  # rms, no load
    secondary_leakage_h: float
    link_nominal_v: float
    link_capacitance_f: float
    link_overvoltage_v: float
    chopper_ohm: float
    pole_pairs: int
    rated_voltage_v: float  # line-line rms
    rated_frequency_hz: float
    rated_power_w: float
    rated_slip: float
    magnetising_h: float
    rotor_resistance_ohm: float
    rotor_leakage_h: float
    stator_leakage_h: float
    stator_resistance_ohm: float
    gear_ratio: float
    wheel_radius_m: float
    mass_kg: float
    max_speed_mps: float
    encoder_lines: int
    #: the inverter's own PWM settings (the firmware sets them): for dead-time compensation
    switching_frequency_hz: float
    dead_time_s: float
    n_motors_per_inverter: tuple[int, ...]
    n_line_converters_per_link: tuple[int, ...]
    line_side: bool
    motor_control: str = "scalar"
    #: above this train speed the effort curve falls as 1/v^2 (profile's
    #: natural_characteristic_from_kmh), m/s
    natural_from_mps: float = math.inf
    #: the motor's magnetising curve (type test): main flux (V s, peak) against the
    #: magnetising current (A, peak); empty: linear with magnetising_h
    saturation_current_a: tuple[float, ...] = ()
    saturation_flux_vs: tuple[float, ...] = ()
    #: the motor's core-loss resistance per phase across its terminals (type test), ohm
    core_loss_resistance_ohm: float = math.inf
    #: the stator winding's resistance change with temperature (copper: 0.00393 /K) and
    #: the temperature its resistance is given at (the motor's data sheet)
    stator_temp_coeff_per_k: float = 0.0
    resistance_reference_degc: float = 20.0
    link_names: tuple[str, ...] = ()
    line_converter_names: tuple[str, ...] = ()
    line_converter_links: tuple[int, ...] = ()
    inverter_names: tuple[str, ...] = ()
    inverter_links: tuple[int, ...] = ()
    #: the board's own current acquisition ([sensors.current]): its filter's time constant
    #: and the sample's age at the exchange, s
    current_filter_s: float = 0.0
    current_sample_age_s: float = 0.0
    #: the parallel resonance of the link's capacitor with its series-resonant 2f filter,
    #: Hz (0: no filter): w^2 = (C_d + C_2) / (L_2 C_2 C_d), the series branch in parallel
    #: with C_d; the V/f drive damps the link from above it (scalar_kernel)
    link_resonance_hz: float = 0.0

    @property
    def rated_torque_nm(self) -> float:
        """Rated torque from power and rated speed, N m."""
        w = 2 * math.pi * self.rated_frequency_hz / self.pole_pairs * (1 - self.rated_slip)
        return self.rated_power_w / w

    @property
    def base_speed_mps(self) -> float:
        """Train speed at the motor's rated frequency (field weakening above), m/s."""
        w_motor = 2 * math.pi * self.rated_frequency_hz / self.pole_pairs * (1 - self.rated_slip)
        return w_motor / self.gear_ratio * self.wheel_radius_m


def _rated_slip(m) -> float:
    """The nameplate slip: where the equivalent circuit gives the rated power.

    Thevenin form of the per-phase circuit at rated voltage and frequency (Fitzgerald,
    Kingsley & Umans, ch. 6), T(s) = 3/w_sm |V_th|^2 (R_r/s) / ((R_th + R_r/s)^2 +
    (X_th + X_lr)^2), solved for T(s) w_sm (1 - s) = P_rated by bisection.
    """
    w = 2 * math.pi * m.rated_frequency_hz
    x_ls, x_lr, x_m = w * m.stator_leakage_h, w * m.rotor_leakage_h, w * m.magnetising_h
    v = m.rated_voltage_v / math.sqrt(3)
    den = complex(m.stator_resistance_ohm, x_ls + x_m)
    v_th = abs(v * 1j * x_m / den)
    z_th = complex(m.stator_resistance_ohm, x_ls) * 1j * x_m / den
    w_sm = w / m.pole_pairs

    def power(s: float) -> float:
        rr = m.rotor_resistance_ohm / s
        t = 3 / w_sm * v_th**2 * rr / ((z_th.real + rr) ** 2 + (z_th.imag + x_lr) ** 2)
        return t * w_sm * (1 - s)

    lo, hi = 1e-5, 0.2
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if power(mid) < m.rated_power_w else (lo, mid)
    return 0.5 * (lo + hi)


def _link_resonance_hz(link) -> float:
    """The parallel resonance of a link's capacitor C_d with its series L_2 C_2 filter, Hz:
    w^2 = (C_d + C_2) / (L_2 C_2 C_d) (an LC circuit's resonance); 0 without a filter."""
    l2, c2, cd = link.filter_inductance_h, link.filter_capacitance_f, link.capacitance_f
    if l2 <= 0.0 or c2 <= 0.0 or cd <= 0.0:
        return 0.0
    return math.sqrt((cd + c2) / (l2 * c2 * cd)) / (2 * math.pi)


def config_from_profile(path, period_s: float | None = None) -> ControllerConfig:
    """The controller's parameters from a trainset profile."""
    return config_from_params(load_trainset(path), period_s)


def config_from_params(p, period_s: float | None = None) -> ControllerConfig:
    """The controller's parameters from a trainset's parameters (a loaded profile)."""
    m = p.machine
    levels = {25000.0: (17500.0, 19000.0, 27500.0, 29000.0),
              15000.0: (11000.0, 12000.0, 17250.0, 18000.0)}  # EN 50163
    u_min2, u_min1, u_max1, u_max2 = levels.get(p.supply.nominal_voltage_v, (
        0.7 * p.supply.nominal_voltage_v, 0.76 * p.supply.nominal_voltage_v,
        1.1 * p.supply.nominal_voltage_v, 1.16 * p.supply.nominal_voltage_v))
    tr = p.transformer
    links = p.dc_links
    rated_slip = _rated_slip(m)
    wheels = [d for c in p.converters for d in c.wheel_diameters_m]
    return ControllerConfig(
        period_s=period_s or p.frame_s,
        line_frequency_hz=p.supply.frequency_hz,
        line_nominal_v=p.supply.nominal_voltage_v,
        line_u_min2_v=u_min2, line_u_min1_v=u_min1, line_u_max1_v=u_max1,
        line_u_max2_v=u_max2,
        transformer_ratio=(tr.primary_voltage_v / tr.secondary_voltage_v) if tr else 1.0,
        secondary_v=tr.secondary_voltage_v if tr else 0.0,
        secondary_leakage_h=tr.leakage_h if tr else 0.0,
        link_nominal_v=links[0].voltage_v,
        link_capacitance_f=links[0].capacitance_f,
        link_overvoltage_v=links[0].overvoltage_v,
        chopper_ohm=links[0].chopper_ohm,
        pole_pairs=m.pole_pairs,
        rated_voltage_v=m.rated_voltage_v,
        rated_frequency_hz=m.rated_frequency_hz,
        rated_power_w=m.rated_power_w,
        rated_slip=rated_slip,
        magnetising_h=m.magnetising_h,
        rotor_resistance_ohm=m.rotor_resistance_ohm,
        rotor_leakage_h=m.rotor_leakage_h,
        stator_leakage_h=m.stator_leakage_h,
        stator_resistance_ohm=m.stator_resistance_ohm,
        gear_ratio=p.drivetrain.gear_ratio,
        wheel_radius_m=0.5 * sum(wheels) / len(wheels),
        mass_kg=p.train.mass_kg,
        max_speed_mps=p.train.max_speed_mps,
        encoder_lines=p.sensors.encoder_lines if p.sensors else 256,
        switching_frequency_hz=p.inverter.switching_frequency_hz,
        dead_time_s=p.inverter.dead_time_s,
        n_motors_per_inverter=tuple(len(c.wheel_diameters_m) for c in p.converters),
        n_line_converters_per_link=tuple(sum(1 for u in p.line_converters if u.dc_link == i)
                                         for i in range(len(links))),
        line_side=tr is not None,
        motor_control=p.motor_control,
        natural_from_mps=(p.effort_limits.natural_from_mps if p.effort_limits
                          else math.inf),
        saturation_current_a=tuple(m.saturation_current_a),
        saturation_flux_vs=tuple(m.saturation_flux_vs),
        core_loss_resistance_ohm=m.core_loss_resistance_ohm,
        stator_temp_coeff_per_k=m.stator_temp_coeff_per_k,
        resistance_reference_degc=m.reference_temperature_k - 273.15,
        link_names=tuple(lk.name for lk in links),
        line_converter_names=tuple(u.name for u in p.line_converters),
        line_converter_links=tuple(u.dc_link for u in p.line_converters),
        inverter_names=tuple(c.name for c in p.converters),
        inverter_links=tuple(c.dc_link for c in p.converters),
        current_filter_s=p.sensors.current.filter_s if p.sensors else 0.0,
        current_sample_age_s=p.sensors.current.sample_age_s if p.sensors else 0.0,
        link_resonance_hz=_link_resonance_hz(links[0]),
    )
