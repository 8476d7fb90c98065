"""The time bounds of the shipped scenarios whose starts are adhesion-limited (the wet
gradient start, the greasy patch), worked out from the trainset's specification and
Polach's creep-force law evaluated by hand (tests/scenario/specified_run.py has the
specified run and the allowances every bound takes)."""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import minimize_scalar

from emulator.plant.drivetrain import RAIL_CONDITIONS
from tests.oracles import polach_creep_force
from tests.scenario.specified_run import (
    ABOVE_BASE,
    BASE_KMH,
    BELOW_BASE,
    RAMP_FULL_S,
    G,
    Specified,
    accuracy_at,
    check_named,
    held_at_rest,
    held_before,
    shipped,
    step_start_s,
    tenths_above,
)

#: the share of the adhesion available at the peak of the creep curve a re-adhesion
#: control is expected to use (common practice, no source: modern controls are reported
#: at about 90 % and more, from memory)
ADHESION_USED = 0.90
def _polach_peak(v: float, q: float, kalker: float, params: tuple, v_ref: float) -> float:
    """The peak over the slip velocity of Polach's creep force on an axle
    (tests/oracles.py), at train speed v; N. The creep near standstill is
    w / sqrt(v^2 + v_ref^2), as the profile's creep reference speed makes it."""
    best = minimize_scalar(lambda w: -polach_creep_force(w, v, q, kalker, *params, v_ref),
                           bounds=(1e-4, 5.0), method="bounded", options={"xatol": 1e-7})
    return -best.fun


def test_wet_gradient_start_bound_is_the_adhesion_a_control_should_use() -> None:
    """Adhesion-limited: the motored axles at ADHESION_USED of their creep curves' peak
    (Polach's wet shape at the zone's mu0, the axle load of the mass spread over the
    axles: a pitch moves load between the axles of a motor car, whose four axles are all
    motored, so their sum stays), against the gradient and the running resistance."""
    scenario, trainset = shipped("wet-gradient-start")
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
    starts = step_start_s(scenario, accel["name"])
    check = check_named(scenario, "gets away")
    assert check["after"] == accel["name"]
    # the specified curve asks for more than the rail gives: adhesion-limited throughout
    peak_at_rest = _polach_peak(0.0, q, kalker, params, v_ref)
    assert spec.curve(check["rises_to"] / 3.6, False) > motored * peak_at_rest

    # the driver's hill-start aid keeps the holding brake on until the effort reaches 1.1
    # times the gradient's pull (emulator/scenario/driver.py), then lets it go
    assert held_before(scenario, accel["name"])
    at_rest = min(ADHESION_USED * motored * peak_at_rest, spec.curve(0.0, False))
    hill = 1.1 * spec.mass * (1.0 + train["rotating_mass_allowance"]) * G * slope
    assert hill < at_rest
    released = RAMP_FULL_S * hill / at_rest

    def rhs(t, y):
        v = y[0]
        grip = ADHESION_USED * motored * _polach_peak(v, q, kalker, params, v_ref)
        pull = min(grip, spec.curve(v, False)) * min(1.0, t / RAMP_FULL_S)
        pull -= spec.holding_brake(t, released)  # (forwards only)
        return [held_at_rest(v, (pull - spec.mass * G * slope - spec.resistance(v))
                              / spec.m_eff)]

    def passes(t, y):
        return y[0] * 3.6 - check["rises_to"]
    passes.terminal = True
    out = solve_ivp(rhs, (0.0, 300.0), [0.0], events=passes, rtol=1e-8, atol=1e-8,
                    max_step=0.1)
    bound = float(out.t_events[0][0])
    assert check["by_s"] == tenths_above(bound), bound
    assert scenario["scenario"]["duration_s"] >= starts + check["by_s"]

def test_greasy_patch_bound_is_the_adhesion_a_control_should_use_in_it() -> None:
    """Each motored axle gives its part of the curve within the controller's accuracy on
    the dry rail, and in the patch (from when the axle itself reaches it) at most
    ADHESION_USED of the greasy rail's creep peak (the dry shape of Polach, REFERENCES.md:
    k_A 1.0, k_S 0.4, A 0.4, B 0.6 s/m, at the plant's dry mu0 times the patch's
    factor)."""
    scenario, trainset = shipped("torsion-greasy-rail")
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
    check = check_named(scenario, "gets through")
    assert check["after"] == accel["name"] and accel["effort"] == 1.0
    accuracy = accuracy_at(BASE_KMH)

    released = 0.0 if held_before(scenario, accel["name"]) else None  # (t from the start)

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
        return [held_at_rest(v, (pull - spec.resistance(v)) / spec.m_eff), v]

    def passes(t, y):
        return y[0] * 3.6 - check["rises_to"]
    passes.terminal = True
    out = solve_ivp(rhs, (0.0, 300.0), [0.0, 0.0], events=passes, rtol=1e-8, atol=1e-8,
                    max_step=0.1)
    bound = float(out.t_events[0][0])
    x_end = out.y_events[0][0][1]
    assert zone["from_m"] < x_end - min(behind)  # (the leading axles in the patch by then)
    assert check["by_s"] == tenths_above(bound), bound


#: where the electric brake has faded out, m/s (from the blend speed down: the reference
#: controller's BRAKE_FADE_TO_MPS, about its speed window's resolution at the rail)
FADE_TO_MPS = 0.2


def _stop_on_the_mark(scenario: dict, trainset: dict, used: float,
                      accuracy: tuple[float, float]) -> tuple[float, float]:
    """Where and when (m, s) the low-adhesion scenario's train comes to rest (0.1 km/h),
    braked by the scenario driver's plan to its mark with a controller that gives its
    specified braking curve times ``accuracy`` (below, above base speed) and on the
    leaf patch, axle by axle, at most ``used`` of the patch's creep-curve peak.

    The driver's plan is the test rig's own (emulator/scenario/driver.py, as written
    there): it asks for a_req = v^2 / (2 max(s, 0.5 m)) to the mark s ahead, as the
    effort a_req m / F_available plus a trim it moves by 0.5 (a_req - a) a second
    (within +-0.5), m the mass with its rotating allowance, F_available the
    controller's reported effort (here its specified curve); its demand changes by at
    most demand_rate_per_s. Below the blend speed it asks no effort and the friction
    brake for m max(a_req, 0.05 m/s^2) (at most 300 kN), which the brake cylinders
    build with their time constant. The controller takes the demand at the rate of
    full effort in RAMP_FULL_S (specified_run.py), down as up, and its electric brake
    fades out linearly from the blend speed to FADE_TO_MPS (the brake blending of
    common practice, no source; the reference controller's design values)."""
    spec = Specified(trainset)
    train, drivetrain = trainset["train"], trainset["drivetrain"]
    (zone,) = scenario["track"]["low_adhesion"]
    (brake,) = [s for s in scenario["driver"]["step"] if s["mode"] == "brake"]
    mark = brake["stop_at_m"]
    params = (0.3, 0.1, 0.154 * zone["factor"], 0.4, 0.2)  # Polach's wet shape (above)
    q = spec.mass * G / train["axle_count"]
    kalker, v_ref = drivetrain["kalker_coefficient_n"], drivetrain["creep_reference_speed_mps"]
    behind = [a for c in trainset["converter"] for a in c["axle_positions_m"]]
    # the peak over speed on a grid (it varies by 0.3 % from one point to the next)
    grid = np.linspace(0.0, scenario["scenario"]["initial_speed_kmh"] / 3.6 + 1.0, 60)
    peaks = np.array([_polach_peak(v, q, kalker, params, v_ref) for v in grid])
    m_driver = spec.mass * (1.0 + train["rotating_mass_allowance"])
    blend = 1.0  # DriverSpec.blend_mps (asserted by the caller)
    rate = scenario["driver"].get("demand_rate_per_s", 1.0)
    stiff = 400.0  # 1/s: the rate-limited followers track their targets within a frame

    def rhs(t, y):
        v, x, demand, effort, trim, friction = y
        v = max(v, 0.0)
        a_req = v * v / (2.0 * max(mark - x, 0.5))
        curve = spec.curve(v, True)
        fade = min(max((v - FADE_TO_MPS) / (blend - FADE_TO_MPS), 0.0), 1.0)
        part = (effort * fade * curve * accuracy[1 if v * 3.6 >= BASE_KMH else 0]
                / len(behind))
        grip = used * float(np.interp(v, grid, peaks))
        electric = sum(min(part, grip) if zone["from_m"] <= x - a < zone["to_m"] else part
                       for a in behind)
        decel = (electric + friction + spec.resistance(v)) / spec.m_eff
        if v > blend:
            target = min(max(a_req * m_driver / curve + trim, 0.0), 1.0)
            d_trim = 0.5 * (a_req - decel)
            if abs(trim) >= 0.5 and d_trim * trim > 0:
                d_trim = 0.0
            wanted = 0.0
        else:
            target, d_trim = 0.0, 0.0
            wanted = min(m_driver * max(a_req, 0.05), 3e5)
        d_demand = min(max(stiff * (target - demand), -rate), rate)
        d_effort = min(max(stiff * (demand - effort), -1 / RAMP_FULL_S), 1 / RAMP_FULL_S)
        return [-decel if y[0] > 0 else 0.0, v, d_demand, d_effort, d_trim,
                (wanted - friction) / spec.brake_tau_s]

    def rests(t, y):
        return y[0] * 3.6 - 0.1
    rests.terminal = True
    out = solve_ivp(rhs, (0.0, scenario["scenario"]["duration_s"]),
                    [scenario["scenario"]["initial_speed_kmh"] / 3.6, 0.0, 0.0, 0.0, 0.0, 0.0],
                    events=rests, rtol=1e-7, atol=1e-7, max_step=0.02)
    assert out.t_events[0].size == 1, "the plan's train does not come to rest"
    return float(out.y_events[0][0][1]), float(out.t_events[0][0])


#: how far past a stop marker a stop still counts as on it, m (a driver's stopping
#: accuracy at a marker of about a metre: common practice, from memory; platform doors
#: ask for less, and an automatic train operation's)
STOPPING_TOLERANCE_M = 1.0


def test_low_adhesion_stop_bound_is_the_drivers_mark_with_the_patch_used() -> None:
    """Braking from 80 km/h to a mark through a leaf patch: the slide control at
    ADHESION_USED of the patch's peak (Polach's wet shape at the zone's mu0), the
    controller anywhere within its accuracy, and the driver's plan (above) bring the
    train to rest within STOPPING_TOLERANCE_M of its mark, the check's bound; a slide
    control that let the electric brake go on the patch would overrun it by metres, and
    one that used half the patch's adhesion would with a controller at the low end of
    its accuracy. (The time to a stand is no measure of it:
    a train that lost its brake on the patch runs faster for longer, and stands
    sooner.)"""
    from emulator.scenario.driver import DriverSpec

    scenario, trainset = shipped("low-adhesion-braking")
    (zone,) = scenario["track"]["low_adhesion"]
    assert zone["rail"] == "wet" and not zone.get("axles")
    assert RAIL_CONDITIONS["wet"] == (0.3, 0.1, 0.154, 0.4, 0.2)  # (the plant's, as read)
    assert DriverSpec().blend_mps == 1.0
    from emulator.controller import effort  # (the reference's fade, as read)
    assert (effort.BRAKE_FADE_FROM_MPS, effort.BRAKE_FADE_TO_MPS) == (1.0, FADE_TO_MPS)
    steps = scenario["driver"]["step"]
    # the driver begins its brake step at the first frame: the controller has reported
    # no available effort yet, so the stop ahead looks near (driver.py: within
    # v^2 / (2 x 0.2 m/s^2) + 5 v)
    v0 = scenario["scenario"]["initial_speed_kmh"] / 3.6
    assert [s["mode"] for s in steps] == ["coast", "brake"]
    mark = steps[1]["stop_at_m"]
    assert mark <= v0 * v0 / (2 * 0.2) + 5 * v0
    check = check_named(scenario, "the train stops on its mark")
    assert check["falls_to"] == 0.1 and "by_s" not in check
    assert check["by_m"] == mark + STOPPING_TOLERANCE_M
    ends = [(BELOW_BASE, ABOVE_BASE), (2 - BELOW_BASE, 2 - ABOVE_BASE)]
    for accuracy in ends:
        x, t = _stop_on_the_mark(scenario, trainset, ADHESION_USED, accuracy)
        assert mark <= x < check["by_m"], (accuracy, x)
        assert t < scenario["scenario"]["duration_s"]  # (it stands within the run)
    # a slide control that lets the electric brake go on the patch overruns it whatever
    # the controller's accuracy; one that uses half the patch's adhesion does at the low
    # end of it (at the high end the brake after the patch makes the stop up: 480.6 m)
    for used, accuracy in ((0.0, ends[0]), (0.0, ends[1]), (0.5 * ADHESION_USED, ends[0])):
        x, _ = _stop_on_the_mark(scenario, trainset, used, accuracy)
        assert x > check["by_m"] + 5.0, (used, accuracy, x)
