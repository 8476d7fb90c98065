"""A motor on the test bench driven by the reference motor control, as a board drives it.

The controller reads what a board reads: phase currents and the encoder's wrapping count
(the profile's lines per revolution), and its duties act from the next period on (the
rig's one-frame command delay), never in the frame they were computed. The torque is the
frame's mean (the plant's sub-steps), what the shaft and the train integrate. The bench's
inverter is the trainset's (dead time, device drops), not an ideal one.

The applied stator voltage is measured as its fundamental: the plant's voltage vector at
each sub-step projected on e^(j w t) over the last 50 frames (a discrete Fourier
coefficient at the stator frequency). A vector held over a control period while the
field turns has a fundamental smaller than its magnitude, by sin(x)/x with x = w T / 2
(the zero-order hold's frequency response: Franklin, Powell & Workman, *Digital Control
of Dynamic Systems*, ch. 6, from memory); what the motor's torque answers is the
fundamental, so that is what an equivalent-circuit check must use.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from emulator.controller.config import config_from_profile
from emulator.controller.encoder import EncoderSpeed
from emulator.controller.motor_scalar import ScalarControl
from emulator.controller.motor_vector import VectorControl
from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.profiles.reader import load_trainset
from tests.oracles import EquivalentCircuit

SUBSTEPS = 8
WINDOW = 50  # frames at the end over which the torque and the voltage are taken


def bench_run(trainset: Path, control: str, speed_rad_s: float, torque_nm: float,
              step_at: int = 3000, frames: int = 3400, before_nm: float = 0.0,
              rotor_degc: float | None = None, stator_degc: float | None = None,
              tune=None) -> dict:
    """A torque step (before_nm to torque_nm at frame step_at) at a held speed; with
    rotor_degc, the rotor cage held at that temperature (the stator's sensor does not see
    it); with stator_degc, the stator winding held there and its sensor read by the
    control; tune(ctl) may change the motor control before the run."""
    cfg = config_from_profile(trainset)
    params = load_trainset(trainset)
    u_dc = cfg.link_nominal_v
    frame_s = cfg.period_s
    plant = Plant.test_bench(params.machine, dc_link_v=u_dc, refresh_each_substep=False,
                             frame_s=frame_s, substep_s=frame_s / SUBSTEPS,
                             inverter=params.inverter)
    plant.impose_speed(0, speed_rad_s)
    # the bench switches the motor control on at speed without the TCU's flux ramp: the
    # V/f's first periods draw an inrush past the gate drivers' hardware trip (1.6 kA),
    # which has its own tests (tests/plant/test_protection.py)
    plant.ipar[:, L.IP_HW_ON] = 0.0
    ctl = VectorControl(cfg, 1) if control == "vector" else ScalarControl(cfg, 1)
    if tune is not None:
        tune(ctl)
    encoder = EncoderSpeed(cfg.encoder_lines, frame_s)
    edges_per_rad = 4 * cfg.encoder_lines / (2 * math.pi)
    acting = (0.5, 0.5, 0.5)  # the duties held in the frame now: computed a frame ago
    torque, flux, voltage, estimates = [], [], [], []
    for k in range(frames):
        t_ref = torque_nm if k >= step_at else before_nm
        currents = tuple(float(plant.read(f"inverter.phase_current_{x}_a")[0]) for x in "abc")
        count = math.floor(float(plant.read("motor.angle_rad")[0]) * edges_per_rad) % 65536
        speed = encoder.update(count)
        if control == "vector":
            computed = ctl.step(t_ref, encoder.angle, speed, u_dc, currents)
            estimates.append(ctl.torque_estimate)  # over the period just ended
        else:
            if stator_degc is not None:
                ctl.stator_temperature(stator_degc)
            estimates.append(ctl.estimated_torque(currents))
            computed, _ = ctl.step(t_ref, speed, u_dc, phase_currents=currents,
                                   rotor_angle_rad=encoder.angle)
        cmd = Commands(np.array([acting]), np.array([True]))
        if rotor_degc is not None:
            plant.ms[0, L.MS_T_ROTOR] = rotor_degc + 273.15
        if stator_degc is not None:
            plant.ms[0, L.MS_T_STATOR] = stator_degc + 273.15
        frame_torque = []
        for _ in range(SUBSTEPS):
            plant.advance(cmd, frame_s / SUBSTEPS)
            frame_torque.append(float(plant.read("motor.torque_nm")[0]))
            if k >= frames - WINDOW:
                voltage.append(complex(float(plant.read("inverter.voltage_alpha_v")[0]),
                                       float(plant.read("inverter.voltage_beta_v")[0])))
        acting = computed  # the board's answer to y_k acts from t_(k+1)
        torque.append(np.mean(frame_torque))
        flux.append(abs(plant.flux_linkages(0)[1]))
    # the stator frequency from the voltage itself: its turn from frame to frame (the
    # value held in each frame), not from the controller under test
    held = np.array(voltage[::SUBSTEPS])
    w_e = float(np.angle(np.sum(held[1:] * np.conj(held[:-1])))) / frame_s
    h = frame_s / SUBSTEPS
    # each sub-step holds its value for h: the exact projection of the staircase
    times = np.arange(len(voltage)) * h
    hold = (np.exp(-1j * w_e * h) - 1.0) / (-1j * w_e * h) if w_e else 1.0
    fundamental = abs(np.mean(np.array(voltage) * np.exp(-1j * w_e * times)) * hold)
    torque, flux = np.array(torque), np.array(flux)
    after = torque[step_at:]
    step = torque_nm - before_nm
    reached = np.flatnonzero(np.sign(step) * (after - before_nm) >= 0.9 * abs(step))
    # maximum overshoot against the final value, (c(t_p) - c(inf)) / (c(inf) - c(0))
    # (Ogata, *Modern Control Engineering*, ch. 5); the final value's own error is checked
    # against the reference apart
    peak = after.max() if step > 0 else after.min()
    final = float(after[-WINDOW:].mean())
    return {"t90_s": (reached[0] + 1) * frame_s if reached.size else math.inf,
            "overshoot": max((peak - final) / (final - before_nm), 0.0),
            "flux_change": float(np.abs(flux[step_at:] / flux[step_at - 1] - 1).max()),
            "final_nm": final,
            # the controller's own estimate from its measured currents (the effort it
            # reports), over the same frames
            "estimate_nm": float(np.mean(estimates[-WINDOW:])),
            "voltage_v": float(fundamental), "frequency_hz": w_e / (2 * math.pi),
            # the linear modulation's most, U_dc / sqrt(3), as a fundamental when held
            # for a frame while it turns (sin(x)/x, x = w T / 2)
            "voltage_limit_v": u_dc / math.sqrt(3) * _hold(0.5 * w_e * frame_s),
            "torque_nm": torque, "ctl": ctl}



def _hold(x: float) -> float:
    return math.sin(x) / x if abs(x) > 1e-9 else 1.0


def circuit_breakdown_nm(trainset: Path, run: dict, generating: bool) -> float:
    """The breakdown torque of the T-circuit at the stator voltage (fundamental) and
    frequency the controller applied (Fitzgerald, Kingsley & Umans, ch. 6; motoring at
    s_k, generating at -s_k, where it is larger by the stator resistance's share). The
    resistances are at 20 C: the motor barely warms in a bench run of seconds."""
    m = load_trainset(trainset).machine
    f = abs(run["frequency_hz"])
    w = 2 * math.pi * f
    circuit = EquivalentCircuit(
        r_s=m.stator_resistance_ohm, x_ls=w * m.stator_leakage_h, x_m=w * m.magnetising_h,
        x_lr=w * m.rotor_leakage_h, r_r=m.rotor_resistance_ohm,
        v_phase_rms=run["voltage_v"] / math.sqrt(2), f_hz=f, poles=2 * m.pole_pairs)
    s_k, t_k = circuit.breakdown()
    return abs(circuit.torque(-s_k)) if generating else t_k


def check_voltage_limited_torque(trainset: Path, control: str, speed_rad_s: float,
                                 sign: float) -> None:
    """Twice rated torque asked at a speed above base: the voltage, not the current, sets
    what comes; after 1.4 s the rotor flux (tau_r ~ 0.6 s) has settled at the
    field-weakening level. The torque must be the circuit's breakdown torque at the voltage
    (fundamental) and frequency applied, within 5 %, and that breakdown the link's: the
    drive uses at least 90 % of the linear modulation's voltage (a reserve of 5-10 % for
    the current control is common practice, no source)."""
    cfg = config_from_profile(trainset)
    r = bench_run(trainset, control, speed_rad_s, sign * 2 * cfg.rated_torque_nm,
                  step_at=1000, frames=2400)
    t_k = circuit_breakdown_nm(trainset, r, generating=sign < 0)
    print(f"{control}, {speed_rad_s:.0f} rad/s: {r['final_nm']:+.0f} N m at "
          f"{r['voltage_v']:.0f} V peak (fundamental, "
          f"{r['voltage_v'] / r['voltage_limit_v']:.1%} of the linear limit), "
          f"{r['frequency_hz']:.1f} Hz; circuit breakdown {t_k:.0f} N m")
    assert abs(r["final_nm"]) == pytest.approx(t_k, rel=0.05)
    assert r["voltage_v"] >= 0.9 * r["voltage_limit_v"]
