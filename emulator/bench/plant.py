"""Plant cost benchmark: figures printed, never asserted (the machines are shared and noisy).

Measures one frame of the plant at the profile's frame and sub-step while the drive is
under load, the cost as the trainset grows (motors replicated), and the same frame of
the machines by ``scipy.integrate.solve_ivp`` for a ratio measured in the same run.
"""

from __future__ import annotations

import dataclasses
import gc
import math
import time
from typing import Any

import numpy as np

from emulator.plant import Commands, Plant
from emulator.plant import layout as L  # noqa: N812
from emulator.plant.params import TrainsetParams
from emulator.rig.open_loop import OpenLoopLineSide, SlipFrequencyVf


def _loaded_plant(params: TrainsetParams) -> tuple[Plant, SlipFrequencyVf]:
    """A plant rolling at 15 m/s with its motors under traction (realistic currents),
    fed from the catenary through the line side when the profile has one."""
    plant = Plant(params)
    if plant.line_side:
        line = OpenLoopLineSide(plant)
        blocked = Commands.blocked(plant.n_inverters)
        while not line.ready:
            plant.advance(line.commands(blocked))
        plant._line = line
    plant.set_speed(15.0)
    # the open-loop V/f below switches on at speed at full voltage: its inrush would trip
    # the gate drivers' hardware protection and leave a blocked plant to be timed
    plant.ipar[:, L.IP_HW_ON] = 0.0
    vf = SlipFrequencyVf(plant.n_inverters, params.machine.pole_pairs,
                         params.machine.rated_voltage_v * math.sqrt(2 / 3)
                         / params.machine.rated_frequency_hz, max_modulation=0.95)
    for _ in range(200):  # build up flux and current
        _frame(plant, vf)
    return plant, vf


def _commands(plant: Plant, vf: SlipFrequencyVf) -> Commands:
    speed = float(plant.read("motor.speed_rad_s")[0])
    duty = vf.step(speed, 1.0, float(plant.read("dc_link.voltage_v")[0]), plant.params.frame_s)
    command = Commands(duty, np.ones(plant.n_inverters, dtype=bool))
    line = getattr(plant, "_line", None)
    return line.commands(command) if line is not None else command


def _frame(plant: Plant, vf: SlipFrequencyVf) -> None:
    plant.advance(_commands(plant, vf))


def _frame_times_us(params: TrainsetParams, frames: int) -> np.ndarray:
    plant, vf = _loaded_plant(params)
    samples = np.empty(frames)
    gc.collect()
    gc.disable()  # a collection in the loop measures the collector, not the plant
    try:
        for k in range(frames):
            commands = _commands(plant, vf)  # the controller's part, not timed
            t0 = time.perf_counter_ns()
            plant.advance(commands)
            samples[k] = (time.perf_counter_ns() - t0) / 1e3
    finally:
        gc.enable()
    return samples


def replicated(params: TrainsetParams, n_motors: int) -> TrainsetParams:
    """The trainset repeated, whole motor cars at a time (links with their line converters
    and inverters), until it has at least n_motors motors."""
    per_copy = params.motor_count
    copies = max(1, -(-n_motors // per_copy))
    n_links = len(params.dc_links)
    links, conv, units = [], [], []
    for r in range(copies):
        links += [dataclasses.replace(lk, name=f"{lk.name}#{r}") for lk in params.dc_links]
        conv += [dataclasses.replace(c, name=f"{c.name}#{r}", dc_link=c.dc_link + r * n_links)
                 for c in params.converters]
        units += [dataclasses.replace(u, name=f"{u.name}#{r}", dc_link=u.dc_link + r * n_links)
                  for u in params.line_converters]
    return dataclasses.replace(params, dc_links=tuple(links), converters=tuple(conv),
                               line_converters=tuple(units))


def _solve_ivp_frame_us(params: TrainsetParams, repeats: int) -> float:
    """Median time of one frame of all the trainset's machines by solve_ivp (RK45).

    Only the machines (flux linkages and shafts) with held voltages: the part the
    plant's closed form replaces. rtol 1e-6, a usual engineering tolerance.
    """
    from scipy.integrate import solve_ivp

    mp = params.machine
    n = params.motor_count
    lm = mp.magnetising_h
    ls, lr = mp.stator_leakage_h + lm, mp.rotor_leakage_h + lm
    d = ls * lr - lm * lm
    p = mp.pole_pairs
    u = 900.0 * np.exp(1j * np.linspace(0, 2 * np.pi, n, endpoint=False))
    dt = params.drivetrain
    inertia = mp.rotor_inertia_kgm2 + (dt.wheelset_inertia_kgm2 + dt.gear_inertia_kgm2) / (
        dt.gear_ratio ** 2)

    def rhs(_t: float, y: np.ndarray) -> np.ndarray:
        ps = y[0:n] + 1j * y[n:2 * n]
        pr = y[2 * n:3 * n] + 1j * y[3 * n:4 * n]
        w = y[4 * n:]
        i_s = (lr * ps - lm * pr) / d
        i_r = (ls * pr - lm * ps) / d
        dps = u - mp.stator_resistance_ohm * i_s
        dpr = -mp.rotor_resistance_ohm * i_r + 1j * p * w * pr
        torque = 1.5 * p * (ps.real * i_s.imag - ps.imag * i_s.real)
        return np.concatenate([dps.real, dps.imag, dpr.real, dpr.imag, torque / inertia])

    y0 = np.concatenate([np.full(n, 2.0), np.zeros(n), np.full(n, 1.9), np.zeros(n),
                         np.full(n, 300.0)])
    samples = []
    for _ in range(repeats):
        t0 = time.perf_counter_ns()
        solve_ivp(rhs, (0.0, params.frame_s), y0, method="RK45", rtol=1e-6, atol=1e-9)
        samples.append((time.perf_counter_ns() - t0) / 1e3)
    return float(np.median(samples))


def plant_benchmark(params: TrainsetParams, frames: int = 3000) -> dict[str, Any]:
    """Figures of the plant's cost per frame; see the module docstring."""
    frame_us = params.frame_s * 1e6
    demo = _frame_times_us(params, frames)
    median = float(np.median(demo))
    counts = [params.motor_count, 32, 128]
    cost = [median] + [float(np.median(_frame_times_us(replicated(params, n), frames // 3)))
                       for n in counts[1:]]
    slope, intercept = np.polyfit(counts, cost, 1)
    budget = 0.1 * frame_us
    fit = math.floor((budget - intercept) / slope) if slope > 0 else 0
    ivp = _solve_ivp_frame_us(params, repeats=15)
    return {
        "profile": params.name,
        "frame_us": frame_us,
        "substep_us": params.substep_s * 1e6,
        "motors": params.motor_count,
        "plant_frame_us_median": round(median, 2),
        "plant_frame_us_p99": round(float(np.percentile(demo, 99)), 2),
        "frame_fraction": round(median / frame_us, 4),
        "cost_us_by_motor_count": {str(n): round(c, 1) for n, c in zip(counts, cost,
                                                                        strict=True)},
        "us_per_motor": round(float(slope), 3),
        "motors_in_10pct": max(fit, 0),
        "solve_ivp_frame_us_median": round(ivp, 1),
        "solve_ivp_ratio": round(ivp / median, 1),
    }
