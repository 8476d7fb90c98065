"""``railrig demo``: the Tern trainset switches on, accelerates, cruises, coasts and stops.

With a terminal, the rig runs in a child process and the dashboard shows it
(``demo_live``). Headless, ``emulator.scenario.demo_run`` runs the rig in lockstep with
the reference controller, in its own process over UDP or in this one, and this prints a
summary.
"""

from __future__ import annotations

import argparse
import sys

from rich.console import Console

from emulator.commands import DEFAULT_TRAINSET, pairs_table, stderr_console
from emulator.scenario.demo_run import run_reference_demo

console = stderr_console()
HELP = "run the demo trainset with the reference controller"


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
