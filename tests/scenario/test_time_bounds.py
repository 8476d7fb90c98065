"""The time bounds of the shipped scenarios' speed checks come from the trainset's
specification, not from a run: each is worked out here from the trainset profile's
specified effort curve (its ``[controller]`` maximum effort and power and the
natural-characteristic speed), its mass and running resistance, integrated by SciPy's
``solve_ivp`` (a reference library, not the plant), with the allowances each check's
comment names. A file whose bound drifts from its derivation fails here; so does a change
of the trainset that would move the bound.

The allowances, all outside the code under test:

- the effort reaches its demand at the rate of full effort in 1.5 s: a ramp, not a step.
  This is the reference controller's own jerk limit (about 0.6 m/s^3 on the Tern, below
  the 1.0-1.5 m/s^3 passengers accept: REFERENCES.md, from memory), so a controller
  whose ramp is gentler still needs about half its extra ramp time more than a bound
  gives (common practice, no source for a slowest acceptable ramp);
- a train held by the scenario driver's holding brake (a "hold" step) is let go as its
  brake cylinders let go (the profile's time constant), and on a gradient only once
  the effort reaches 1.1 times the gradient's pull (the driver's hill-start aid);
- the reference controller's effort at the rail within 5 % of the curve below base speed
  and 10 % above it (the controller issue's target, measured by
  tests/scenario/test_characteristic.py): a bound takes the low end;
- a hot rotor under rotor-flux-oriented control tuned for a cold one: the steady-state
  torque ratio T/T* = k (1 + x^2) / (k^2 + x^2), k = R_r,true / R_r,model, x = i_q / i_d
  (Novotny & Lipo, *Vector Control and Dynamics of AC Drives*, ch. 5, detuning of
  indirect field orientation; linear magnetics; from memory), whose least value over
  x >= 0 is 1 / k (at no load); R(T) = R_20 (1 + 0.00393 (T - 20 degC)) for copper
  (common practice).
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from emulator.plant.drivetrain import RAIL_CONDITIONS

PROFILES = Path(__file__).parents[2] / "profiles"
G = 9.81  # m/s^2, standard gravity
RAMP_FULL_S = 1.5  # full effort in this long (comfort jerk, see above)
BELOW_BASE, ABOVE_BASE = 0.95, 0.90  # the controller's effort accuracy, low end


def _toml(path: Path) -> dict:
    return tomllib.loads(path.read_text(encoding="utf-8"))


def _scenario(stem: str) -> tuple[dict, dict]:
    """A shipped scenario and its trainset, as read from their files."""
    path = PROFILES / "scenarios" / f"{stem}.toml"
    scenario = _toml(path)
    trainset = _toml((path.parent / scenario["scenario"]["trainset"]).resolve())
    return scenario, trainset


def _check(scenario: dict, starts: str) -> dict:
    (check,) = [c for c in scenario["check"] if c["name"].startswith(starts)]
    return check


def _step_start_s(scenario: dict, name: str) -> float:
    """When the driver's step ``name`` starts (the steps before it are timed)."""
    t = 0.0
    for step in scenario["driver"]["step"]:
        if step["name"] == name:
            return t
        t += step["for_s"]
    raise KeyError(name)


def _held_at_rest(v: float, a: float) -> float:
    """A train at rest that its effort cannot move stays (the brakes of a standing train,
    static friction): it does not roll back in these bounds (nor brake below rest)."""
    return max(a, 0.0) if v <= 0.0 else a


def _held(scenario: dict, name: str) -> bool:
    """Whether the driver's step before ``name`` holds the train on its brake."""
    steps = scenario["driver"]["step"]
    i = next(j for j, step in enumerate(steps) if step["name"] == name)
    return i > 0 and steps[i - 1]["mode"] == "hold"


class Specified:
    """The trainset's specified run: the effort curve (constant effort, then constant
    power, then above the natural-characteristic speed falling as 1/v^2: the motors'
    torque through gear and wheel) and the Davis running resistance, on the train's mass
    with its rotating allowance (the trailer wheelsets) and the motored drivetrains'
    inertia referred to the rail, sum (J_wheelset + J_gear + J_rotor i^2) / r^2 (what the
    motors' torque spends on turning them faster does not reach the rail)."""

    def __init__(self, trainset: dict) -> None:
        train, ctl, dt = trainset["train"], trainset["controller"], trainset["drivetrain"]
        machine_file = PROFILES / "trainsets" / trainset["trainset"]["machine_profile"]
        j_rotor = _toml(machine_file.resolve())["machine"]["rotor_inertia_kgm2"]
        j_axle = (dt["wheelset_inertia_kgm2"] + dt["gear_inertia_kgm2"]
                  + j_rotor * dt["gear_ratio"] ** 2)
        radii = [d / 2 for c in trainset["converter"] for d in c["wheel_diameters_m"]]
        self.mass = train["mass_kg"]
        self.m_eff = (self.mass * (1.0 + train["rotating_mass_allowance"])
                      + sum(j_axle / r ** 2 for r in radii))
        self.davis = (train["running_resistance_a_n"], train["running_resistance_b_n_per_mps"],
                      train["running_resistance_c_n_per_mps2"])
        self.traction = (ctl["max_tractive_effort_kn"] * 1e3, ctl["max_tractive_power_kw"] * 1e3)
        self.braking = (ctl["max_braking_effort_kn"] * 1e3, ctl["max_braking_power_kw"] * 1e3)
        self.v_natural = ctl["natural_characteristic_from_kmh"] / 3.6
        # the scenario driver's holding brake in a "hold" step (emulator/scenario/
        # driver.py: half the mass's weight in newtons over g, at most 300 kN: the test
        # rig's own driver, not the controller) and the brake cylinders' lag, with which
        # it lets go when the step ends
        self.hold_brake_n = min(self.mass * (1.0 + train["rotating_mass_allowance"]) * 0.5,
                                3e5)
        self.brake_tau_s = train["brake_cylinder_time_constant_s"]

    def holding_brake(self, t: float, released_s: float | None) -> float:
        """The holding brake's force at t (N), let go at released_s (None: never held)."""
        if released_s is None:
            return 0.0
        if t < released_s:
            return self.hold_brake_n
        return self.hold_brake_n * math.exp(-(t - released_s) / self.brake_tau_s)

    def curve(self, v: float, braking: bool) -> float:
        """The specified effort at speed v (m/s), N."""
        f_max, p_max = self.braking if braking else self.traction
        v = max(abs(v), 1e-6)
        f = min(f_max, p_max / v)
        if v > self.v_natural:
            f = min(f, p_max * self.v_natural / (v * v))
        return f

    def resistance(self, v: float) -> float:
        a, b, c = self.davis
        return math.copysign(a + b * abs(v) + c * v * v, v) if v != 0.0 else 0.0

    def time_to(self, v0_kmh: float, to_kmh: float, starts_s: float, effort: float,
                share=lambda t, v: 1.0, braking: bool = False,
                slope=lambda x: 0.0, held: bool = False) -> float:
        """When the train, at v0_kmh from 0 s and 0 m, coasting until starts_s (held by
        the driver's holding brake until then, with ``held``) and then asked for
        ``effort`` of the curve (ramped at full effort in RAMP_FULL_S), times share(t, v),
        first passes to_kmh; s from 0. slope(x): the gradient (rising > 0) and curve
        resistance at x m, per unit of the weight."""
        released = starts_s if held else None
        ramp_s = RAMP_FULL_S * effort

        def rhs(t, y):
            v, x = y
            f = 0.0
            if t >= starts_s:
                f = (effort * min(1.0, (t - starts_s) / ramp_s) * self.curve(v, braking)
                     * share(t, v))
            f = -f if braking else f
            f -= self.holding_brake(t, released)  # (these runs go forwards only)
            a = (f - self.resistance(v) - self.mass * G * slope(x)) / self.m_eff
            return [_held_at_rest(v, a), v]

        def passes(t, y):
            return y[0] * 3.6 - to_kmh
        passes.terminal = True
        out = solve_ivp(rhs, (0.0, 300.0), [v0_kmh / 3.6, 0.0], events=passes, rtol=1e-9,
                        atol=1e-9, max_step=0.05)
        assert out.t_events[0].size == 1, "the specified run never gets there"
        return float(out.t_events[0][0])


def _tenths_above(t: float) -> float:
    """A bound "by then at the latest" as a file gives it: to a tenth of a second,
    rounded up (so that a controller at the low end of its accuracy passes)."""
    return math.ceil(t * 10 - 1e-9) / 10


def _tenths_below(t: float) -> float:
    """A bound a failure must not meet, as a file gives it: rounded down."""
    return math.floor(t * 10) / 10


def _accuracy(base_kmh: float):
    """The low end of the controller's effort accuracy at a speed (m/s)."""
    return lambda t, v: BELOW_BASE if abs(v) * 3.6 < base_kmh else ABOVE_BASE


#: the Tern's base speed at 62 Hz (tests/scenario/test_characteristic.py)
BASE_KMH = 72.0


def test_rotor_detuning_bound_is_the_detuned_drives_least_torque() -> None:
    scenario, trainset = _scenario("rotor-detuning")
    spec = Specified(trainset)
    machine_file = PROFILES / "trainsets" / trainset["trainset"]["machine_profile"]
    machine = _toml(machine_file.resolve())["machine"]
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
    check = _check(scenario, "the train accelerates")
    bound = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                         _step_start_s(scenario, accel["name"]), accel["effort"],
                         lambda t, v: share * _accuracy(BASE_KMH)(t, v))
    assert "after" not in check
    assert check["by_s"] == _tenths_above(bound), bound
    # and the bound is worth having: a train that lost the two hot motors' torque
    # altogether takes longer
    lost = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                        _step_start_s(scenario, accel["name"]), accel["effort"],
                        lambda t, v: (motors - len(hot)) / motors)
    assert lost > check["by_s"]


def test_speed_sensor_loss_bound_is_the_train_without_the_inverter() -> None:
    """"Must not cut traction for good": the bound is when the train would get there had
    INV-A1 (2 of 8 motors) stopped for good at the loss and the rest given the curve at
    the top of the controller's accuracy (5 % over it), so that no such controller
    passes; one that keeps INV-A1 driving within its accuracy gets there sooner."""
    scenario, trainset = _scenario("speed-sensor-loss")
    spec = Specified(trainset)
    (loss,) = [f for f in scenario["fault"] if f["name"] == "encoder-channel-loss"]
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = _check(scenario, "traction kept")
    starts = _step_start_s(scenario, accel["name"])
    axles = {c["name"]: len(c["wheel_diameters_m"]) for c in trainset["converter"]}
    kept_share = 1.0 - axles[loss["target"].split(".")[0]] / sum(axles.values())
    held = _held(scenario, accel["name"])
    def cut_share(t: float, v: float) -> float:
        return (2 - BELOW_BASE) * (1.0 if t < loss["at_s"] else kept_share)

    cut = spec.time_to(0.0, check["rises_to"], starts, accel["effort"], cut_share,
                       held=held)
    kept = spec.time_to(0.0, check["rises_to"], starts, accel["effort"],
                        _accuracy(BASE_KMH), held=held)
    assert "after" not in check
    assert check["by_s"] == _tenths_below(cut), cut
    assert kept < check["by_s"] - 0.5  # room for the second or so the fault's handover takes


def test_regeneration_bound_is_the_braking_curve() -> None:
    """Into a non-receptive line the resistors take what the line refuses: the braking
    effort stays the specified curve's (within the controller's accuracy)."""
    scenario, trainset = _scenario("regeneration-non-receptive")
    spec = Specified(trainset)
    brake = next(s for s in scenario["driver"]["step"] if s["mode"] == "brake")
    check = _check(scenario, "electric braking kept")
    starts = _step_start_s(scenario, brake["name"])
    bound = spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["falls_to"],
                         starts, brake["effort"], _accuracy(BASE_KMH), braking=True)
    assert check["after"] == brake["name"]
    assert check["by_s"] == _tenths_above(bound - starts), bound - starts
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


#: the share of the adhesion available at the peak of the creep curve a re-adhesion
#: control is expected to use (common practice, no source: modern controls are reported
#: at about 90 % and more, from memory)
ADHESION_USED = 0.90
def _polach_peak(v: float, q: float, kalker: float, params: tuple, v_ref: float) -> float:
    """The peak over the slip velocity of Polach's creep force on an axle (Wear 258,
    2005, as REFERENCES.md gives it, evaluated here by hand: see
    tests/plant/test_adhesion.py), at train speed v; N. The creep near standstill is
    w / sqrt(v^2 + v_ref^2), as the profile's creep reference speed makes it."""
    from scipy.optimize import minimize_scalar

    k_a, k_s, mu0, a, b = params

    def minus_force(w: float) -> float:
        mu = mu0 * ((1 - a) * math.exp(-b * w) + a)
        eps = math.pi * kalker / 4 / (q * mu) * w / math.hypot(v, v_ref)
        return -2 * q * mu / math.pi * (k_a * eps / (1 + (k_a * eps) ** 2)
                                        + math.atan(k_s * eps))

    best = minimize_scalar(minus_force, bounds=(1e-4, 5.0), method="bounded",
                           options={"xatol": 1e-7})
    return -best.fun


def test_wet_gradient_start_bound_is_the_adhesion_a_control_should_use() -> None:
    """Adhesion-limited: the motored axles at ADHESION_USED of their creep curves' peak
    (Polach's wet shape at the zone's mu0, the axle load of the mass spread over the
    axles: a pitch moves load between the axles of a motor car, whose four axles are all
    motored, so their sum stays), against the gradient and the running resistance."""
    scenario, trainset = _scenario("wet-gradient-start")
    spec = Specified(trainset)
    train, drivetrain = trainset["train"], trainset["drivetrain"]
    (zone,) = scenario["track"]["low_adhesion"]
    (grade,) = scenario["track"]["gradient"]
    assert zone["rail"] == "wet" and zone["from_m"] <= -100 and zone["to_m"] >= 100
    # Polach's wet shape (REFERENCES.md: k_A 0.3, k_S 0.1, A 0.4, B 0.2 s/m) with the
    # plant's wet mu0 (its shape's peak set to the wet 0.10-0.20 of the literature)
    params = (0.3, 0.1, 0.154 * zone["factor"], 0.4, 0.2)
    assert RAIL_CONDITIONS["wet"] == (0.3, 0.1, 0.154, 0.4, 0.2)  # (the plant's, as read)
    motored = len([d for c in trainset["converter"] for d in c["wheel_diameters_m"]])
    q = spec.mass * G / train["axle_count"]
    kalker = drivetrain["kalker_coefficient_n"]
    v_ref = drivetrain["creep_reference_speed_mps"]
    slope = grade["permille"] / 1000
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    starts = _step_start_s(scenario, accel["name"])
    check = _check(scenario, "gets away")
    assert check["after"] == accel["name"]
    # the specified curve asks for more than the rail gives: adhesion-limited throughout
    peak_at_rest = _polach_peak(0.0, q, kalker, params, v_ref)
    assert spec.curve(check["rises_to"] / 3.6, False) > motored * peak_at_rest

    # the driver's hill-start aid keeps the holding brake on until the effort reaches 1.1
    # times the gradient's pull (emulator/scenario/driver.py), then lets it go
    assert _held(scenario, accel["name"])
    at_rest = min(ADHESION_USED * motored * peak_at_rest, spec.curve(0.0, False))
    hill = 1.1 * spec.mass * (1.0 + train["rotating_mass_allowance"]) * G * slope
    assert hill < at_rest
    released = RAMP_FULL_S * hill / at_rest

    def rhs(t, y):
        v = y[0]
        grip = ADHESION_USED * motored * _polach_peak(v, q, kalker, params, v_ref)
        pull = min(grip, spec.curve(v, False)) * min(1.0, t / RAMP_FULL_S)
        pull -= spec.holding_brake(t, released)  # (forwards only)
        return [_held_at_rest(v, (pull - spec.mass * G * slope - spec.resistance(v))
                              / spec.m_eff)]

    def passes(t, y):
        return y[0] * 3.6 - check["rises_to"]
    passes.terminal = True
    out = solve_ivp(rhs, (0.0, 300.0), [0.0], events=passes, rtol=1e-8, atol=1e-8,
                    max_step=0.1)
    bound = float(out.t_events[0][0])
    assert check["by_s"] == _tenths_above(bound), bound
    assert scenario["scenario"]["duration_s"] >= starts + check["by_s"]


def _without_one_inverter(trainset: dict, at_s: float):
    """The share of a train that loses one of its inverters (all alike) for good at at_s,
    the others within the controller's accuracy."""
    accuracy = _accuracy(BASE_KMH)
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
    scenario, trainset = _scenario(stem)
    spec = Specified(trainset)
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = _check(scenario, check_name)
    (at_s,) = [f["at_s"] for f in scenario["fault"] if f.get("label") == fault]
    bound = spec.time_to(scenario["scenario"].get("initial_speed_kmh", 0.0), check["rises_to"],
                         _step_start_s(scenario, accel["name"]), accel["effort"],
                         _without_one_inverter(trainset, at_s),
                         held=_held(scenario, accel["name"]))
    assert "after" not in check
    assert check["by_s"] == _tenths_above(bound), bound


def test_four_modes_bound_is_the_curve_up_the_gradient() -> None:
    """Full effort (the driver's default) up the 2 per mille and through the 800 m curve
    (Roeckl's curve resistance, 650 / (R - 55) per mille: REFERENCES.md, from memory)."""
    scenario, trainset = _scenario("four-modes")
    spec = Specified(trainset)
    track = scenario["track"]
    grades = sorted((g["from_m"], g["permille"] / 1000) for g in track["gradient"])
    curves = [(c["from_m"], c["to_m"], 0.650 / (c["radius_m"] - 55.0)) for c in track["curve"]]
    assert all(c["radius_m"] >= 300 for c in track["curve"])  # (the formula's range)

    def slope(x: float) -> float:
        grade = next((g for start, g in reversed(grades) if x >= start), 0.0)
        return grade + sum(w for a, b, w in curves if a <= x < b)

    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    starts = _step_start_s(scenario, accel["name"])
    check = _check(scenario, "reaches 60 km/h")
    bound = spec.time_to(0.0, check["rises_to"], starts, accel.get("effort", 1.0),
                         _accuracy(BASE_KMH), slope=slope)
    assert check["after"] == accel["name"]
    assert check["by_s"] == _tenths_above(bound - starts), bound - starts


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
    accuracy = _accuracy(BASE_KMH)

    def share(t: float, v: float) -> float:
        if dip["at_s"] <= t < dip["until_s"]:
            return accuracy(t, v) * dip["params"]["voltage_pu"]
        if cut["at_s"] <= t < back["at_s"] + 1.0:
            return 0.0
        return accuracy(t, v)

    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = _check(scenario, "the train keeps accelerating")
    return spec.time_to(scenario["scenario"]["initial_speed_kmh"], check["rises_to"],
                        _step_start_s(scenario, accel["name"]), accel["effort"], share)


def test_catenary_dip_bound_allows_the_line_what_it_takes_away() -> None:
    scenario, trainset = _scenario("catenary-dip-interruption")
    bound = catenary_dip_bound(scenario, trainset)
    assert "after" not in _check(scenario, "the train keeps accelerating")
    assert _check(scenario, "the train keeps accelerating")["by_s"] == _tenths_above(bound), bound


def test_greasy_patch_bound_is_the_adhesion_a_control_should_use_in_it() -> None:
    """Each motored axle gives its part of the curve within the controller's accuracy on
    the dry rail, and in the patch (from when the axle itself reaches it) at most
    ADHESION_USED of the greasy rail's creep peak (the dry shape of Polach, REFERENCES.md:
    k_A 1.0, k_S 0.4, A 0.4, B 0.6 s/m, at the plant's dry mu0 times the patch's
    factor)."""
    scenario, trainset = _scenario("torsion-greasy-rail")
    spec = Specified(trainset)
    train, drivetrain = trainset["train"], trainset["drivetrain"]
    (zone,) = scenario["track"]["low_adhesion"]
    assert zone["rail"] == "dry" and zone["cleaning_per_axle"] == 0.0
    params = (1.0, 0.4, 0.324 * zone["factor"], 0.4, 0.6)
    assert RAIL_CONDITIONS["dry"] == (1.0, 0.4, 0.324, 0.4, 0.6)  # (the plant's, as read)
    motored = len([d for c in trainset["converter"] for d in c["wheel_diameters_m"]])
    q = spec.mass * G / train["axle_count"]
    kalker, v_ref = drivetrain["kalker_coefficient_n"], drivetrain["creep_reference_speed_mps"]
    accel = next(s for s in scenario["driver"]["step"] if s["mode"] == "accelerate")
    check = _check(scenario, "gets through")
    assert check["after"] == accel["name"] and accel["effort"] == 1.0
    accuracy = _accuracy(BASE_KMH)

    released = 0.0 if _held(scenario, accel["name"]) else None  # (t from the start)

    # where each motored axle runs, behind the train's front end (its position)
    behind = [a for c in trainset["converter"] for a in c["axle_positions_m"]]
    assert len(behind) == motored

    def rhs(t, y):
        v, x = y
        share = spec.curve(v, False) * accuracy(t, v) / motored  # an axle's part
        grip = ADHESION_USED * _polach_peak(v, q, kalker, params, v_ref)
        pull = sum(min(share, grip) if zone["from_m"] <= x - a < zone["to_m"] else share
                   for a in behind)
        pull *= min(1.0, t / RAMP_FULL_S)
        pull -= spec.holding_brake(t, released)  # (forwards only)
        return [_held_at_rest(v, (pull - spec.resistance(v)) / spec.m_eff), v]

    def passes(t, y):
        return y[0] * 3.6 - check["rises_to"]
    passes.terminal = True
    out = solve_ivp(rhs, (0.0, 300.0), [0.0, 0.0], events=passes, rtol=1e-8, atol=1e-8,
                    max_step=0.1)
    bound = float(out.t_events[0][0])
    x_end = out.y_events[0][0][1]
    assert zone["from_m"] < x_end - min(behind)  # (the leading axles in the patch by then)
    assert check["by_s"] == _tenths_above(bound), bound
