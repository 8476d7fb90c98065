"""Profiles: shipped ones load; bad ones fail naming the file, table, key and unit."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from emulator.profiles.reader import PROFILES_DIR, ProfileError, load_machine, load_trainset

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
MACHINE = PROFILES_DIR / "machines" / "tern-tm310.toml"


@pytest.mark.parametrize("path", sorted((PROFILES_DIR / "trainsets").glob("*.toml")))
def test_shipped_trainsets_load(path: Path) -> None:
    params = load_trainset(path)
    assert params.motor_count >= 4
    assert 120 / 3.6 <= params.train.max_speed_mps <= 200 / 3.6


def test_supply_systems_of_the_two_variants() -> None:
    a = load_trainset(PROFILES_DIR / "trainsets" / "tern-25kv.toml").supply
    b = load_trainset(PROFILES_DIR / "trainsets" / "tern-15kv.toml").supply
    assert (a.nominal_voltage_v, a.frequency_hz) == (25e3, 50.0)
    assert (b.nominal_voltage_v, b.frequency_hz) == (15e3, 16.7)


@pytest.mark.parametrize("path", sorted((PROFILES_DIR / "machines").glob("*.toml")))
def test_shipped_machines_load(path: Path) -> None:
    machine = load_machine(path)
    assert machine.magnetising_h > machine.stator_leakage_h


def test_reactances_are_converted_at_their_frequency() -> None:
    machine = load_machine(PROFILES_DIR / "machines" / "textbook-3hp.toml")
    assert machine.magnetising_h == pytest.approx(26.13 / (2 * math.pi * 60))


def edited(tmp_path: Path, source: Path, old: str, new: str) -> Path:
    text = source.read_text()
    assert old in text, old
    out = tmp_path / source.name
    out.write_text(text.replace(old, new, 1))
    if source.parent.name == "trainsets":  # keep the machine reference resolvable
        (tmp_path / "machines").mkdir(exist_ok=True)
        out = tmp_path / "trainsets" / source.name
        out.parent.mkdir(exist_ok=True)
        out.write_text(text.replace(old, new, 1))
        (tmp_path / "machines" / MACHINE.name).write_text(MACHINE.read_text())
    return out


@pytest.mark.parametrize(("old", "new", "key", "words"), [
    ("mass_kg = 190000.0", "", "mass_kg", "missing"),
    ("mass_kg = 190000.0", "mass_kgs = 190000.0", "'mass_kgs'", "misspelling"),
    ("ambient_temperature_degc = 25.0", "ambient_temperature_degc = 25.0\ncolour = 1", "colour",
     "unknown key"),
    ("mass_kg = 190000.0", 'mass_kg = "heavy"', "mass_kg", "expected a number in kg"),
    ("gear_ratio = 4.1", "gear_ratio = 0.0", "gear_ratio", "(0, 50]"),
    ("gear_ratio = 4.1", "gear_ratio = -3", "gear_ratio", "got -3"),
    ("wheel_diameters_m = [0.850, 0.850]", "wheel_diameters_m = []", "wheel_diameters_m",
     "at least 1"),
    ('dc_link = "DC-A"', 'dc_link = "DC-Z"', "dc_link", "expected one of DC-A, DC-B"),
    ("substep_us = 125.0", "substep_us = 70.0", "substep_us", "divide frame_ms"),
    ('rail_condition = "dry"', 'rail_condition = "icy"', "rail_condition", "dry, wet"),
    ("dead_time_us = 10.0", "dead_time_us = nan", "dead_time_us", "got nan"),
    ("axle_count = 16", "axle_count = 15.5", "axle_count", "whole number"),
    ("axle_count = 16", "axle_count = 6", "converter", "more motored axles"),
    ("axle_count = 16", "", "axle_count", "missing"),
    ("gear_ratio = 4.1", "gear_ratio = 4.1\naxle_load_kg = 15500.0", "axle_load_kg",
     "follows the train's mass"),
    ("shaft_stiffness_knm_per_rad = 102.0", "", "shaft_damping_nms_per_rad",
     "needs its spring"),
    ("coupler_height_m = 1.0", "", "bogie_wheelbase_m", "missing coupler_height_m"),
    ("axle_positions_m = [2.5, 5.0]", "axle_positions_m = [2.5]", "axle_positions_m",
     "one position per wheel"),
    ("axle_positions_m = [2.5, 5.0]   # behind the front end (cars of 24.5 m)", "",
     "wheel_diameters_m", "needs axle_positions_m"),
    ("brake_cylinder_time_constant_s = 0.5", "brake_cylinder_time_constant_s = -1",
     "brake_cylinder_time_constant_s", "got -1"),
])
def test_bad_trainset_names_file_table_and_key(tmp_path, old, new, key, words) -> None:
    path = edited(tmp_path, TRAINSET, old, new)
    with pytest.raises(ProfileError) as err:
        load_trainset(path)
    message = str(err.value)
    assert str(path) in message and key in message and words in message


@pytest.mark.parametrize(("old", "new", "key", "words"), [
    ("stator_resistance_ohm = 0.060", "stator_resistance_ohm = -0.06", "stator_resistance_ohm",
     "ohm in (0"),
    ("stator_leakage_inductance_h = 1.1e-3", "stator_leakage_inductance_h = 0.05",
     "stator_leakage_inductance_h", "smaller than the magnetising"),
    ("poles = 4", "poles = 5", "poles", "even number"),
    ("magnetising_flux_vs = [1.20, 2.10, 2.48, 2.75, 3.05, 3.35]",
     "magnetising_flux_vs = [1.20, 2.10]", "magnetising_flux_vs", "as many points"),
])
def test_bad_machine_names_key(tmp_path, old, new, key, words) -> None:
    path = edited(tmp_path, MACHINE, old, new)
    with pytest.raises(ProfileError) as err:
        load_machine(path)
    assert key in str(err.value) and words in str(err.value)


def test_axle_load_is_the_trains_weight_over_its_axles() -> None:
    p = load_trainset(TRAINSET)
    assert p.drivetrain.axle_load_n == pytest.approx(190000.0 * 9.80665 / 16)


def test_not_toml_and_missing_file(tmp_path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text("[train\nmass_kg = 1")
    with pytest.raises(ProfileError, match="not valid TOML"):
        load_trainset(bad)
    with pytest.raises(ProfileError, match="no such profile"):
        load_trainset(tmp_path / "absent.toml")


def test_profile_error_is_a_value_error() -> None:
    assert issubclass(ProfileError, ValueError)


def test_a_shaft_torque_transducer_only_where_the_profile_fits_one(tmp_path) -> None:
    """Service trains carry no shaft torque sensor: the shipped maps have no such signal;
    a profile that fits one gets one per motor, sampled through its channel as the
    sensor chain's equation says (emulator/rig/sensors.py: y = clip(gain x + offset))."""
    from emulator.plant import Plant
    from emulator.protocol.signal_map import build_signal_map
    from emulator.rig.sampling import DriverDemand, MeasurementSampler

    plain = load_trainset(TRAINSET)
    assert not any(s.name.endswith("shaft_torque_nm")
                   for s in build_signal_map(plain).measurements)
    fitted = load_trainset(edited(tmp_path, TRAINSET, "[sensors.current]", (
        "[sensors.shaft_torque]\ngain = 2.0\noffset_nm = 100.0\nnoise_rms_nm = 0.0\n"
        "filter_us = 0.0\nrange_min_nm = -4000.0\nrange_max_nm = 4000.0\n"
        "adc_bits = 0\n\n[sensors.current]")))
    smap = build_signal_map(fitted)
    names = [s.name for s in smap.measurements]
    fitted_names = [f"{m}.shaft_torque_nm" for m in fitted.motor_names]
    assert [n for n in names if n.endswith("shaft_torque_nm")] == fitted_names  # 8
    plant = Plant(fitted, ideal_dc_links=True)
    plant.set_speed(5.0)
    plant.set_rotor_torque(0, 1500.0)  # 2 x + 100 within the range
    plant.set_rotor_torque(1, 2500.0)  # 2 x + 100 beyond it: clipped
    for _ in range(300):
        plant.advance(None)
    sampler = MeasurementSampler(plant, smap, fitted.sensors, np.random.default_rng(0))
    y = sampler.sample(1e-3, DriverDemand())
    true = plant.read("motor.shaft_torque_nm")
    assert 1000.0 < true[0] < 1900.0 and true[1] > 1950.0
    assert y[names.index(fitted_names[0])] == pytest.approx(2.0 * true[0] + 100.0, rel=1e-12)
    assert y[names.index(fitted_names[1])] == 4000.0
