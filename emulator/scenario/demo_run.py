"""The demo run, headless: the Tern switches on, accelerates, cruises, coasts and stops,
in lockstep with the reference controller (in the rig's process or in its own over UDP).
Used by ``railrig demo --headless``, the throughput benchmark and the tests."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass


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
                             progress=None, setup=None) -> ReferenceDemoSummary:
    """The demo run with the reference controller, in lockstep.

    The controller runs as a separate process over UDP on loopback (``railrig
    controller``), or in this process through the in-process adapter. ``setup(rig,
    controller)`` is called before the first frame (controller: None when it runs in its
    own process), and awaited when it returns an awaitable; the throughput benchmark
    times stages and attaches a monitor through it.
    """
    import asyncio

    from emulator.link import open_link
    from emulator.profiles.reader import load_trainset
    from emulator.protocol import events as ev
    from emulator.rig.frame_loop import Rig
    from emulator.scenario.driver import demo_program

    params = load_trainset(profile)
    child = None
    if in_process:
        from emulator.controller.inprocess import attach_reference

        link = open_link("loop://railrig-demo")
        await link.open()
        rig = Rig(params, link, mode="lockstep")
        tcu = await attach_reference("railrig-demo", rig, profile)
    else:
        from emulator.controller.process import spawn_controller, stop_controller

        url, child = spawn_controller(profile)
        link = open_link(url)
        await link.open()
        rig = Rig(params, link, mode="lockstep")
        tcu = None
    program = demo_program(target_kmh=target_kmh, stop_at_m=stop_at_m, cruise_s=cruise_s,
                           coast_s=coast_s)
    rig.program = program
    if setup is not None:
        prepared = setup(rig, tcu)
        if asyncio.iscoroutine(prepared):
            await prepared
    t_wall = time.perf_counter()
    try:
        chunk = 5000
        last = math.ceil(max_plant_s / rig.period_us * 1e6 - 1e-9)  # frames in max_plant_s
        while not program.finished and rig.frame < last:
            await rig.run(frames=min(rig.frame + chunk, last))
            if progress is not None:
                progress(rig.plant.time_s, rig.plant.read("train.speed_mps") * 3.6,
                         rig.plant.read("train.position_m"), program.phase)
    finally:
        wall = time.perf_counter() - t_wall
        link.close()
        if child is not None:
            stop_controller(child)  # not left to idle out: its wait is no part of the run
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
