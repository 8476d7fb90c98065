"""The headless demo run: the Tern trainset accelerates, coasts and brakes to a stop.

Until the reference controllers land, the motors are driven open loop (slip-frequency
V/f, emulator.controller.open_loop) in-process, as fast as possible, and the line side
switches on with its converters left as diode bridges (braking energy goes to the chopper).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from emulator.controller.open_loop import DiodeBridgeSequencer, SlipFrequencyVf
from emulator.plant import Commands, Plant
from emulator.plant.params import TrainsetParams
from emulator.plant.stepper import LineCommands


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
    catenary_energy_kwh: float = 0.0
    brake_resistor_energy_kwh: float = 0.0

    @property
    def realtime_factor(self) -> float:
        """Plant seconds per wall-clock second."""
        return self.plant_time_s / self.wall_time_s


class OpenLoopLineSide:
    """The diode-bridge switch-on sequence and chopper, attached to plant commands."""

    def __init__(self, plant: Plant) -> None:
        self.plant = plant
        tr = plant.params.transformer
        peak = tr.secondary_voltage_v * math.sqrt(2) if tr else 0.0
        self.seq = DiodeBridgeSequencer(plant.n_line_converters, plant.n_links, peak)
        self.line = LineCommands.open(plant.n_line_converters, plant.n_links)

    @property
    def ready(self) -> bool:
        return self.seq.ready

    def commands(self, command: Commands) -> Commands:
        c = self.seq.step(self.plant.read("dc_link.voltage_v"), self.plant.params.frame_s)
        self.line.breaker = c["breaker"]
        self.line.precharge[:] = c["precharge"]
        self.line.line_contactor[:] = c["line_contactor"]
        self.line.chopper[:] = c["chopper"]
        return Commands(command.duty, command.gates_enabled, self.line)


def run_open_loop_demo(params: TrainsetParams, target_kmh: float = 80.0,
                       coast_s: float = 20.0, slip_hz: float = 1.2,
                       progress=None) -> DemoSummary:
    """Accelerate to target_kmh, coast, brake electrically, stop with the friction brake."""
    plant = Plant(params)
    line = OpenLoopLineSide(plant) if plant.line_side else None
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
        if line is not None and not line.ready:
            plant.advance(line.commands(blocked), params.frame_s)
            continue
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
            command = Commands(duty, gates_on)
            plant.advance(line.commands(command) if line else command)
        else:
            plant.advance(line.commands(blocked) if line else blocked)
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
    energy = plant.energy()
    return DemoSummary(plant.time_s, wall, plant.read("train.position_m"), top * 3.6,
                       drawn / 3.6e6, regenerated / 3.6e6, plant.read("train.speed_mps") * 3.6,
                       float(np.max(temps)) - 273.15, energy.source / 3.6e6,
                       energy.chopper / 3.6e6)
