"""The demo run: the Tern trainset switches on, accelerates, cruises, coasts and stops.

``run_reference_demo`` runs the rig in lockstep with the reference controller, in its own
process over UDP or in this one. ``OpenLoopLineSide`` is a diode-bridge switch-on used by
the plant benchmark and plant checks that need a charged line side without a controller.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

from emulator.controller.open_loop import DiodeBridgeSequencer
from emulator.plant import Commands, Plant
from emulator.plant.stepper import LineCommands


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
    from emulator.profiles.reader import load_trainset
    from emulator.rig.frame_loop import Rig
    from emulator.scenario.driver import demo_program

    params = load_trainset(profile)
    child = None
    if in_process:
        from emulator.controller.inprocess import attach_reference

        link = open_link("loop://railrig-demo")
        await link.open()
        rig = Rig(params, link, mode="lockstep")
        await attach_reference("railrig-demo", rig, profile)
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
    program = demo_program(target_kmh=target_kmh, stop_at_m=stop_at_m, cruise_s=cruise_s,
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
