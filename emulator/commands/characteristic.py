"""``railrig characteristic``: the effort/speed characteristic of the reference controller.

The train held at each speed (a dynamometer), full and partial demands in motoring and
braking, the force at the rail set beside the trainset's specified curve; a table, JSON,
or a PNG plot (``--report DIR``). See ``emulator.scenario.characteristic``.
"""

from __future__ import annotations

import argparse
import asyncio
import json
from pathlib import Path

from rich import box
from rich.console import Console
from rich.markup import escape
from rich.table import Table

from emulator.commands import DEFAULT_TRAINSET, stderr_console

console = stderr_console()
HELP = "measure the controller's tractive- and braking-effort characteristic"


def add_arguments(ch: argparse.ArgumentParser) -> None:
    """The options of ``railrig characteristic``."""
    ch.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    ch.add_argument("--controller", default="reference",
                    help="'reference' (in this process) or the link URL of the controller "
                    "under test, e.g. udp://127.0.0.1:5000?peer=127.0.0.1:5001")
    ch.add_argument("--control", choices=("vf", "vector"), default=None,
                    help="override the profile's motor control of the reference")
    ch.add_argument("--speeds-kmh", default=None,
                    help="comma-separated speed points (default: 5, then every 20 km/h "
                    "up to the trainset's maximum)")
    ch.add_argument("--demands", default="1,0.5,-0.5,-1",
                    help="comma-separated demands, negative brakes")
    ch.add_argument("--json", action="store_true", help="the points as JSON on stdout")
    ch.add_argument("--report", default=None, metavar="DIR",
                    help="write characteristic.png and characteristic.json here")


def run(args: argparse.Namespace) -> int:
    """Measure, then print (or write) the characteristic; 1 if a protective trip came."""
    from emulator.profiles.reader import load_trainset, resolve_profile
    from emulator.scenario.characteristic import as_json, measure, plot

    profile = resolve_profile(args.profile)
    params = load_trainset(profile)
    try:
        speeds = ([float(s) for s in args.speeds_kmh.split(",")] if args.speeds_kmh else
                  [5.0, *range(20, int(params.train.max_speed_mps * 3.6) + 1, 20)])
        demands = [float(d) for d in args.demands.split(",")]
    except ValueError as exc:
        console.print(f"[red]error:[/red] speeds and demands are numbers: {escape(str(exc))}")
        return 2
    if not demands or any(not -1.0 <= d <= 1.0 or d == 0 for d in demands):
        console.print("[red]error:[/red] demands are within -1..1 and not 0")
        return 2
    control = {"vf": "scalar", "vector": "vector", None: None}[args.control]
    shown = control or params.motor_control
    console.print(f"characteristic of {params.name}, {shown} control: {len(speeds)} speeds x "
                  f"{len(demands)} demands")

    def progress(v: float, d: float) -> None:
        console.print(f"  {v:5.0f} km/h, demand {d:+.2f}")

    try:
        points = asyncio.run(measure(profile, speeds, demands, controller=args.controller,
                                     control=control, progress=progress))
    except (ValueError, OSError) as exc:
        console.print(f"[red]error:[/red] {escape(str(exc))}")
        return 2
    data = as_json(points)
    if args.report:
        where = Path(args.report)
        where.mkdir(parents=True, exist_ok=True)
        (where / "characteristic.json").write_text(json.dumps(data, indent=1))
        png = plot(points, f"{params.name}, {shown} control", where / "characteristic.png")
        console.print(f"wrote {png} and {where / 'characteristic.json'}")
    if args.json:
        print(json.dumps(data))
    else:
        table = Table(title=f"Effort characteristic: {params.name}, {shown} control",
                      box=box.SIMPLE_HEAD, padding=(0, 0, 0, 1), show_edge=False)
        # two-line headings: the table fits 80 columns; the trips are listed under it
        for col in ("km/h", "demand", "rail\nkN", "curve\nkN", "of\ncurve", "said\nkN",
                    "I\nA rms", "flux\nV s", "mod", "link\nV", "PF"):
            table.add_column(col, justify="right", no_wrap=True,
                             min_width=6 if col.endswith("kN") else None)
        for p in points:
            table.add_row(f"{p.speed_kmh:.0f}", f"{p.demand:+.2f}", f"{p.rail_force_kn:.1f}",
                          f"{p.demand * abs(p.limit_kn):.1f}", f"{p.share_of_limit:.0%}",
                          f"{p.reported_kn:.1f}", f"{p.inverter_current_a_rms:.0f}",
                          f"{p.rotor_flux_vs:.2f}", f"{p.modulation:.2f}",
                          f"{p.dc_link_v:.0f}±{p.dc_link_swing_v / 2:.0f}",
                          f"{p.line_power_factor:.2f}")
        out = Console()
        out.print(table)
        out.print("said kN: the effort the controller reports achieving (its reply); "
                  "flux: the motors' rotor flux; mod: voltage over U_dc / sqrt(3); link: "
                  "the DC links' mean ± half the largest peak to peak")
        for p in points:
            if p.trips:
                out.print(f"[red]trips[/red] at {p.speed_kmh:.0f} km/h, demand "
                          f"{p.demand:+.2f}: " + ", ".join(p.trips))
        if not any(p.trips for p in points):
            out.print("no protective trip")
    return 1 if any(p.trips for p in points) else 0
