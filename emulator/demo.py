"""The headless demo run: the Tern trainset accelerates, coasts and brakes to a stop.

Until the reference controllers land, the motors are driven open loop (slip-frequency
V/f, emulator.controller.open_loop) in-process, as fast as possible.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from emulator.controller.open_loop import SlipFrequencyVf
from emulator.plant import Commands, Plant
from emulator.plant.params import TrainsetParams


@dataclass(frozen=True)
class DemoSummary:
    """What the demo reports."""

    plant_time_s: float
    wall_time_s: float
    distance_m: float
    top_speed_kmh: float
    energy_drawn_kwh: float
    energy_regenerated_kwh: float
    final_speed_kmh: float
    max_motor_temperature_c: float

    @property
    def realtime_factor(self) -> float:
        """Plant seconds per wall-clock second."""
        return self.plant_time_s / self.wall_time_s


def run_open_loop_demo(params: TrainsetParams, target_kmh: float = 80.0,
                       coast_s: float = 20.0, slip_hz: float = 1.2,
                       progress=None) -> DemoSummary:
    """Accelerate to target_kmh, coast, brake electrically, stop with the friction brake."""
    plant = Plant(params)
    mp = params.machine
    vf = SlipFrequencyVf(plant.n_inverters, mp.pole_pairs,
                         mp.rated_voltage_v * math.sqrt(2 / 3) / mp.rated_frequency_hz,
                         max_modulation=0.95)
    gates_on = np.ones(plant.n_inverters, dtype=bool)
    blocked = Commands.blocked(plant.n_inverters)
    drawn = regenerated = top = 0.0
    e_prev = 0.0
    phase, coast_until = "accelerate", 0.0
    t_wall = time.perf_counter()
    while plant.time_s < 600.0:
        v = plant.read("train.speed_mps")
        top = max(top, v)
        if phase == "accelerate" and v >= target_kmh / 3.6:
            phase, coast_until = "coast", plant.time_s + coast_s
        elif phase == "coast" and plant.time_s >= coast_until:
            phase = "brake"
        elif phase == "brake" and v < 2.0:
            phase = "stop"
            plant.set_brake_force(60e3)
        elif phase == "stop" and v == 0.0:
            break
        if phase in ("accelerate", "brake"):
            slip = slip_hz if phase == "accelerate" else -slip_hz
            speed = float(np.mean(plant.read("motor.speed_rad_s")))
            duty = vf.step(speed, slip, float(plant.read("dc_link.voltage_v")[0]),
                           params.frame_s)
            plant.advance(Commands(duty, gates_on))
        else:
            plant.advance(blocked)
        e_now = float(plant.read("inverter.dc_energy_j").sum())
        de, e_prev = e_now - e_prev, e_now
        if de > 0:
            drawn += de
        else:
            regenerated -= de
        if progress is not None and plant.frames % 1000 == 0:
            progress(plant.time_s, v * 3.6, phase)
    wall = time.perf_counter() - t_wall
    temps = plant.read("motor.stator_temperature_k")
    return DemoSummary(plant.time_s, wall, plant.read("train.position_m"), top * 3.6,
                       drawn / 3.6e6, regenerated / 3.6e6, plant.read("train.speed_mps") * 3.6,
                       float(np.max(temps)) - 273.15)
