"""Riding through a lost line: when a drive stops on a low link, when it may run again,
and the braking that holds the link from the train's motion meanwhile.

The plain-Python rules the reference controller (tcu.py) follows; the compiled period
(period_kernel.py) has the same arithmetic, its constants set from these.
"""

from __future__ import annotations

import math

from .config import ControllerConfig

#: a drive stops when its link falls to this fraction of nominal while effort is asked
#: for, and runs again once the link is back above the second and its machines' rotor
#: flux has died away (3 rotor time constants after the stop: e^-3, 5 % left). The band
#: between them keeps a link that the line's loss pulled down (the few ms before a dead
#: line is seen, at full effort) from stopping and restarting the drives: a control
#: started afresh on a magnetised machine turning at speed meets its back-EMF with no
#: voltage of its own (a current surge and a trip). Fractions: common practice, no source
LINK_STOP_FRACTION, LINK_RESTART_FRACTION = 0.5, 0.6
FLUX_DECAY_TAU = 3.0
#: with the line away (an interruption, before a dead line's relock) the drives hold
#: their link from the train's motion (kinetic buffering): a braking power rising from 0
#: with the link at BUFFER_LINK_FRACTION of nominal to BUFFER_POWER_FRACTION of the
#: link's rating 0.1 of nominal lower, enough for the drives' no-load losses at speed, so
#: the machines stay in step for the line's return. The power fades out between
#: BUFFER_FULL_MPS and BUFFER_NONE_MPS and the torque is capped at BUFFER_TORQUE_FRACTION
#: of rated (and scaled by the adhesion control's factor): at a crawl the copper loss of
#: the torque it would take exceeds the power it returns, and the residual EMF a restart
#: meets there is small (common practice; the values are ours, no source)
BUFFER_LINK_FRACTION, BUFFER_POWER_FRACTION = 0.9, 0.1
BUFFER_NONE_MPS, BUFFER_FULL_MPS, BUFFER_TORQUE_FRACTION = 15 / 3.6, 30 / 3.6, 0.3


def flux_decay_s(cfg: ControllerConfig) -> float:
    """How long a stopped drive waits: FLUX_DECAY_TAU rotor time constants,
    tau_r = (L_m + L_lr) / R_r (the rotor circuit with the stator open)."""
    return FLUX_DECAY_TAU * (cfg.magnetising_h + cfg.rotor_leakage_h) / cfg.rotor_resistance_ohm


def flux_wait_s(decay_s: float, flux_share: float) -> float:
    """How long a drive stopped with ``flux_share`` of its rated flux (the share of its
    voltage ramp it had reached) waits: ``decay_s`` (flux_decay_s) for one that had its
    flux up; tau_r ln(flux_share) less to reach the same e^-FLUX_DECAY_TAU, none at
    that level and below: decay_s (1 + ln(flux_share) / FLUX_DECAY_TAU), at least 0
    (the rotor circuit with the stator open, Novotny & Lipo, 1996, ch. 5)."""
    return decay_s * max(0.0, 1.0 + math.log(flux_share) / FLUX_DECAY_TAU)


def buffer_torque(u_d: float, u_nominal: float, train_mps: float, motor_rad_s: float,
                  p_rated_link: float, motors_on_link: int, rated_torque_nm: float) -> float:
    """The braking torque per motor (>= 0, before the adhesion factor) that holds a link
    at u_d from the train's motion: the link's power P = BUFFER_POWER_FRACTION p_rated x
    clamp((BUFFER_LINK_FRACTION U_n - u_d) / (0.1 U_n), 0, 1) x the speed fade, shared by
    its motors over their speed, at most BUFFER_TORQUE_FRACTION of rated; 0 below
    BUFFER_NONE_MPS. (The operations in the compiled period's order: the twins agree to
    the last bit.)"""
    if abs(train_mps) <= BUFFER_NONE_MPS or abs(motor_rad_s) <= 1.0:
        return 0.0
    short = BUFFER_LINK_FRACTION * u_nominal - u_d
    fade = min((abs(train_mps) - BUFFER_NONE_MPS) / (BUFFER_FULL_MPS - BUFFER_NONE_MPS), 1.0)
    p_buffer = (min(max(short / (0.1 * u_nominal), 0.0), 1.0) * fade
                * BUFFER_POWER_FRACTION * p_rated_link)
    return min(p_buffer / (motors_on_link * abs(motor_rad_s)),
               BUFFER_TORQUE_FRACTION * rated_torque_nm)
