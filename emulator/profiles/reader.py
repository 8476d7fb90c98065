"""TOML profiles -> typed, validated plant parameters in SI units.

Every key carries its unit as a suffix (``mass_kg``, ``dead_time_us``,
``stator_resistance_ohm``) and is converted once here. A missing key, an unknown key
(a misspelling), a wrong type or a value out of range raises :class:`ProfileError`
naming the file, the table, the key, the unit and the range expected. Nothing deeper
in the physics falls back on a default.
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

from emulator.plant.params import (
    ConverterParams,
    EffortLimits,
    LineConverterUnit,
    MachineParams,
    MachineThermal,
    TrainsetParams,
)
from emulator.profiles.sections import (
    GRAVITY,
    KELVIN,
    parse_dc_link,
    parse_drivetrain,
    parse_four_quadrant,
    parse_inverter,
    parse_machine_factors,
    parse_machine_spread,
    parse_sensors,
    parse_supply,
    parse_train,
    parse_transformer,
)
from emulator.profiles.table import ProfileError, Table, read_toml, read_toml_lines
from emulator.rig.sensors import SensorParams

__all__ = ["GRAVITY", "KELVIN", "ProfileError", "Table", "load_machine", "load_trainset",
           "read_toml", "resolve_profile"]

PROFILES_DIR = Path(__file__).resolve().parents[2] / "profiles"


def resolve_profile(name: str | Path) -> Path:
    """A path as given, or a shipped profile by name (``trainsets/tern-25kv``)."""
    path = Path(name)
    if path.exists():
        return path
    shipped = PROFILES_DIR / path
    if shipped.with_suffix(".toml").exists():
        return shipped.with_suffix(".toml")
    if shipped.exists():
        return shipped
    return path


def _read(path: Path | str) -> tuple[dict, Path | str, str, dict]:
    """Data, file, root section and key lines, for a root Table."""
    data, lines, _ = read_toml_lines(path)
    return data, path, "", lines


def load_machine(path: Path | str) -> MachineParams:
    """Load a machine profile (a file with a [machine] table)."""
    path = resolve_profile(path)
    root = Table(*_read(path))
    t = root.table("machine")
    root.finish()
    name = t.string("name")
    freq = t.number("rated_frequency_hz", "Hz", 0.0, 1000.0, lo_open=True)
    if t.has("reactance_frequency_hz") or t.has("magnetising_reactance_ohm"):
        f_x = t.number("reactance_frequency_hz", "Hz", 0.0, 1000.0, lo_open=True)
        to_h = 1.0 / (2.0 * math.pi * f_x)
        l_ls = t.number("stator_leakage_reactance_ohm", "ohm", 0.0, 1e4, lo_open=True) * to_h
        l_lr = t.number("rotor_leakage_reactance_ohm", "ohm", 0.0, 1e4, lo_open=True) * to_h
        l_m = t.number("magnetising_reactance_ohm", "ohm", 0.0, 1e5, lo_open=True) * to_h
        leak_keys = ("stator_leakage_reactance_ohm", "rotor_leakage_reactance_ohm")
    else:
        l_ls = t.number("stator_leakage_inductance_h", "H", 0.0, 10.0, lo_open=True)
        l_lr = t.number("rotor_leakage_inductance_h", "H", 0.0, 10.0, lo_open=True)
        l_m = t.number("magnetising_inductance_h", "H", 0.0, 100.0, lo_open=True)
        leak_keys = ("stator_leakage_inductance_h", "rotor_leakage_inductance_h")
    for key, value in zip(leak_keys, (l_ls, l_lr), strict=True):
        if value >= l_m:
            raise t.error(key, "leakage must be smaller than the magnetising inductance")
    poles = t.integer("poles", 2, 64)
    if poles % 2:
        raise t.error("poles", f"a machine has an even number of poles, got {poles}")
    saturation_i: tuple[float, ...] = ()
    saturation_psi: tuple[float, ...] = ()
    if t.has("saturation"):
        st = t.table("saturation")
        saturation_i = st.numbers("magnetising_current_a", "A", 0.0, 1e6, lo_open=True,
                                  min_len=2)
        saturation_psi = st.numbers("magnetising_flux_vs", "V s", 0.0, 1e3, lo_open=True,
                                    min_len=2)
        st.finish()
        if len(saturation_i) != len(saturation_psi):
            raise st.error("magnetising_flux_vs", "needs as many points as the current list")
        if any(b <= a for a, b in itertools.pairwise(saturation_i)):
            raise st.error("magnetising_current_a", "must rise strictly")
        if any(b < a for a, b in itertools.pairwise(saturation_psi)):
            raise st.error("magnetising_flux_vs", "must not fall")
    thermal = None
    if t.has("thermal"):
        th = t.table("thermal")
        g_sa = 1e3 / th.number("stator_to_coolant_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
        g_ra = 1e3 / th.number("rotor_to_coolant_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
        g_sr = 1e3 / th.number("stator_to_rotor_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
        tau_s = th.number("stator_time_constant_s", "s", 0.0, 1e6, lo_open=True)
        tau_r = th.number("rotor_time_constant_s", "s", 0.0, 1e6, lo_open=True)
        th.finish()
        thermal = MachineThermal(tau_s * g_sa, tau_r * g_ra, g_sr, g_sa, g_ra)
    machine = MachineParams(
        name=name,
        rated_power_w=t.number("rated_power_kw", "kW", 0.0, 1e5, lo_open=True, scale=1e3),
        rated_voltage_v=t.number("rated_voltage_v", "V (line-line rms)", 0.0, 1e5,
                                 lo_open=True),
        rated_frequency_hz=freq,
        pole_pairs=poles // 2,
        stator_resistance_ohm=t.number("stator_resistance_ohm", "ohm", 0.0, 1e3, lo_open=True),
        rotor_resistance_ohm=t.number("rotor_resistance_ohm", "ohm", 0.0, 1e3, lo_open=True),
        stator_leakage_h=l_ls,
        rotor_leakage_h=l_lr,
        magnetising_h=l_m,
        rotor_inertia_kgm2=t.number("rotor_inertia_kgm2", "kg m^2", 0.0, 1e5, lo_open=True),
        reference_temperature_k=t.number("resistance_temperature_degc", "degC", -60.0, 250.0,
                                         offset=KELVIN),
        stator_temp_coeff_per_k=t.number("stator_temperature_coefficient_per_k", "1/K", 0.0,
                                         0.01),
        rotor_temp_coeff_per_k=t.number("rotor_temperature_coefficient_per_k", "1/K", 0.0,
                                        0.01),
        saturation_current_a=saturation_i,
        saturation_flux_vs=saturation_psi,
        thermal=thermal,
        core_loss_resistance_ohm=(t.number("core_loss_resistance_ohm", "ohm", 0.0, 1e7,
                                           lo_open=True)
                                  if t.has("core_loss_resistance_ohm") else math.inf),
        friction_windage_w=(t.number("friction_windage_at_rated_kw", "kW", 0.0, 1e4,
                                     scale=1e3)
                            if t.has("friction_windage_at_rated_kw") else 0.0),
    )
    t.finish()
    return machine


def load_trainset(path: Path | str) -> TrainsetParams:
    """Load a trainset profile and the machine profile it names."""
    path = resolve_profile(path)
    root = Table(*_read(path))
    ts = root.table("trainset")
    machine_file = ts.string("machine_profile")
    machine_path = (path.parent / machine_file).resolve()
    try:
        machine = load_machine(machine_path)
    except ProfileError as exc:
        raise ProfileError(f"{path}: [trainset] machine_profile: {exc}") from None
    substep = ts.number("substep_us", "us", 1.0, 1000.0, scale=1e-6)
    frame = ts.number("frame_ms", "ms", 0.1, 10.0, scale=1e-3)
    ratio = frame / substep
    if abs(ratio - round(ratio)) > 1e-9:
        raise ts.error("substep_us", f"must divide frame_ms evenly (frame/substep = {ratio:g})")
    name = ts.string("name")
    notes = {"description": ts.string("description")} if ts.has("description") else {}
    ts.finish()

    train = parse_train(root.table("train"))

    supply = parse_supply(root.table("supply"))

    drivetrain = parse_drivetrain(root.table("drivetrain"), train)

    inverter = parse_inverter(root.table("inverter"))

    links = [parse_dc_link(lt) for lt in root.tables("dc_link")]
    link_names = [lk.name for lk in links]
    if len(set(link_names)) != len(link_names):
        raise root.error("dc_link", "names must be unique")

    spread = parse_machine_spread(root.table("machine_spread")) if root.has(
        "machine_spread") else None
    converters = []
    for ct in root.tables("converter"):
        cname = ct.string("name")
        link = ct.string("dc_link", tuple(link_names))
        wheels = ct.numbers("wheel_diameters_m", "m", 0.3, 1.6)
        positions: tuple[float, ...] = ()
        if ct.has("axle_positions_m"):
            positions = ct.numbers("axle_positions_m", "m", 0.0, 2000.0)
            if len(positions) != len(wheels):
                raise ct.error("axle_positions_m", f"one position per wheel diameter "
                               f"({len(wheels)}), got {len(positions)}")
        elif drivetrain.bogie_wheelbase_m > 0.0:
            raise ct.error("wheel_diameters_m", "load transfer ([drivetrain] "
                           "bogie_wheelbase_m) needs axle_positions_m, each axle's distance "
                           "behind the train's front end")
        factors = parse_machine_factors(ct, len(wheels), spread)
        ct.finish()
        converters.append(ConverterParams(cname, link_names.index(link), wheels, positions,
                                          factors))
    conv_names = [c.name for c in converters]
    if len(set(conv_names)) != len(conv_names):
        raise root.error("converter", "names must be unique")
    if sum(len(c.wheel_diameters_m) for c in converters) > train.axle_count:
        raise root.error("converter", f"more motored axles than the train's axle_count "
                         f"({train.axle_count})")
    transformer = parse_transformer(root.table("transformer"))
    line_converter = parse_four_quadrant(root.table("four_quadrant"))
    units = []
    for ut in root.tables("line_converter"):
        units.append(LineConverterUnit(ut.string("name"),
                                       link_names.index(ut.string("dc_link", tuple(link_names)))))
        ut.finish()
    if len({u.name for u in units} | set(conv_names)) != len(units) + len(conv_names):
        raise root.error("line_converter", "names must be unique among all converters")
    fed = {u.dc_link for u in units}
    for i, lk in enumerate(links):
        if i not in fed:
            raise root.error("dc_link", f"link {lk.name!r} has no line converter feeding it")
    sensors = parse_sensors(root.table("sensors"), frame) if root.has("sensors") else SensorParams()
    motor_control = "scalar"
    effort_limits = None
    if root.has("controller"):  # the reference controller's settings
        ctl = root.table("controller")
        motor_control = ctl.string("motor_control", ("scalar", "vector"))
        if ctl.has("max_tractive_effort_kn"):  # the specified effort curve at the rail
            effort_limits = EffortLimits(
                ctl.number("max_tractive_effort_kn", "kN", 1.0, 5000.0, scale=1e3),
                ctl.number("max_tractive_power_kw", "kW", 1.0, 50000.0, scale=1e3),
                ctl.number("max_braking_effort_kn", "kN", 1.0, 5000.0, scale=1e3),
                ctl.number("max_braking_power_kw", "kW", 1.0, 50000.0, scale=1e3),
                ctl.number("natural_characteristic_from_kmh", "km/h", 1.0, 1000.0,
                           scale=1 / 3.6) if ctl.has("natural_characteristic_from_kmh")
                else math.inf)
        ctl.finish()
    root.finish()
    return TrainsetParams(name=name, source=str(path), substep_s=substep, frame_s=frame,
                          train=train, supply=supply, machine=machine, drivetrain=drivetrain,
                          inverter=inverter, dc_links=tuple(links),
                          converters=tuple(converters), notes=notes,
                          sensors=sensors, transformer=transformer, motor_control=motor_control,
                          effort_limits=effort_limits,
                          line_converter=line_converter, line_converters=tuple(units))
