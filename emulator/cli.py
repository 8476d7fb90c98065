"""The ``railrig`` command."""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence

from rich.console import Console
from rich.table import Table

from emulator.profile import ProfileError, load_trainset

DEFAULT_TRAINSET = "trainsets/tern-25kv"
console = Console(stderr=True)


def _cmd_demo(args: argparse.Namespace) -> int:
    import asyncio

    from emulator.controller.events import NAMES
    from emulator.demo import run_reference_demo
    from emulator.profile import resolve_profile
    from emulator.warmup import warm_up

    profile = resolve_profile(args.profile)
    params = load_trainset(profile)
    console.print(f"[bold]railrig demo[/bold]: {params.name}")
    warm_up(params, say=console.print)
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
    from emulator.profile import resolve_profile

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
    from emulator.bench import plant_benchmark
    from emulator.warmup import warm_up

    params = load_trainset(args.profile)
    warm_up(params, say=console.print)
    if args.link:
        from emulator.bench_link import link_benchmark

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
    from emulator.signals import HEADER, build_signal_map

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
    import asyncio
    import signal

    from emulator.link import LinkError, open_link
    from emulator.rig import Rig, RigError

    params = load_trainset(args.profile)
    if args.cpu is not None:
        try:
            os.sched_setaffinity(0, {args.cpu})
        except (AttributeError, OSError, ValueError) as exc:
            console.print(f"[red]error:[/red] cannot pin to CPU {args.cpu}: {exc}")
            return 2
    try:
        link = open_link(args.link, allow_remote=args.allow_remote)
        from emulator.clock import MonotonicClock

        rig = Rig(params, link, mode=args.mode, period_s=args.period_ms / 1e3,
                  command_delay=args.command_delay, watchdog_frames=args.watchdog_frames,
                  seed=args.seed, clock=MonotonicClock(spin_ns=round(args.spin_us * 1e3)),
                  ideal_dc_links=args.ideal_dc_links)
    except (LinkError, RigError) as exc:
        console.print(f"[red]error:[/red] {exc}")
        return 2

    async def serve() -> None:
        stop = asyncio.Event()
        loop = asyncio.get_running_loop()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.add_signal_handler(sig, stop.set)
        try:
            await link.open()
        except (LinkError, OSError) as exc:
            raise LinkError(f"{args.link}: {exc}") from None
        console.print(f"railrig serve: {params.name}; link {args.link}; mode {args.mode}; "
                      f"period {rig.period_us} us; command delay {rig.delay} frame(s)"
                      + (f"; clock {rig.clock.method}" if args.mode == "realtime" else "")
                      + ". Ctrl-C stops.")
        frames = args.frames
        if args.duration is not None:
            frames = round(args.duration * 1e6 / rig.period_us)
        recorder = None
        if args.record:
            from emulator.record import Recorder

            recorder = Recorder(args.record, rig.record_columns(),
                                {"profile": str(args.profile), "seed": args.seed,
                                 "mode": args.mode, "period_us": rig.period_us,
                                 "version": __import__("emulator").__version__})
            rig.recorder = recorder
        try:
            await rig.run(frames=frames, stop=stop)
        finally:
            link.close()
            rig.clock.close()
            if recorder is not None:
                recorder.close()

    try:
        asyncio.run(serve())
    except LinkError as exc:
        console.print(f"[red]link error:[/red] {exc}")
        return 2
    report = rig.report()
    if args.report_json:
        with open(args.report_json, "w") as fh:
            json.dump(report, fh, indent=1)
    t = report["timing"]
    pq = report["power_quality"]
    if pq:
        console.print(f"pantograph: {pq['voltage_rms_v']:.0f} V rms, {pq['current_rms_a']:.1f} A "
                      f"rms, {pq['active_power_w'] / 1e3:.0f} kW, power factor "
                      f"{pq['power_factor']:.3f} (displacement {pq['displacement_factor']:.3f}), "
                      f"current THD {100 * pq['current_thd']:.1f} %")
    console.print(f"{report['frames']} frames, plant time {report['plant_time_s']:.3f} s; "
                  f"link: {report['link']}; lateness median {t['lateness_us_median']:.1f} us, "
                  f"p99 {t['lateness_us_p99']:.1f} us, late frames {t['late_frames']}, "
                  f"CPU {100 * t['cpu_share']:.0f} %")
    return 0


def _cmd_export(args: argparse.Namespace) -> int:
    from emulator.record import RecordingError, export_csv, export_npz, read_recording

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
    from emulator.scenario.command import cmd_run

    return cmd_run(args)


def _cmd_replay(args: argparse.Namespace) -> int:
    from emulator.scenario.command import cmd_replay

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
                      help="no dashboard (the only mode until the dashboard lands)")
    demo.add_argument("--in-process", action="store_true",
                      help="run the controller in this process (faster, deterministic)")
    demo.set_defaults(func=_cmd_demo)

    ctl = sub.add_parser("controller", help="run the reference controller on a link")
    ctl.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    ctl.add_argument("--link", required=True, help="udp://HOST:PORT?peer=HOST:PORT or "
                     "serial:///dev/ttyX?baud=N")
    ctl.add_argument("--allow-remote", action="store_true", help="allow non-loopback UDP")
    ctl.add_argument("--idle-timeout", type=float, default=30.0,
                     help="stop after this many seconds without a telegram")
    ctl.set_defaults(func=_cmd_controller)

    serve = sub.add_parser("serve", help="run the plant behind a controller link")
    serve.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    serve.add_argument("--link", required=True,
                       help="udp://HOST:PORT?peer=HOST:PORT, serial:///dev/ttyX?baud=N, "
                       "loop://NAME")
    serve.add_argument("--mode", choices=("realtime", "lockstep", "afap"), default="realtime")
    serve.add_argument("--period-ms", type=float, default=1.0, help="control period T")
    serve.add_argument("--command-delay", type=int, default=1,
                       help="frames between a measurement and the command acting on it "
                       "(1 as on a real signal processor; 0 only for studies)")
    serve.add_argument("--watchdog-frames", type=int, default=10,
                       help="frames a missing command is held before the gates are blocked")
    serve.add_argument("--spin-us", type=float, default=150.0,
                       help="realtime: spin this long before each deadline (150 on bare "
                       "metal; up to the period on a VM whose timers wake late)")
    serve.add_argument("--cpu", type=int, default=None,
                       help="pin the rig to this CPU (the controller gets the others)")
    serve.add_argument("--seed", type=int, default=0, help="seed of the sensor noise")
    serve.add_argument("--frames", type=int, default=None, help="stop after N frames")
    serve.add_argument("--duration", type=float, default=None, help="stop after S seconds "
                       "of plant time")
    serve.add_argument("--ideal-dc-links", action="store_true",
                       help="hold the DC links at their nominal voltage, no line side "
                       "(motor-side studies)")
    serve.add_argument("--allow-remote", action="store_true",
                       help="let UDP bind or talk beyond loopback")
    serve.add_argument("--report-json", default=None, help="write the run's counters here")
    serve.add_argument("--record", default=None, help="record every frame to this file")
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
    run.add_argument("--report", default=None, help="write PNG plots and index.html here")
    run.set_defaults(func=_cmd_run)

    replay = sub.add_parser("replay", help="run a recorded scenario again and compare")
    replay.add_argument("recording", help="a recording made by railrig run --record")
    replay.set_defaults(func=_cmd_replay, controller="reference", mode="lockstep", seed=None)

    bench = sub.add_parser("bench", help="print the plant's cost per frame")
    bench.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    bench.add_argument("--frames", type=int, default=3000, help="frames to time")
    bench.add_argument("--json", action="store_true", help="one JSON object on stdout")
    bench.add_argument("--link", action="store_true",
                       help="benchmark the rig's pacing and UDP link instead of the plant")
    bench.add_argument("--seconds", type=float, default=10.0,
                       help="length of each timed run of --link")
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
