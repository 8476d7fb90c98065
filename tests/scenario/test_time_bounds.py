"""The time bounds of the shipped scenarios' speed checks come from the trainset's
specification, not from a run: each is worked out here from the trainset profile's
specified effort curve (its ``[controller]`` maximum effort and power and the
natural-characteristic speed), its mass and running resistance, integrated by SciPy's
``solve_ivp`` (a reference library, not the plant), with the allowances each check's
comment names (tests/scenario/specified_run.py). A file whose bound drifts from its
derivation fails here; so does a change of the trainset that would move the bound.

Besides the allowances of specified_run.py:

- a hot rotor under rotor-flux-oriented control tuned for a cold one: the steady-state
  torque ratio T/T* = k (1 + x^2) / (k^2 + x^2), k = R_r,true / R_r,model, x = i_q / i_d
  (Novotny & Lipo, *Vector Control and Dynamics of AC Drives*, ch. 5, detuning of
  indirect field orientation; linear magnetics; from memory), whose least value over
  x >= 0 is 1 / k (at no load); R(T) = R_20 (1 + 0.00393 (T - 20 degC)) for copper
  (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.scenario.specified_run import (
    BASE_KMH,
    BELOW_BASE,
    PROFILES,
    Specified,
    accuracy_at,
    check_named,
    held_before,
    read_toml,
    shipped,
    step_start_s,
    tenths_above,
    tenths_below,
)


def test_rotor_detuning_bound_is_the_detuned_drives_least_torque() -> None:
    scenario, trainset = shipped("rotor-detuning")
    spec = Specified(trainset)
    machine_file = PROFILES / "trainsets" / trainset["trainset"]["machine_profile"]
    machine = read_toml(machine_file.resolve())["machine"]
    alpha = machine["rotor_temperature_coefficient_per_k"]
    hot = [f["params"]["temperature_degc"] for f in scenario["fault"]
           if f["name"] == "rotor-temperature"]
    motors = len([d for c in trainset["converter"] for d in c["wheel_diameters_m"]])
    k = (1 + alpha * (hot[0] - 20.0)) / (1 + alpha * (machine["resistance_temperature_degc"]
                                                      - 20.0))
    assert k == pytest.approx(1.511, abs=1e-3)
    # the detuned motors give at least 1/k of their torque, the others all of it; both
    # within the controller's accuracy
    share = (motors - len(hot) + len(hot) / k) / motors
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = check_named(scenario, "the train accelerates")
    bound = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                         step_start_s(scenario, accel["name"]), accel["effort"],
                         lambda t, v: share * accuracy_at(BASE_KMH)(t, v))
    assert "after" not in check
    assert check["by_s"] == tenths_above(bound), bound
    # and the bound is worth having: a train that lost the two hot motors' torque
    # altogether takes longer
    lost = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                        step_start_s(scenario, accel["name"]), accel["effort"],
                        lambda t, v: (motors - len(hot)) / motors)
    assert lost > check["by_s"]


def test_speed_sensor_loss_bound_is_the_train_without_the_inverter() -> None:
    """"Must not cut traction for good": the bound is when the train would get there had
    INV-A1 (2 of 8 motors) stopped for good at the loss and the rest given the curve at
    the top of the controller's accuracy (5 % over it), so that no such controller
    passes; one that keeps INV-A1 driving within its accuracy gets there sooner."""
    scenario, trainset = shipped("speed-sensor-loss")
    spec = Specified(trainset)
    (loss,) = [f for f in scenario["fault"] if f["name"] == "encoder-channel-loss"]
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = check_named(scenario, "traction kept")
    starts = step_start_s(scenario, accel["name"])
    axles = {c["name"]: len(c["wheel_diameters_m"]) for c in trainset["converter"]}
    kept_share = 1.0 - axles[loss["target"].split(".")[0]] / sum(axles.values())
    held = held_before(scenario, accel["name"])
    def cut_share(t: float, v: float) -> float:
        return (2 - BELOW_BASE) * (1.0 if t < loss["at_s"] else kept_share)

    cut = spec.time_to(0.0, check["rises_to"], starts, accel["effort"], cut_share,
                       held=held)
    kept = spec.time_to(0.0, check["rises_to"], starts, accel["effort"],
                        accuracy_at(BASE_KMH), held=held)
    assert "after" not in check
    assert check["by_s"] == tenths_below(cut), cut
    assert kept < check["by_s"] - 0.5  # room for the second or so the fault's handover takes


def test_regeneration_bound_is_the_braking_curve() -> None:
    """Into a non-receptive line the resistors take what the line refuses: the braking
    effort stays the specified curve's (within the controller's accuracy)."""
    scenario, trainset = shipped("regeneration-non-receptive")
    spec = Specified(trainset)
    brake = next(s for s in scenario["driver"]["step"] if s["mode"] == "brake")
    check = check_named(scenario, "electric braking kept")
    starts = step_start_s(scenario, brake["name"])
    bound = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["falls_to"],
                         starts, brake["effort"], accuracy_at(BASE_KMH), braking=True)
    assert check["after"] == brake["name"]
    assert check["by_s"] == tenths_above(bound - starts), bound - starts
    # the sinks can take the curve's power at the top speed of the check: the two
    # brake resistors at the link's nominal voltage and what the line takes up to U_max1
    links = trainset["dc_link"]
    u_d = np.array([d["nominal_voltage_v"] for d in links])
    r = np.array([d["chopper_resistance_ohm"] for d in links])
    droop = next(f for f in scenario["fault"] if f["name"] == "non-receptive-line")
    # EN 50163 table 1: U_max1 17.25 kV on the 15 kV system (REFERENCES.md)
    assert trainset["supply"]["nominal_voltage_kv"] == 15.0
    rise_v = 17.25e3 - trainset["supply"]["nominal_voltage_kv"] * 1e3
    line_w = rise_v / droop["params"]["droop_v_per_kw"] * 1e3
    v = scenario["scenario"]["initial_speed_kmh"] / 3.6
    assert float(np.sum(u_d ** 2 / r)) + line_w > spec.curve(v, braking=True) * v



def _without_one_inverter(trainset: dict, at_s: float):
    """The share of a train that loses one of its inverters (all alike) for good at at_s,
    the others within the controller's accuracy."""
    accuracy = accuracy_at(BASE_KMH)
    inverters = len(trainset["converter"])
    assert len({len(c["wheel_diameters_m"]) for c in trainset["converter"]}) == 1
    kept = (inverters - 1) / inverters
    return lambda t, v: accuracy(t, v) * (1.0 if t < at_s else kept)


@pytest.mark.parametrize(("stem", "check_name", "fault"), [
    ("igbt-wont-turn-on", "the train keeps accelerating", "IGBT fault"),
    ("protections", "the other inverters carry the train", "transducer a"),
])
def test_a_lost_inverter_bound_is_the_train_on_the_other_three(stem, check_name,
                                                               fault) -> None:
    """"The train goes on with the healthy inverters": the bound is when the train gets
    there with the faulted inverter lost for good at the fault and the other three
    within the controller's accuracy."""
    scenario, trainset = shipped(stem)
    spec = Specified(trainset)
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = check_named(scenario, check_name)
    (at_s,) = [f["at_s"] for f in scenario["fault"] if f.get("label") == fault]
    bound = spec.time_to(scenario["scenario"].get("initial_speed_kmh", 0.0), check["rises_to"],
                         step_start_s(scenario, accel["name"]), accel["effort"],
                         _without_one_inverter(trainset, at_s),
                         held=held_before(scenario, accel["name"]))
    assert "after" not in check
    assert check["by_s"] == tenths_above(bound), bound


def test_four_modes_bound_is_the_curve_up_the_gradient() -> None:
    """Full effort (the driver's default) up the 2 per mille and through the 800 m curve
    (Roeckl's curve resistance, 650 / (R - 55) per mille: REFERENCES.md, from memory)."""
    scenario, trainset = shipped("four-modes")
    spec = Specified(trainset)
    track = scenario["track"]
    grades = sorted((g["from_m"], g["permille"] / 1000) for g in track["gradient"])
    curves = [(c["from_m"], c["to_m"], 0.650 / (c["radius_m"] - 55.0)) for c in track["curve"]]
    assert all(c["radius_m"] >= 300 for c in track["curve"])  # (the formula's range)

    def slope(x: float) -> float:
        grade = next((g for start, g in reversed(grades) if x >= start), 0.0)
        return grade + sum(w for a, b, w in curves if a <= x < b)

    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    starts = step_start_s(scenario, accel["name"])
    check = check_named(scenario, "reaches 60 km/h")
    bound = spec.time_to(0.0, check["rises_to"], starts, accel.get("effort", 1.0),
                         accuracy_at(BASE_KMH), slope=slope)
    assert check["after"] == accel["name"]
    assert check["by_s"] == tenths_above(bound - starts), bound - starts


def catenary_dip_bound(scenario: dict, trainset: dict) -> float:
    """When the train of the dip-and-interruption scenario (or a variant of it) passes its
    "keeps accelerating" speed at the latest, s: the effort at 0.8 of the curve within the
    controller's accuracy, less what the line takes away: during the dip the line
    converters' power at their current limit scales with the voltage (the effort with
    it), and from the interruption to a second after the return (the scenario's own
    "power flows again within 1 s") no traction."""
    spec = Specified(trainset)
    faults = {f["label"]: f for f in scenario["fault"]}
    dip, cut, back = faults["dip"], faults["interruption"], faults["return"]
    accuracy = accuracy_at(BASE_KMH)

    def share(t: float, v: float) -> float:
        if dip["at_s"] <= t < dip["until_s"]:
            return accuracy(t, v) * dip["params"]["voltage_pu"]
        if cut["at_s"] <= t < back["at_s"] + 1.0:
            return 0.0
        return accuracy(t, v)

    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = check_named(scenario, "the train keeps accelerating")
    return spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                        step_start_s(scenario, accel["name"]), accel["effort"], share)


def test_catenary_dip_bound_allows_the_line_what_it_takes_away() -> None:
    scenario, trainset = shipped("catenary-dip-interruption")
    bound = catenary_dip_bound(scenario, trainset)
    check = check_named(scenario, "the train keeps accelerating")
    assert "after" not in check
    assert check["by_s"] == tenths_above(bound), bound
