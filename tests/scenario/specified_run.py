"""The trainset's specified run, from which the shipped scenarios' time bounds are worked
out (tests/scenario/test_time_bounds.py, test_adhesion_bounds.py): the specified effort
curve and running resistance of a trainset profile, its masses with the motored
drivetrains' inertia, integrated by SciPy's ``solve_ivp`` (a reference library, not the
plant); what a scenario file and its trainset say, read from the files.

The allowances every bound takes, all outside the code under test:
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
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

from scipy.integrate import solve_ivp

PROFILES = Path(__file__).parents[2] / "profiles"
G = 9.81  # m/s^2, standard gravity
RAMP_FULL_S = 1.5  # full effort in this long (comfort jerk, see above)
BELOW_BASE, ABOVE_BASE = 0.95, 0.90  # the controller's effort accuracy, low end


def read_toml(path: Path) -> dict:
    return tomllib.loads(path.read_text(encoding="utf-8"))


def shipped(stem: str) -> tuple[dict, dict]:
    """A shipped scenario and its trainset, as read from their files."""
    path = PROFILES / "scenarios" / f"{stem}.toml"
    scenario = read_toml(path)
    trainset = read_toml((path.parent / scenario["scenario"]["trainset"]).resolve())
    return scenario, trainset


def check_named(scenario: dict, starts: str) -> dict:
    (check,) = [c for c in scenario["check"] if c["name"].startswith(starts)]
    return check


def step_start_s(scenario: dict, name: str) -> float:
    """When the driver's step ``name`` starts (the steps before it are timed)."""
    t = 0.0
    for step in scenario["driver"]["step"]:
        if step["name"] == name:
            return t
        t += step["for_s"]
    raise KeyError(name)


def held_at_rest(v: float, a: float) -> float:
    """A train at rest that its effort cannot move stays (the brakes of a standing train,
    static friction): it does not roll back in these bounds (nor brake below rest)."""
    return max(a, 0.0) if v <= 0.0 else a


def held_before(scenario: dict, name: str) -> bool:
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
        j_rotor = read_toml(machine_file.resolve())["machine"]["rotor_inertia_kgm2"]
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
            return [held_at_rest(v, a), v]

        def passes(t, y):
            return y[0] * 3.6 - to_kmh
        passes.terminal = True
        out = solve_ivp(rhs, (0.0, 300.0), [v0_kmh / 3.6, 0.0], events=passes, rtol=1e-9,
                        atol=1e-9, max_step=0.05)
        assert out.t_events[0].size == 1, "the specified run never gets there"
        return float(out.t_events[0][0])


def tenths_above(t: float) -> float:
    """A bound "by then at the latest" as a file gives it: to a tenth of a second,
    rounded up (so that a controller at the low end of its accuracy passes)."""
    return math.ceil(t * 10 - 1e-9) / 10


def tenths_below(t: float) -> float:
    """A bound a failure must not meet, as a file gives it: rounded down."""
    return math.floor(t * 10) / 10


def accuracy_at(base_kmh: float):
    """The low end of the controller's effort accuracy at a speed (m/s)."""
    return lambda t, v: BELOW_BASE if abs(v) * 3.6 < base_kmh else ABOVE_BASE


#: the Tern's base speed at 62 Hz (tests/scenario/test_characteristic.py)
BASE_KMH = 72.0

