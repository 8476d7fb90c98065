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


@dataclass(frozen=True)
class ReferenceDemoSummary:
    """What `railrig demo` reports."""

    completed: bool
    plant_time_s: float
    wall_time_s: float
    distance_m: float
    stop_error_m: float
    top_speed_kmh: float
    catenary_drawn_kwh: float
    catenary_returned_kwh: float
    brake_resistor_kwh: float
    trips: tuple[int, ...]
    events: tuple[int, ...]
    link: dict

    @property
    def realtime_factor(self) -> float:
        """Plant seconds per wall-clock second."""
        return self.plant_time_s / self.wall_time_s


async def run_reference_demo(profile, *, in_process: bool = False, target_kmh: float = 80.0,
                             stop_at_m: float = 2000.0, cruise_s: float = 10.0,
                             coast_s: float = 5.0, max_plant_s: float = 400.0,
                             progress=None) -> ReferenceDemoSummary:
    """The demo run with the reference controller, in lockstep.

    The controller runs as a separate process over UDP on loopback (``railrig
    controller``), or in this process through the in-process adapter.
    """
    import asyncio
    import socket
    import subprocess
    import sys

    from emulator.controller import events as ev
    from emulator.link import open_link
    from emulator.profile import load_trainset
    from emulator.rig import Rig
    from emulator.scenario import DemoRun

    params = load_trainset(profile)
    child = None
    if in_process:
        from emulator.controller.config import config_from_profile
        from emulator.controller.inprocess import attach
        from emulator.controller.tcu import ReferenceController

        link = open_link("loop://railrig-demo")
        await link.open()
        rig = Rig(params, link, mode="lockstep")
        tcu = ReferenceController(config_from_profile(profile), rig.signal_map.as_dict())
        await attach("railrig-demo", tcu.answer)
    else:
        ports = []
        for _ in range(2):
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
                s.bind(("127.0.0.1", 0))
                ports.append(s.getsockname()[1])
        rig_port, ctl_port = ports
        link = open_link(f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{ctl_port}")
        await link.open()
        rig = Rig(params, link, mode="lockstep")
        child = subprocess.Popen(
            [sys.executable, "-m", "emulator.cli", "controller", "--profile", str(profile),
             "--link", f"udp://127.0.0.1:{ctl_port}?peer=127.0.0.1:{rig_port}",
             "--idle-timeout", "5"])
    program = DemoRun(target_kmh=target_kmh, stop_at_m=stop_at_m, cruise_s=cruise_s,
                      coast_s=coast_s)
    rig.program = program
    t_wall = time.perf_counter()
    try:
        chunk = 5000
        while not program.finished and rig.plant.time_s < max_plant_s:
            await rig.run(frames=rig.frame + chunk)
            if progress is not None:
                progress(rig.plant.time_s, rig.plant.read("train.speed_mps") * 3.6,
                         rig.plant.read("train.position_m"), program.phase)
    finally:
        wall = time.perf_counter() - t_wall
        link.close()
        if child is not None:
            try:
                child.wait(10)
            except subprocess.TimeoutExpired:
                child.kill()
        await asyncio.sleep(0)
    x = rig.plant.read("train.position_m")
    return ReferenceDemoSummary(
        completed=program.finished, plant_time_s=rig.plant.time_s, wall_time_s=wall,
        distance_m=x, stop_error_m=x - stop_at_m, top_speed_kmh=program.top_speed_mps * 3.6,
        catenary_drawn_kwh=program.drawn_j / 3.6e6,
        catenary_returned_kwh=program.returned_j / 3.6e6,
        brake_resistor_kwh=rig.plant.energy().chopper / 3.6e6,
        trips=tuple(sorted(program.events & ev.TRIPS)), events=tuple(sorted(program.events)),
        link=rig.health.as_dict())
