"""The ``railrig`` command."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence

from rich.console import Console
from rich.table import Table

from emulator.profiles.reader import ProfileError, load_trainset

DEFAULT_TRAINSET = "trainsets/tern-25kv"
console = Console(stderr=True)


def _cmd_demo(args: argparse.Namespace) -> int:
    import asyncio

    from emulator.commands.demo import run_reference_demo
    from emulator.controller.events import NAMES
    from emulator.profiles.reader import resolve_profile
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
    table = _pairs_table("Demo run (reference controller, lockstep)", "quantity")
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


def _cmd_controller(args: argparse.Namespace) -> int:
    import asyncio
    import signal

    from emulator.controller.process import serve_controller
    from emulator.link import LinkError
    from emulator.profiles.reader import resolve_profile

    async def run() -> None:
        stop = asyncio.Event()
        loop = asyncio.get_running_loop()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.add_signal_handler(sig, stop.set)
        await serve_controller(resolve_profile(args.profile), args.link,
                               allow_remote=args.allow_remote,
                               idle_timeout_s=args.idle_timeout, stop=stop)

    try:
        asyncio.run(run())
    except LinkError as exc:
        console.print(f"[red]link error:[/red] {exc}")
        return 2
    return 0


def _cmd_bench(args: argparse.Namespace) -> int:
    from emulator.bench.plant import plant_benchmark
    from emulator.rig.warmup import warm_up

    params = load_trainset(args.profile)
    warm_up(params, say=console.print)
    if args.monitor:
        from emulator.bench.monitor import monitor_benchmark
        from emulator.profiles.reader import resolve_profile

        figures = monitor_benchmark(resolve_profile(args.profile), seconds=args.seconds)
        if args.json:
            print(json.dumps(figures))
            return 0
        table = Table(title=f"Rig lateness, dashboard detached / attached / detached: "
                      f"{params.name}, {args.seconds:g} s each, clock {figures['clock']}, "
                      f"dashboard {figures['dashboard']}")
        table.add_column("figure")
        names = ("detached_before", "attached", "detached_after")
        for name in names:
            table.add_column(name.replace("_", " "), justify="right")
        for key in ("frames", "snapshots", "lateness_us_median", "lateness_us_p99",
                    "lateness_us_p999", "late_frames", "compute_us_median",
                    "compute_us_p99"):
            table.add_row(key, *(f"{figures[n][key]:.1f}" if isinstance(figures[n][key], float)
                                 else str(figures[n][key]) for n in names))
        Console().print(table)
        console.print(f"p99 lateness attached / detached (mean of the two windows): "
                      f"{figures['p99_ratio_attached_to_detached']:.2f}")
        return 0
    if args.link:
        from emulator.bench.link import link_benchmark

        figures = link_benchmark(params, seconds=args.seconds)
        if args.json:
            print(json.dumps(figures))
            return 0
        table = _pairs_table(f"Rig pacing and link: {params.name}, {args.seconds:g} s at 1 kHz")
        for key, value in figures.items():
            table.add_row(key, str(value))
        Console().print(table)
        return 0
    figures = plant_benchmark(params, frames=args.frames)
    if args.json:
        print(json.dumps(figures))
        return 0
    table = _pairs_table(f"Plant cost per frame: {params.name}")
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


def _cmd_protocol(args: argparse.Namespace) -> int:
    from emulator.protocol.signal_map import HEADER, build_signal_map

    params = load_trainset(args.profile)
    sm = build_signal_map(params)
    if args.json:
        print(json.dumps(sm.as_dict(), indent=1))
        return 0
    out = Console()
    out.print(f"[bold]Signal map[/bold] of {params.name}, protocol version {sm.version}. "
              "Each telegram is a msgpack array; physical value = wire value x scale.")
    for direction, signals in (("rig -> controller (measurements)", sm.measurements),
                               ("controller -> rig (commands)", sm.commands)):
        table = Table(title=direction)
        for col in ("index", "name", "unit", "scale", "range", "kind"):
            table.add_column(col, justify="right" if col in ("index", "scale") else "left")
        for i, name in enumerate(HEADER):
            table.add_row(str(i), name, "", "", "", "header")
        for i, sig in enumerate(signals, start=len(HEADER)):
            table.add_row(str(i), sig.name, sig.unit, f"{sig.scale:g}",
                          f"{sig.lo:g} .. {sig.hi:g}", sig.kind)
        out.print(table)
    return 0


def _cmd_serve(args: argparse.Namespace) -> int:
    from emulator.commands.serve import cmd_serve

    return cmd_serve(args)


def _cmd_dash(args: argparse.Namespace) -> int:
    from tui.app import run_dashboard

    return run_dashboard(args.rig)


def _cmd_export(args: argparse.Namespace) -> int:
    from emulator.recording.recorder import RecordingError, export_csv, export_npz, read_recording

    try:
        rec = read_recording(args.file)
    except (OSError, RecordingError) as exc:
        console.print(f"[red]error:[/red] {exc}")
        return 2
    if not rec.complete:
        console.print(f"[yellow]note:[/yellow] {rec.note}; exporting the "
                      f"{len(rec.data)} frames before it")
    base = args.file.rsplit(".", 1)[0]
    if args.csv:
        export_csv(rec, base + ".csv")
        console.print(f"wrote {base}.csv")
    if args.npz or not args.csv:
        export_npz(rec, base + ".npz")
        console.print(f"wrote {base}.npz")
    return 0


def _cmd_run(args: argparse.Namespace) -> int:
    from emulator.commands.run import cmd_run

    return cmd_run(args)


def _cmd_replay(args: argparse.Namespace) -> int:
    from emulator.commands.run import cmd_replay

    return cmd_replay(args)


def _pairs_table(title: str, first: str = "figure") -> Table:
    """A two-column table of names and right-aligned values."""
    table = Table(title=title)
    table.add_column(first)
    table.add_column("value", justify="right")
    return table


def build_parser() -> argparse.ArgumentParser:
    """The command-line grammar."""
    parser = argparse.ArgumentParser(
        prog="railrig", description="Traction-drive plant emulator for testing control "
        "firmware without a train.")
    sub = parser.add_subparsers(dest="command", required=True)

    demo = sub.add_parser("demo", help="run the demo trainset with the reference controller")
    demo.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    demo.add_argument("--target-kmh", type=float, default=80.0, help="speed to reach")
    demo.add_argument("--stop-at-m", type=float, default=2000.0, help="where to stop")
    demo.add_argument("--headless", action="store_true",
                      help="no dashboard: run in lockstep as fast as it goes and print a "
                      "summary (the default when there is no terminal)")
    demo.add_argument("--in-process", action="store_true",
                      help="headless, with the controller in this process (deterministic)")
    demo.set_defaults(func=_cmd_demo)

    dash = sub.add_parser("dash", help="the terminal dashboard of a running rig")
    dash.add_argument("--rig", default=None, metavar="ADDRESS",
                      help="the rig's monitor: a Unix socket path or 127.0.0.1:PORT "
                      "(default: where railrig serve listens by default)")
    dash.set_defaults(func=_cmd_dash)

    ctl = sub.add_parser("controller", help="run the reference controller on a link")
    ctl.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    ctl.add_argument("--link", required=True, help="udp://HOST:PORT?peer=HOST:PORT or "
                     "serial:///dev/ttyX?baud=N")
    ctl.add_argument("--allow-remote", action="store_true", help="allow non-loopback UDP")
    ctl.add_argument("--idle-timeout", type=float, default=30.0,
                     help="stop after this many seconds without a telegram")
    ctl.set_defaults(func=_cmd_controller)

    serve = sub.add_parser("serve", help="run the plant behind a controller link")
    from emulator.commands.serve import add_arguments

    add_arguments(serve, DEFAULT_TRAINSET)
    serve.set_defaults(func=_cmd_serve)

    protocol = sub.add_parser("protocol", help="print the signal map of a trainset")
    protocol.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    protocol.add_argument("--json", action="store_true", help="machine-readable")
    protocol.set_defaults(func=_cmd_protocol)

    export = sub.add_parser("export", help="convert a recording to CSV or NPZ")
    export.add_argument("file", help="a recording (.rrec)")
    export.add_argument("--csv", action="store_true", help="write FILE.csv")
    export.add_argument("--npz", action="store_true", help="write FILE.npz (the default)")
    export.set_defaults(func=_cmd_export)

    run = sub.add_parser("run", help="run scenario files headless and judge their checks")
    run.add_argument("scenario", nargs="+", help="scenario file(s), e.g. "
                     "profiles/scenarios/four-modes.toml")
    run.add_argument("--controller", default="reference",
                     help="'reference' (in this process) or the link URL of the controller "
                     "under test, e.g. udp://127.0.0.1:5000?peer=127.0.0.1:5001")
    run.add_argument("--mode", choices=("lockstep", "realtime"), default="lockstep")
    run.add_argument("--seed", type=int, default=None,
                     help="seed of the sensor noise and random faults (default: the file's)")
    run.add_argument("--record", default=None, help="write the recording to this file")
    run.add_argument("--junit", default=None, help="write JUnit XML here")
    run.add_argument("--monitor", default=None, metavar="ADDRESS",
                     help="let dashboards watch the run here (socket path or "
                     "127.0.0.1:PORT); the checks' verdicts reach them as events")
    run.add_argument("--report", default=None, help="write PNG plots and index.html here")
    run.set_defaults(func=_cmd_run)

    replay = sub.add_parser("replay", help="run a recorded scenario again and compare")
    replay.add_argument("recording", help="a recording made by railrig run --record")
    replay.set_defaults(func=_cmd_replay, controller="reference", mode="lockstep", seed=None)

    bench = sub.add_parser("bench", help="print the plant's cost per frame")
    bench.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    bench.add_argument("--frames", type=int, default=3000, help="frames to time")
    bench.add_argument("--json", action="store_true", help="one JSON object on stdout")
    bench.add_argument("--monitor", action="store_true",
                       help="the rig's lateness with a dashboard attached vs detached")
    bench.add_argument("--link", action="store_true",
                       help="benchmark the rig's pacing and UDP link instead of the plant")
    bench.add_argument("--seconds", type=float, default=10.0,
                       help="length of each timed run of --link and --monitor")
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
