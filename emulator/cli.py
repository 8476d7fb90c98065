"""The ``railrig`` command."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence

from rich.console import Console
from rich.table import Table

from emulator.profile import ProfileError, load_trainset

DEFAULT_TRAINSET = "trainsets/tern-25kv"
console = Console(stderr=True)


def _cmd_demo(args: argparse.Namespace) -> int:
    from emulator.demo import run_open_loop_demo
    from emulator.warmup import warm_up

    params = load_trainset(args.profile)
    console.print(f"[bold]railrig demo[/bold]: {params.name}")
    warm_up(params, say=console.print)
    console.print("Open-loop run (no controller yet): accelerate to "
                  f"{args.target_kmh:g} km/h, coast, brake electrically, stop.")

    def progress(t: float, kmh: float, phase: str) -> None:
        if args.verbose:
            console.print(f"  t={t:7.1f} s  v={kmh:6.1f} km/h  {phase}")

    s = run_open_loop_demo(params, target_kmh=args.target_kmh, progress=progress)
    table = Table(title="Demo run (open loop, as fast as possible)")
    table.add_column("quantity")
    table.add_column("value", justify="right")
    for name, value in [
        ("plant time", f"{s.plant_time_s:.1f} s"),
        ("distance", f"{s.distance_m:.0f} m"),
        ("top speed", f"{s.top_speed_kmh:.1f} km/h"),
        ("final speed", f"{s.final_speed_kmh:.2f} km/h"),
        ("energy drawn from the DC links", f"{s.energy_drawn_kwh:.2f} kWh"),
        ("energy regenerated into the DC links", f"{s.energy_regenerated_kwh:.2f} kWh"),
        ("hottest stator winding", f"{s.max_motor_temperature_c:.1f} °C"),
        ("wall time", f"{s.wall_time_s:.1f} s"),
        ("real-time factor", f"{s.realtime_factor:.1f}x"),
    ]:
        table.add_row(name, value)
    Console().print(table)
    return 0 if s.final_speed_kmh == 0.0 else 1


def _cmd_bench(args: argparse.Namespace) -> int:
    from emulator.bench import plant_benchmark
    from emulator.warmup import warm_up

    params = load_trainset(args.profile)
    warm_up(params, say=console.print)
    figures = plant_benchmark(params, frames=args.frames)
    if args.json:
        print(json.dumps(figures))
        return 0
    table = Table(title=f"Plant cost per frame: {params.name}")
    table.add_column("figure")
    table.add_column("value", justify="right")
    table.add_row("frame / sub-step", f"{figures['frame_us']:.0f} us / "
                  f"{figures['substep_us']:.0f} us")
    table.add_row("motors", str(figures["motors"]))
    table.add_row("plant frame median", f"{figures['plant_frame_us_median']:.1f} us")
    table.add_row("plant frame p99", f"{figures['plant_frame_us_p99']:.1f} us")
    table.add_row("share of the frame (median)", f"{100 * figures['frame_fraction']:.2f} %")
    for n, c in figures["cost_us_by_motor_count"].items():
        table.add_row(f"  {n} motors", f"{c:.1f} us")
    table.add_row("cost per motor", f"{figures['us_per_motor']:.2f} us")
    table.add_row("motors within 10 % of a frame", str(figures["motors_in_10pct"]))
    table.add_row("same frame by solve_ivp (RK45, machines only)",
                  f"{figures['solve_ivp_frame_us_median']:.0f} us")
    table.add_row("solve_ivp / plant", f"{figures['solve_ivp_ratio']:.0f}x")
    Console().print(table)
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The command-line grammar."""
    parser = argparse.ArgumentParser(
        prog="railrig", description="Traction-drive plant emulator for testing control "
        "firmware without a train.")
    sub = parser.add_subparsers(dest="command", required=True)

    demo = sub.add_parser("demo", help="run the demo trainset headless and print a summary")
    demo.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    demo.add_argument("--target-kmh", type=float, default=80.0, help="speed to reach")
    demo.add_argument("--headless", action="store_true",
                      help="no dashboard (the only mode until the dashboard lands)")
    demo.add_argument("-v", "--verbose", action="store_true", help="print progress")
    demo.set_defaults(func=_cmd_demo)

    bench = sub.add_parser("bench", help="print the plant's cost per frame")
    bench.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    bench.add_argument("--frames", type=int, default=3000, help="frames to time")
    bench.add_argument("--json", action="store_true", help="one JSON object on stdout")
    bench.set_defaults(func=_cmd_bench)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``railrig`` console script."""
    args = build_parser().parse_args(argv)
    try:
        return args.func(args)
    except ProfileError as exc:
        console.print(f"[red]profile error:[/red] {exc}")
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
