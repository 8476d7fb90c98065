"""The reference controller's effort curve and its power-flow factors.

The tractive-effort curve per motor has three regions: constant torque (OVERLOAD x rated),
constant power (POWER_OVERLOAD x rated), and above the natural-characteristic speed a
torque falling as 1/w^2 with the breakdown torque (the profile's
natural_characteristic_from_kmh; common practice of traction curves). The gear's loss and
the drive's efficiency are taken by the direction the power flows.
"""

from __future__ import annotations

import math

from .config import ControllerConfig

GEAR_EFFICIENCY = 0.975  # design value of the TCU's effort estimate
#: motor, gear and inverter efficiency the line converters' feed-forward expects near the
#: rated point (traction drives of a few hundred kW: common practice, no source)
FEEDFORWARD_EFFICIENCY = 0.93
OVERLOAD = 1.4  # starting torque / rated torque
POWER_OVERLOAD = 1.1  # maximum power / rated power, per motor
#: the electric brake fades out towards standstill, where the friction brake takes the
#: stop over (brake blending: electric braking faded out below a few km/h is common
#: practice, no source): whole at BRAKE_FADE_FROM_MPS (the scenario driver's blend
#: speed), nothing at BRAKE_FADE_TO_MPS (about the quick speed window's resolution at
#: the rail, 0.16 m/s, below which a crawl and a stand read alike)
BRAKE_FADE_FROM_MPS = 1.0
BRAKE_FADE_TO_MPS = 0.2
#: drives that let go where the fade ended start braking again only above this speed:
#: the fade's end and two steps of the quick speed window's resolution (a speed read
#: near the end flickers by a step from period to period; deciding afresh each period,
#: the drives switched on and off hundreds of times at a stop)
BRAKE_RESUME_MPS = 0.5
#: roll-back: reported as the train's run against its selected direction since it last
#: ran with it (from the measured speed) reaches this distance. Roll-back detection over
#: a few tenths of a metre to a metre is common practice of traction and brake control,
#: no source; the value is ours. Only reported: under a brake demand the electric brake
#: acts against the measured motion (brake_fade); with none nothing acts, and holding
#: the train is the friction brake's work
ROLL_BACK_M = 0.5


def motor_torque_limit(cfg: ControllerConfig, v_mps: float) -> float:
    """Tractive-effort curve per motor at a train speed: constant torque, constant power,
    then above the natural-characteristic speed falling as 1/w^2, N m."""
    t_max = OVERLOAD * cfg.rated_torque_nm
    p_max = POWER_OVERLOAD * cfg.rated_power_w
    k = cfg.gear_ratio / cfg.wheel_radius_m
    w_motor = max(v_mps * k, 1e-3)
    w_natural = cfg.natural_from_mps * k
    if w_motor > w_natural:
        return min(t_max, p_max * w_natural / (w_motor * w_motor))
    return min(t_max, p_max / w_motor)


def brake_fade(speed_mps: float, forward: bool, let_go: bool, from_mps: float,
               to_mps: float, resume_mps: float) -> tuple[float, bool]:
    """The share of its braking torque a drive gives at the train speed speed_mps (its
    magnitude, m/s): 1 from from_mps up, falling linearly to 0 at to_mps and below,
    turned round for a train not running forward (braked against its motion); and
    whether the drives have let go (``let_go`` as it was): once the fade is 0, until
    the speed passes resume_mps again (a V/f drive's torque follows its command with
    the rotor's time constant: kept on at a stand, 9 % of the braking was left there,
    decaying over seconds)."""
    fade = min(max((speed_mps - to_mps) / (from_mps - to_mps), 0.0), 1.0)
    if fade == 0.0:
        let_go = True
    elif speed_mps >= resume_mps:
        let_go = False
    return (fade if forward else -fade), let_go


def roll_back(rolled: float, direction: float, v_mps: float, period_s: float,
              limit_m: float) -> tuple[float, bool]:
    """The distance run against the selected direction (+1 or -1) since the train last
    ran with it, after a period at the measured speed v_mps, and whether to report a
    roll-back: in the one period that distance reaches limit_m (the event code on the
    wire stays until another event replaces it; raised each period, it hid events raised
    before it in the period and flickered against those raised after). A standstill
    keeps the distance; running with the direction, or a change of direction, clears it.
    rolled is held signed, the distance times the direction it was run against, so that
    a change of direction finds it of the wrong sign: (the new rolled, report)."""
    run = rolled * direction  # the distance so far; < 0: run against the other direction
    if run < 0.0:
        run = 0.0
    back = -direction * v_mps * period_s
    if back < 0.0:
        return 0.0, False
    after = run + back if back > 0.0 else run
    return after * direction, run < limit_m <= after


def line_limited_torque(torque: float, motor_speed: float, n_motors: int, u_d: float,
                        u_nominal: float, p_draw: float | None,
                        p_feed: float | None) -> float:
    """A drive's torque within what its link's line converters let it draw (p_draw, W,
    motoring: less as the link sags from 90 % to 75 % of nominal) or return (p_feed,
    generating), shared by its n_motors at motor_speed (rad/s); None: no limit."""
    if p_draw is not None and torque * motor_speed > 0:  # motoring
        sag = min(max((u_d - 0.75 * u_nominal) / (0.15 * u_nominal), 0.0), 1.0)
        t_power = p_draw / max(abs(motor_speed) * n_motors, 1.0)
        return math.copysign(min(abs(torque), t_power) * sag, torque)
    if p_feed is not None and torque * motor_speed < 0:  # generating
        t_power = p_feed / max(abs(motor_speed) * n_motors, 1.0)
        return math.copysign(min(abs(torque), t_power), torque)
    return torque


def link_power(p_shaft: float) -> float:
    """The power the motors draw from (> 0) or return to (< 0) their link, from their
    shaft power: divided by the efficiency when motoring, multiplied when generating."""
    if p_shaft >= 0.0:
        return p_shaft / FEEDFORWARD_EFFICIENCY
    return p_shaft * FEEDFORWARD_EFFICIENCY


def gear_efficiency(rail_force: float) -> float:
    """Rail force over (motor torque x gear / r): the gear's loss comes from the power
    flow, so the motors give more than the rail gets in traction and the rail gives
    more than the motors get in braking."""
    return GEAR_EFFICIENCY if rail_force >= 0 else 1.0 / GEAR_EFFICIENCY
