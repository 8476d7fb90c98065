"""Scalar (V/f) control.

Speed regulation with a frequency command under rated load: common practice (no single
source), open-loop V/f holds the speed within about 2-3 % of rated speed; slip
compensation does better. Torque control by slip (the reference controller's mode): the
step response at 0.3, 1 and 2.5 x base speed, and the voltage-limited torque against the
equivalent circuit's breakdown torque (tests/oracles.py, Fitzgerald, Kingsley & Umans).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.motor_scalar import ScalarControl
from emulator.plant import Commands, Plant
from emulator.profiles.reader import load_trainset

from .bench import bench_run, check_voltage_limited_torque
from .conftest import TRAINSET


def speed_drop(compensate: bool) -> float:
    """(synchronous - loaded speed) / rated speed at 50 Hz with rated load torque."""
    cfg = config_from_profile(TRAINSET)
    machine = load_trainset(TRAINSET).machine
    plant = Plant.test_bench(machine, dc_link_v=cfg.link_nominal_v, refresh_each_substep=False,
                             frame_s=cfg.period_s, substep_s=125e-6)
    ctl = ScalarControl(cfg, 1)
    f_cmd, n_frames = 50.0, 6000
    held = Commands.blocked(1)  # the rig's one-frame command delay: what frame k acts on
    for k in range(n_frames):
        f = min(f_cmd, f_cmd * k / 2000)  # ramp up in 2 s
        load = cfg.rated_torque_nm * min(max((k - 2500) / 1000, 0.0), 1.0)
        plant.free_shaft(0, load)
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        duties, _ = ctl.step(0.0, float(plant.read("motor.speed_rad_s")[0]), cfg.link_nominal_v,
                             f_command_hz=f, phase_currents=currents if compensate else None)
        plant.advance(held)  # computed at t_k, acting from t_(k+1), as on a board
        held = Commands(np.array([duties]), np.array([True]))
    n = float(plant.read("motor.speed_rad_s")[0]) * 60 / (2 * math.pi)
    n_sync = 120 * f_cmd / (2 * cfg.pole_pairs)
    n_rated = 120 * cfg.rated_frequency_hz / (2 * cfg.pole_pairs) * (1 - cfg.rated_slip)
    torque = float(plant.read("motor.torque_nm")[0])
    assert torque == pytest.approx(cfg.rated_torque_nm, rel=0.02)  # it really carries the load
    return (n_sync - n) / n_rated


def test_vf_regulation_within_common_practice() -> None:
    drop = speed_drop(compensate=False)
    assert 0.0 < drop <= 0.03


def test_slip_compensation_does_better() -> None:
    plain = speed_drop(compensate=False)
    compensated = speed_drop(compensate=True)
    assert abs(compensated) < 0.5 * plain


# --- torque control by slip (the reference controller's V/f), on the bench as a board runs
# it: tests/controller/bench.py (encoder counts, one-frame command delay, the trainset's
# inverter with its dead time)
BASE_RAD_S = 193.0  # the Tern motor's rated speed: 62 Hz, 2 pole pairs, 1.25 % slip


@pytest.mark.parametrize("share", [0.3, 1.0, 2.5])  # of base speed
@pytest.mark.parametrize("sign", [1.0, -1.0])  # motoring, braking
def test_torque_step(share: float, sign: float) -> None:
    # measured and printed; asserted: the 90 % point exists and the steady torque is
    # within 5 % of the reference (the accuracy asked of the vector control too). Scalar
    # control has no current loop: its step is the circuit's own transient, and no target
    # for its speed is set here
    cfg = config_from_profile(TRAINSET)
    speed = share * BASE_RAD_S
    target = sign * (cfg.rated_torque_nm if share <= 1.0
                     else 0.5 * cfg.rated_power_w / speed)
    r = bench_run(TRAINSET, "scalar", speed, target)
    print(f"V/f, {share} x base ({speed:.0f} rad/s), step to {target:+.0f} N m: 90 % in "
          f"{r['t90_s'] * 1e3:.0f} ms, overshoot {r['overshoot']:.1%}, final "
          f"{r['final_nm']:+.0f} N m, estimated {r['estimate_nm']:+.0f} N m")
    assert r["t90_s"] < math.inf
    assert r["final_nm"] == pytest.approx(target, rel=0.05)
    # the torque the controller reports (its achieved effort), from its measured currents,
    # within the same 5 % of what the shaft carries
    assert r["estimate_nm"] == pytest.approx(r["final_nm"], rel=0.05)


@pytest.mark.parametrize("trim", [True, False])
def test_a_hot_rotor_is_trimmed_out_of_the_torque(trim: bool) -> None:
    # the rotor cage at 150 degC while the circuit's R_r is for 20 degC: R_r x 1.51 (copper,
    # R_20 (1 + 0.00393 (T - 20)): common practice, REFERENCES.md); at a small slip the
    # torque goes as 1 / R_r (Fitzgerald, Kingsley & Umans, ch. 6), so the slip the circuit
    # gives makes about 1 / 1.51 = 66 % of the torque. With the slip trim on the air-gap
    # torque the steady torque is within the 5 % asked of the controls; without it, short
    # by more than a fifth (the check the trim is for can fail)
    from emulator.controller import scalar_kernel as sk

    cfg = config_from_profile(TRAINSET)
    target = cfg.rated_torque_nm

    def no_trim(ctl) -> None:
        ctl.consts[sk.K_SLIP_TRIM_LOW] = ctl.consts[sk.K_SLIP_TRIM_HIGH] = 0.0

    r = bench_run(TRAINSET, "scalar", 0.7 * BASE_RAD_S, target, step_at=0, frames=3000,
                  rotor_degc=150.0, tune=None if trim else no_trim)
    print(f"V/f, hot rotor, trim {trim}: {r['final_nm']:.0f} N m of {target:.0f}, "
          f"trim {r['ctl'].slip_trim:+.3f}")
    if trim:
        assert r["final_nm"] == pytest.approx(target, rel=0.05)
    else:
        assert r["final_nm"] < 0.8 * target


@pytest.mark.parametrize("share", [0.22, 0.3, 0.7])  # of base speed: 14, 19 and 43 Hz
def test_a_hot_stator_leaves_the_torque_right(share: float) -> None:
    # the stator at 150 degC (R_s x 1.51, copper: REFERENCES.md), its sensor read: at low
    # frequency the flux trim makes up the larger drop from the current's magnitude (within
    # its 15 % range), above half the rated frequency the air-gap estimate takes R_s at
    # the sensor's temperature (with R_s at 20 degC it overstated the air-gap power by
    # 0.51 x 3/2 R_s |i|^2 and the slip trim left 94-96 %: an independent review's
    # measurement). The torque within the 5 % asked of the controls
    cfg = config_from_profile(TRAINSET)
    target = 1.4 * cfg.rated_torque_nm if share < 0.5 else cfg.rated_torque_nm
    r = bench_run(TRAINSET, "scalar", share * BASE_RAD_S, target, step_at=0, frames=3000,
                  stator_degc=150.0)
    print(f"V/f, hot stator at {share} x base: {r['final_nm']:.0f} N m of {target:.0f}, "
          f"trim {r['ctl'].slip_trim:+.3f}, flux trim {r['ctl'].u_trim:.3f}")
    assert r["final_nm"] == pytest.approx(target, rel=0.05)
    assert abs(r["ctl"].u_trim - 1.0) < 0.1  # within its range, not at its 15 % limit


@pytest.mark.parametrize("speed", [300.0, 430.0])  # 1.55 and 2.2 of base speed
@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_voltage_limited_torque_is_the_circuits_breakdown_torque(speed: float,
                                                                  sign: float) -> None:
    check_voltage_limited_torque(TRAINSET, "scalar", speed, sign)


@pytest.mark.parametrize("u_d", [0.0, 1e-9])
def test_a_dead_link_gives_finite_duties(u_d: float) -> None:
    # bad input is counted or refused, never passed on as NaN (the project's rule): a
    # torque asked of a drive at speed on a link read as 0 V from its first period (the
    # link's damping divides by the link's mean) gives duties in [0, 1]
    cfg = config_from_profile(TRAINSET.parent / "tern-15kv.toml")
    assert cfg.link_resonance_hz > 0.0  # the damping is in play ...
    ctl = ScalarControl(cfg, 2)
    for _ in range(3):
        duties, f_s = ctl.step(1000.0, 600.0, u_d, phase_currents=(0.0, 0.0, 0.0),
                               rotor_angle_rad=0.0)
        assert f_s > cfg.link_resonance_hz * 1.2  # ... at its full weight
        assert all(math.isfinite(d) and 0.0 <= d <= 1.0 for d in duties), duties
