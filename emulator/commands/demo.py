"""``railrig demo``: the Tern trainset switches on, accelerates, cruises, coasts and stops.

With a terminal, the rig runs in a child process and the dashboard shows it
(``demo_live``). Headless, ``run_reference_demo`` runs the rig in lockstep with the
reference controller, in its own process over UDP or in this one, and prints a summary.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import dataclass

from rich.console import Console

from emulator.commands import DEFAULT_TRAINSET, pairs_table

console = Console(stderr=True)
HELP = "run the demo trainset with the reference controller"


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
    import subprocess

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
        await attach_reference("railrig-demo", rig, profile)
    else:
        from emulator.controller.process import spawn_controller

        url, child = spawn_controller(profile)
        link = open_link(url)
        await link.open()
        rig = Rig(params, link, mode="lockstep")
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


def add_arguments(demo: argparse.ArgumentParser) -> None:
    """The options of ``railrig demo``."""
    demo.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    demo.add_argument("--target-kmh", type=float, default=80.0, help="speed to reach")
    demo.add_argument("--stop-at-m", type=float, default=2000.0, help="where to stop")
    demo.add_argument("--headless", action="store_true",
                      help="no dashboard: run in lockstep as fast as it goes and print a "
                      "summary (the default when there is no terminal)")
    demo.add_argument("--in-process", action="store_true",
                      help="headless, with the controller in this process (deterministic)")


def run(args: argparse.Namespace) -> int:
    """The live demo with a terminal, else the headless lockstep run and its summary."""
    import asyncio

    from emulator.profiles.reader import load_trainset, resolve_profile
    from emulator.protocol.events import NAMES
    from emulator.rig.warmup import warm_up

    profile = resolve_profile(args.profile)
    params = load_trainset(profile)
    console.print(f"[bold]railrig demo[/bold]: {params.name}")
    warm_up(params, say=console.print)
    if not args.headless and not args.in_process:
        if sys.stdout.isatty() and sys.stdin.isatty():
            from emulator.commands.demo_live import run_live_demo

            return run_live_demo(profile, args.target_kmh, args.stop_at_m, console.print)
        console.print("no terminal for the dashboard: running headless")
    where = "in this process" if args.in_process else "as a separate process over UDP"
    console.print(f"Reference controller {where}; lockstep. The train switches on, "
                  f"accelerates to {args.target_kmh:g} km/h, cruises, coasts and brakes to a "
                  f"stop at {args.stop_at_m:g} m.")

    def progress(t: float, kmh: float, x: float, phase: str) -> None:
        console.print(f"  t={t:6.1f} s  v={kmh:6.1f} km/h  x={x:7.0f} m  {phase}")

    s = asyncio.run(run_reference_demo(profile, in_process=args.in_process,
                                       target_kmh=args.target_kmh, stop_at_m=args.stop_at_m,
                                       progress=progress))
    table = pairs_table("Demo run (reference controller, lockstep)", "quantity")
    for name, value in [
        ("completed", "yes" if s.completed else "no"),
        ("plant time", f"{s.plant_time_s:.1f} s"),
        ("distance", f"{s.distance_m:.0f} m"),
        ("stop position error", f"{s.stop_error_m:+.1f} m"),
        ("top speed", f"{s.top_speed_kmh:.1f} km/h"),
        ("energy drawn from the catenary", f"{s.catenary_drawn_kwh:.2f} kWh"),
        ("energy regenerated into the catenary", f"{s.catenary_returned_kwh:.2f} kWh"),
        ("energy into the brake resistors", f"{s.brake_resistor_kwh:.2f} kWh"),
        ("protective trips", ", ".join(NAMES[c] for c in s.trips) or "none"),
        ("events reported", ", ".join(str(c) for c in s.events) or "none"),
        ("wall time", f"{s.wall_time_s:.1f} s"),
        ("real-time factor", f"{s.realtime_factor:.1f}x"),
    ]:
        table.add_row(name, value)
    Console().print(table)
    return 0 if s.completed and not s.trips else 1
