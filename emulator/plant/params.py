"""Typed, validated plant parameters in SI units (built by emulator.profiles.reader)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

#: the most motors (and inverters) a plant steps: the stride of its column buffer
#: (columns.py), fixed when the kernel is compiled (a trainset profile has at most 400
#: axles; only a plant built in code can ask for more, and is refused)
MAX_MOTORS = 520


@dataclass(frozen=True)
class MachineThermal:
    """Two-node stator/rotor network; conductances to the coolant and between nodes."""

    stator_capacity_j_per_k: float
    rotor_capacity_j_per_k: float
    stator_rotor_conductance_w_per_k: float
    stator_coolant_conductance_w_per_k: float
    rotor_coolant_conductance_w_per_k: float


@dataclass(frozen=True)
class MachineParams:
    """Induction machine, T-equivalent circuit per phase, rotor referred to the stator."""

    name: str
    rated_power_w: float
    rated_voltage_v: float  # line-to-line rms
    rated_frequency_hz: float
    pole_pairs: int
    stator_resistance_ohm: float
    rotor_resistance_ohm: float
    stator_leakage_h: float
    rotor_leakage_h: float
    magnetising_h: float
    rotor_inertia_kgm2: float
    reference_temperature_k: float
    stator_temp_coeff_per_k: float
    rotor_temp_coeff_per_k: float
    saturation_current_a: tuple[float, ...] = ()
    saturation_flux_vs: tuple[float, ...] = ()
    thermal: MachineThermal | None = None
    # iron loss: a core-loss resistance per phase across the terminals (inf: none)
    core_loss_resistance_ohm: float = float("inf")
    # friction and windage at the synchronous speed of the rated frequency, W (0: none)
    friction_windage_w: float = 0.0


@dataclass(frozen=True)
class InverterParams:
    """Two-level IGBT inverter data shared by all inverters of a trainset."""

    switching_frequency_hz: float
    dead_time_s: float
    igbt_threshold_v: float
    igbt_slope_ohm: float
    diode_threshold_v: float
    diode_slope_ohm: float
    switching_energy_j: float
    switching_energy_ref_v: float
    switching_energy_ref_a: float
    sign_band_a: float
    junction_capacity_j_per_k: float = 0.0
    heatsink_capacity_j_per_k: float = 0.0
    junction_heatsink_w_per_k: float = 0.0
    heatsink_coolant_w_per_k: float = 0.0
    thermal: bool = False
    hardware_trip_a: float = float("inf")  # gate drivers' overcurrent trip, phase peak, A


@dataclass(frozen=True)
class DrivetrainParams:
    """Gear, wheelset and wheel-rail contact of one motored axle."""

    gear_ratio: float
    gear_efficiency: float
    wheelset_inertia_kgm2: float
    axle_load_n: float
    kalker_coefficient_n: float
    rail_condition: str
    creep_reference_speed_mps: float
    # torsion in the coupling between the gear and the wheelset, referred to the motor
    # shaft (0: a rigid drivetrain); the gear wheel's inertia turns on the rotor's side
    shaft_stiffness_nm_per_rad: float = 0.0
    gear_inertia_kgm2: float = 0.0
    shaft_damping_nms_per_rad: float = 0.0
    # load transfer (0: none): bogie wheelbase, height of the bogie's traction link and of
    # the coupler above the rail
    bogie_wheelbase_m: float = 0.0
    traction_link_height_m: float = 0.0
    coupler_height_m: float = 0.0


@dataclass(frozen=True)
class DcLinkParams:
    """A DC link: capacitor, optional 2f filter, brake chopper, discharge resistor."""

    name: str
    voltage_v: float  # nominal; the held voltage when the link is an ideal source
    capacitance_f: float = 0.0
    discharge_ohm: float = 0.0
    overvoltage_v: float = float("inf")
    chopper_ohm: float = 0.0
    resistor_capacity_j_per_k: float = 0.0
    resistor_conductance_w_per_k: float = 0.0
    filter_inductance_h: float = 0.0  # 0: no series-resonant filter
    filter_capacitance_f: float = 0.0
    filter_resistance_ohm: float = 0.0
    # the hardware chopper: fires above the first voltage, lets go below the second
    hardware_chopper_on_v: float = float("inf")
    hardware_chopper_off_v: float = float("inf")


@dataclass(frozen=True)
class TransformerParams:
    """Main transformer, one secondary winding per line converter, and main breaker."""

    primary_voltage_v: float
    secondary_voltage_v: float
    leakage_h: float  # per secondary, referred to the secondary
    resistance_ohm: float
    breaker_delay_s: float
    # longest arc of the breaker and line contactors when opening under current (0: half a
    # period of the line frequency, the longest wait for a current zero)
    max_arcing_s: float = 0.0
    hardware_line_trip_a: float = float("inf")  # the breaker's overcurrent release, peak A


@dataclass(frozen=True)
class LineConverterParams:
    """Data shared by the four-quadrant line converters and their contactors."""

    switching_frequency_hz: float
    device_threshold_v: float
    device_slope_ohm: float
    switching_energy_j: float
    switching_energy_ref_v: float
    switching_energy_ref_a: float
    precharge_ohm: float
    precharge_delay_s: float
    line_contactor_delay_s: float


@dataclass(frozen=True)
class LineConverterUnit:
    """One four-quadrant converter on its own secondary winding, feeding a DC link."""

    name: str
    dc_link: int


@dataclass(frozen=True)
class ConverterParams:
    """One inverter (motor converter) and the motors/axles it feeds in parallel."""

    name: str
    dc_link: int
    wheel_diameters_m: tuple[float, ...]
    # each motored axle's distance behind the train's front end, m (empty: every axle at
    # the front, no load transfer between axles)
    axle_positions_m: tuple[float, ...] = ()
    # each motor's machine against the machine profile: factors on the stator resistance,
    # the rotor resistance and the magnetising inductance (empty: all 1, identical motors)
    machine_factors: tuple[tuple[float, float, float], ...] = ()


@dataclass(frozen=True)
class SupplyParams:
    """Catenary supply: system, source impedance at the pantograph, harmonics."""

    nominal_voltage_v: float  # rms
    frequency_hz: float
    source_resistance_ohm: float = 0.0
    source_inductance_h: float = 0.0
    reverse_power_droop_v_per_w: float = 0.0  # 0: a receptive line
    harmonics: tuple[tuple[int, float, float], ...] = ()  # order, fraction, phase rad


@dataclass(frozen=True)
class TrainParams:
    """Longitudinal dynamics of the whole trainset."""

    mass_kg: float
    rotating_mass_allowance: float
    davis_a_n: float
    davis_b_n_per_mps: float
    davis_c_n_per_mps2: float
    max_speed_mps: float
    ambient_temperature_k: float
    axle_count: int = 0  # all axles, motored or not (0: the motored axles only)
    brake_cylinder_time_constant_s: float = 0.0  # first-order lag of each axle's brake



@dataclass(frozen=True)
class EffortLimits:
    """The trainset's specified tractive- and braking-effort curve at the rail: constant
    effort up to the speed where it meets constant power, then constant power up to the
    natural-characteristic speed, above which the effort falls as 1/v^2 with the motors'
    voltage-limited breakdown torque (the three regions of a traction characteristic:
    common practice). The controller is designed to it; `railrig characteristic`
    measures against it."""

    tractive_effort_n: float
    tractive_power_w: float
    braking_effort_n: float
    braking_power_w: float
    natural_from_mps: float = math.inf

    def at(self, speed_mps: float, braking: bool = False) -> float:
        """The effort limit at a speed, N (positive)."""
        f, p = ((self.braking_effort_n, self.braking_power_w) if braking
                else (self.tractive_effort_n, self.tractive_power_w))
        v = max(abs(speed_mps), 1e-6)
        if v > self.natural_from_mps:
            return min(f, p * self.natural_from_mps / (v * v))
        return min(f, p / v)


@dataclass(frozen=True)
class TrainsetParams:
    """Everything the plant needs to build its state arrays."""

    name: str
    source: str  # file the parameters came from, for messages
    substep_s: float
    frame_s: float
    train: TrainParams
    supply: SupplyParams
    machine: MachineParams
    drivetrain: DrivetrainParams
    inverter: InverterParams
    dc_links: tuple[DcLinkParams, ...]
    converters: tuple[ConverterParams, ...]
    transformer: TransformerParams | None = None  # None: DC links are ideal sources
    line_converter: LineConverterParams | None = None
    line_converters: tuple[LineConverterUnit, ...] = ()
    notes: dict[str, str] = field(default_factory=dict)
    sensors: Any = None  # emulator.rig.sensors.SensorParams; the plant does not use it
    motor_control: str = "scalar"  # the reference controller's method: scalar or vector
    effort_limits: EffortLimits | None = None  # the specified effort curve, if given

    @property
    def motor_count(self) -> int:
        """Number of motors (and motored axles) of the trainset."""
        return sum(len(c.wheel_diameters_m) for c in self.converters)

    @property
    def motor_names(self) -> list[str]:
        """Motor (and motored axle) names in plant order: "<inverter>.m<j>", j from 1."""
        return [f"{c.name}.m{j + 1}" for c in self.converters
                for j in range(len(c.wheel_diameters_m))]
