"""Parsers of the trainset profile's sections (the tables beside the motor's and the
topology's), each a Table in, typed parameters in SI units out: see reader.py."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from emulator.plant.drivetrain import RAIL_CONDITIONS
from emulator.plant.params import (
    DcLinkParams,
    DrivetrainParams,
    InverterParams,
    LineConverterParams,
    SupplyParams,
    TrainParams,
    TransformerParams,
)
from emulator.profiles.table import Table
from emulator.rig.sensors import ChannelSpec, SensorParams

GRAVITY = 9.80665  # standard gravity, m/s^2 (CGPM 1901)
KELVIN = 273.15


def parse_train(tr: Table) -> TrainParams:
    """[train]: mass, running resistance, axles, brake lag."""
    # the weight is spread evenly over the axles (a multiple unit's cars weigh much the
    # same): each motored axle carries m g / n at rest; traction and braking move load
    # between them (build_load_transfer)
    axle_count = tr.number("axle_count", "1", 2.0, 400.0)
    if axle_count != int(axle_count):
        raise tr.error("axle_count", f"a whole number of axles, not {axle_count:g}")
    train = TrainParams(
        mass_kg=tr.number("mass_kg", "kg", 0.0, 5e6, lo_open=True),
        rotating_mass_allowance=tr.number("rotating_mass_allowance", "1", 0.0, 0.5),
        davis_a_n=tr.number("running_resistance_a_n", "N", 0.0, 1e6),
        davis_b_n_per_mps=tr.number("running_resistance_b_n_per_mps", "N/(m/s)", 0.0, 1e5),
        davis_c_n_per_mps2=tr.number("running_resistance_c_n_per_mps2", "N/(m/s)^2", 0.0, 1e4),
        max_speed_mps=tr.number("max_speed_kmh", "km/h", 0.0, 600.0, lo_open=True,
                                scale=1 / 3.6),
        ambient_temperature_k=tr.number("ambient_temperature_degc", "degC", -60.0, 80.0,
                                        offset=KELVIN),
        axle_count=int(axle_count),
        brake_cylinder_time_constant_s=(
            tr.number("brake_cylinder_time_constant_s", "s", 0.0, 10.0)
            if tr.has("brake_cylinder_time_constant_s") else 0.0),
    )
    tr.finish()
    return train


def parse_drivetrain(dt: Table, train: TrainParams) -> DrivetrainParams:
    """[drivetrain]: gear, inertias, coupling, contact, load-transfer geometry."""
    if dt.has("axle_load_kg"):
        raise dt.error("axle_load_kg", "the axle load follows the train's mass now: give "
                       "[train] axle_count (the load is mass_kg / axle_count) and remove it")
    gear = dt.number("gear_ratio", "1", 0.0, 50.0, lo_open=True)
    drivetrain = DrivetrainParams(
        gear_ratio=gear,
        gear_efficiency=dt.number("gear_efficiency", "1", 0.5, 1.0),
        wheelset_inertia_kgm2=dt.number("wheelset_inertia_kgm2", "kg m^2", 0.0, 1e4,
                                        lo_open=True),
        axle_load_n=train.mass_kg * GRAVITY / train.axle_count,
        kalker_coefficient_n=dt.number("kalker_coefficient_n", "N", 0.0, 1e9, lo_open=True),
        rail_condition=dt.string("rail_condition", tuple(RAIL_CONDITIONS)),
        creep_reference_speed_mps=dt.number("creep_reference_speed_mps", "m/s", 0.0, 5.0,
                                            lo_open=True),
        # a two-mass drivetrain when the shaft's stiffness is given, else a rigid one
        shaft_stiffness_nm_per_rad=(
            dt.number("shaft_stiffness_knm_per_rad", "kN m/rad", 0.0, 1e5, lo_open=True,
                      scale=1e3) if dt.has("shaft_stiffness_knm_per_rad") else 0.0),
        gear_inertia_kgm2=(dt.number("gear_inertia_kgm2", "kg m^2", 0.0, 1e4)
                           if dt.has("gear_inertia_kgm2") else 0.0),
        shaft_damping_nms_per_rad=(
            dt.number("shaft_damping_nms_per_rad", "N m s/rad", 0.0, 1e6)
            if dt.has("shaft_damping_nms_per_rad") else 0.0),
        bogie_wheelbase_m=(dt.number("bogie_wheelbase_m", "m", 0.5, 10.0)
                           if dt.has("bogie_wheelbase_m") else 0.0),
        traction_link_height_m=(dt.number("traction_link_height_m", "m", 0.0, 3.0)
                                if dt.has("traction_link_height_m") else 0.0),
        coupler_height_m=(dt.number("coupler_height_m", "m", 0.0, 3.0)
                          if dt.has("coupler_height_m") else 0.0),
    )
    if dt.has("shaft_damping_nms_per_rad") and not dt.has("shaft_stiffness_knm_per_rad"):
        raise dt.error("shaft_damping_nms_per_rad", "a damping needs its spring: give "
                       "shaft_stiffness_knm_per_rad too (or neither, for a rigid drivetrain)")
    transfer = ("bogie_wheelbase_m", "traction_link_height_m", "coupler_height_m")
    given = [k for k in transfer if dt.has(k)]
    if given and len(given) != len(transfer):
        missing = [k for k in transfer if k not in given]
        raise dt.error(given[0], f"load transfer needs {', '.join(transfer)}; missing "
                       f"{', '.join(missing)}")
    dt.finish()
    return drivetrain


def parse_inverter(t: Table) -> InverterParams:
    kw = {}
    if t.has("thermal"):
        th = t.table("thermal")
        g_jh = 1e3 / th.number("junction_to_heatsink_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
        g_ha = 1e3 / th.number("heatsink_to_coolant_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
        kw = dict(
            junction_capacity_j_per_k=th.number("junction_time_constant_s", "s", 0.0, 1e5,
                                                lo_open=True) * g_jh,
            heatsink_capacity_j_per_k=th.number("heatsink_time_constant_s", "s", 0.0, 1e6,
                                                lo_open=True) * g_ha,
            junction_heatsink_w_per_k=g_jh,
            heatsink_coolant_w_per_k=g_ha,
            thermal=True,
        )
        th.finish()
    inv = InverterParams(
        switching_frequency_hz=t.number("switching_frequency_hz", "Hz", 0.0, 1e5, lo_open=True),
        dead_time_s=t.number("dead_time_us", "us", 0.0, 100.0, scale=1e-6),
        igbt_threshold_v=t.number("igbt_threshold_v", "V", 0.0, 10.0),
        igbt_slope_ohm=t.number("igbt_slope_resistance_mohm", "mohm", 0.0, 1e3, scale=1e-3),
        diode_threshold_v=t.number("diode_threshold_v", "V", 0.0, 10.0),
        diode_slope_ohm=t.number("diode_slope_resistance_mohm", "mohm", 0.0, 1e3, scale=1e-3),
        **_switching_energy(t),
        sign_band_a=t.number("sign_band_a", "A", 0.0, 1e3, lo_open=True),
        hardware_trip_a=(t.number("hardware_overcurrent_a", "A (phase peak)", 0.0, 1e5,
                                  lo_open=True)
                         if t.has("hardware_overcurrent_a") else float("inf")),
        **kw,
    )
    if inv.dead_time_s * inv.switching_frequency_hz >= 0.25:
        raise t.error("dead_time_us", "dead time must be well below a switching period")
    t.finish()
    return inv


def _switching_energy(t: Table) -> dict[str, float]:
    """A switching device's energy per switching at its reference voltage and current
    (the keys an inverter and a line converter share)."""
    return {"switching_energy_j": t.number("switching_energy_mj", "mJ", 0.0, 1e5,
                                           scale=1e-3),
            "switching_energy_ref_v": t.number("switching_energy_reference_v", "V", 0.0,
                                               1e5, lo_open=True),
            "switching_energy_ref_a": t.number("switching_energy_reference_a", "A", 0.0,
                                               1e5, lo_open=True)}


def parse_channel(t: Table, unit: str, lo: float, hi: float, frame_s: float) -> ChannelSpec:
    """A sensor channel table: gain, offset, noise, filter, ADC range and bits, and how the
    board samples: at an instant (``sample_age_us`` before the exchange, 0 by default)
    or as the mean over the frame (``sampling = "frame_average"``)."""
    sampling = t.string("sampling", SAMPLINGS) if t.has("sampling") else "instant"
    age = 0.0
    if t.has("sample_age_us"):
        if sampling != "instant":
            raise t.error("sample_age_us", "only an instantaneous sample has an age")
        age = t.number("sample_age_us", "us", 0.0, frame_s * 1e6, scale=1e-6)
    spec = ChannelSpec(
        frame_average=sampling == "frame_average",
        sample_age_s=age,
        gain=t.number("gain", "1", 0.0, 10.0, lo_open=True),
        offset=t.number(f"offset_{unit}", unit, lo, hi),
        noise_rms=t.number(f"noise_rms_{unit}", unit, 0.0, hi),
        filter_s=t.number("filter_us", "us", 0.0, 1e6, scale=1e-6),
        range_lo=t.number(f"range_min_{unit}", unit, lo, hi),
        range_hi=t.number(f"range_max_{unit}", unit, lo, hi),
        adc_bits=t.integer("adc_bits", 0, 24),
    )
    if spec.range_hi <= spec.range_lo:
        raise t.error(f"range_max_{unit}", "must exceed range_min")
    t.finish()
    return spec


SAMPLINGS = ("instant", "frame_average")


def parse_sensors(t: Table, frame_s: float) -> SensorParams:
    enc = t.table("encoder")
    lines = enc.integer("lines_per_rev", 1, 100000)
    # a disc mounted off centre: a once-per-revolution angle error (peak, arc minutes);
    # lines not where they should be: each edge off its place by a seeded draw (rms, % of
    # the edge pitch)
    eccentricity = (enc.number("eccentricity_arcmin", "arcmin", 0.0, 600.0,
                               scale=math.pi / (180 * 60))
                    if enc.has("eccentricity_arcmin") else 0.0)
    pitch = (enc.number("pitch_error_pct", "% of an edge pitch", 0.0, 15.0, scale=0.01)
             if enc.has("pitch_error_pct") else 0.0)
    enc.finish()
    params = SensorParams(
        current=parse_channel(t.table("current"), "a", -1e5, 1e5, frame_s),
        voltage=parse_channel(t.table("voltage"), "v", -1e5, 1e5, frame_s),
        speed=parse_channel(t.table("speed"), "rad_s", -1e4, 1e4, frame_s),
        temperature=parse_channel(t.table("temperature"), "degc", -300.0, 1000.0, frame_s),
        line_voltage=parse_channel(t.table("line_voltage"), "v", -1e5, 1e5, frame_s),
        line_current=parse_channel(t.table("line_current"), "a", -1e5, 1e5, frame_s),
        encoder_lines=lines,
        encoder_eccentricity_rad=eccentricity,
        encoder_pitch_error=pitch,
        shaft_torque=(parse_channel(t.table("shaft_torque"), "nm", -1e5, 1e5, frame_s)
                      if t.has("shaft_torque") else None),
    )
    t.finish()
    return params


def parse_supply(t: Table) -> SupplyParams:
    harmonics = []
    if t.has("harmonic"):
        for ht in t.tables("harmonic"):
            harmonics.append((ht.integer("order", 2, 99),
                              ht.number("amplitude_pct", "% of the fundamental", 0.0, 30.0,
                                        scale=0.01),
                              ht.number("phase_deg", "deg", -360.0, 360.0,
                                        scale=math.pi / 180)))
            ht.finish()
    supply = SupplyParams(
        nominal_voltage_v=t.number("nominal_voltage_kv", "kV (rms)", 0.0, 50.0, lo_open=True,
                                   scale=1e3),
        frequency_hz=t.number("frequency_hz", "Hz", 0.0, 100.0, lo_open=True),
        source_resistance_ohm=t.number("source_resistance_ohm", "ohm", 0.0, 1e3),
        source_inductance_h=t.number("source_inductance_mh", "mH", 0.0, 1e4, lo_open=True,
                                     scale=1e-3),
        reverse_power_droop_v_per_w=t.number("reverse_power_droop_v_per_kw", "V/kW", 0.0,
                                             1e4, scale=1e-3),
        harmonics=tuple(harmonics),
    )
    t.finish()
    return supply


def parse_transformer(t: Table) -> TransformerParams:
    tr = TransformerParams(
        primary_voltage_v=t.number("primary_voltage_kv", "kV", 0.0, 50.0, lo_open=True,
                                   scale=1e3),
        secondary_voltage_v=t.number("secondary_voltage_v", "V", 0.0, 1e4, lo_open=True),
        leakage_h=t.number("secondary_leakage_inductance_mh", "mH", 0.0, 100.0, lo_open=True,
                           scale=1e-3),
        resistance_ohm=t.number("secondary_resistance_mohm", "mohm", 0.0, 1e4, scale=1e-3),
        breaker_delay_s=t.number("main_breaker_delay_ms", "ms", 0.0, 5000.0, scale=1e-3),
        max_arcing_s=(t.number("max_arcing_ms", "ms", 0.1, 200.0, scale=1e-3)
                      if t.has("max_arcing_ms") else 0.0),
        hardware_line_trip_a=(t.number("hardware_line_overcurrent_a", "A (primary peak)",
                                       0.0, 1e5, lo_open=True)
                              if t.has("hardware_line_overcurrent_a") else float("inf")),
    )
    t.finish()
    return tr


def parse_four_quadrant(t: Table) -> LineConverterParams:
    lc = LineConverterParams(
        switching_frequency_hz=t.number("switching_frequency_hz", "Hz", 0.0, 1e5, lo_open=True),
        device_threshold_v=t.number("device_threshold_v", "V", 0.0, 10.0),
        device_slope_ohm=t.number("device_slope_resistance_mohm", "mohm", 0.0, 1e3, scale=1e-3),
        **_switching_energy(t),
        precharge_ohm=t.number("precharge_resistance_ohm", "ohm", 0.0, 1e4, lo_open=True),
        precharge_delay_s=t.number("precharge_contactor_delay_ms", "ms", 0.0, 5000.0,
                                   scale=1e-3),
        line_contactor_delay_s=t.number("line_contactor_delay_ms", "ms", 0.0, 5000.0,
                                        scale=1e-3),
    )
    t.finish()
    return lc


def parse_dc_link(t: Table) -> DcLinkParams:
    kw = {}
    filter_keys = ("filter_inductance_mh", "filter_capacitance_mf", "filter_resistance_mohm")
    if any(t.has(k) for k in filter_keys):
        kw = dict(
            filter_inductance_h=t.number("filter_inductance_mh", "mH", 0.0, 1e3, lo_open=True,
                                         scale=1e-3),
            filter_capacitance_f=t.number("filter_capacitance_mf", "mF", 0.0, 1e3,
                                          lo_open=True, scale=1e-3),
            filter_resistance_ohm=t.number("filter_resistance_mohm", "mohm", 0.0, 1e4,
                                           scale=1e-3),
        )
    g = 1e3 / t.number("resistor_to_ambient_k_per_kw", "K/kW", 0.0, 1e4, lo_open=True)
    link = DcLinkParams(
        name=t.string("name"),
        voltage_v=t.number("nominal_voltage_v", "V", 0.0, 1e4, lo_open=True),
        capacitance_f=t.number("capacitance_mf", "mF", 0.0, 1e3, lo_open=True, scale=1e-3),
        discharge_ohm=t.number("discharge_resistance_kohm", "kohm", 0.0, 1e4, lo_open=True,
                               scale=1e3),
        overvoltage_v=t.number("overvoltage_v", "V", 0.0, 1e4, lo_open=True),
        chopper_ohm=t.number("chopper_resistance_ohm", "ohm", 0.0, 1e3, lo_open=True),
        resistor_capacity_j_per_k=t.number("resistor_time_constant_s", "s", 0.0, 1e5,
                                           lo_open=True) * g,
        resistor_conductance_w_per_k=g,
        **kw,
    )
    if link.overvoltage_v <= link.voltage_v:
        raise t.error("overvoltage_v", "must lie above nominal_voltage_v")
    chop = ("hardware_chopper_on_v", "hardware_chopper_off_v")
    if any(t.has(k) for k in chop):
        on = t.number(chop[0], "V", 0.0, 1e4, lo_open=True)
        off = t.number(chop[1], "V", 0.0, 1e4, lo_open=True)
        if not link.voltage_v < off < on:
            raise t.error(chop[1], f"needs nominal_voltage_v < {chop[1]} < {chop[0]} "
                          "(the hysteresis lies above the nominal voltage)")
        link = replace(link, hardware_chopper_on_v=on, hardware_chopper_off_v=off)
    t.finish()
    return link


#: factor keys of [[converter]] and their tolerance keys in [machine_spread]
MACHINE_FACTOR_KEYS = (("stator_resistance_factors", "stator_resistance_pct"),
                       ("rotor_resistance_factors", "rotor_resistance_pct"),
                       ("magnetising_inductance_factors", "magnetising_inductance_pct"))


def parse_machine_spread(t: Table):
    """[machine_spread]: a seeded generator and the tolerances (+-%, uniform) of the
    motors' stator and rotor resistances and magnetising inductance about the machine
    profile's values. IEC 60034-1 allows +-20 % on the slip of a machine of 1 kW or more
    (from memory), and slip follows the rotor resistance: a traction motor's tolerance is
    narrower, a few per cent."""
    seed = t.integer("seed", 0, 2**31 - 1)
    tol = [t.number(key, "%", 0.0, 20.0, scale=0.01) if t.has(key) else 0.0
           for _, key in MACHINE_FACTOR_KEYS]
    t.finish()
    return np.random.default_rng(seed), tol


def parse_machine_factors(ct: Table, n: int, spread) -> tuple[tuple[float, float, float], ...]:
    """Each motor's factors on R_s, R_r and L_m: explicit lists in [[converter]] where given,
    else drawn from [machine_spread] (in the profile's order of converters), else 1."""
    columns = []
    for key, _ in MACHINE_FACTOR_KEYS:
        if ct.has(key):
            values = ct.numbers(key, "1", 0.5, 2.0)
            if len(values) != n:
                raise ct.error(key, f"one factor per motor ({n}), got {len(values)}")
            columns.append(values)
        else:
            columns.append(None)
    if spread is None and all(c is None for c in columns):
        return ()
    drawn = ([tuple(1.0 + spread[0].uniform(-tol, tol, n)) for tol in spread[1]]
             if spread is not None else [(1.0,) * n] * 3)
    cols = [c if c is not None else d for c, d in zip(columns, drawn, strict=True)]
    return tuple(zip(*cols, strict=True))
