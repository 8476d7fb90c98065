"""``railrig bench``: figures of the plant's cost, the rig's pacing and link, the monitor.

Benchmarks print figures and assert nothing: the machines are shared and noisy.
"""

from __future__ import annotations

import argparse
import json

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from emulator.commands import DEFAULT_TRAINSET, pairs_table, stderr_console

console = stderr_console()
HELP = "print the plant's cost per frame"


def add_arguments(bench: argparse.ArgumentParser) -> None:
    """The options of ``railrig bench``."""
    bench.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    bench.add_argument("--frames", type=int, default=3000, help="frames to time")
    bench.add_argument("--json", action="store_true", help="one JSON object on stdout")
    bench.add_argument("--monitor", action="store_true",
                       help="the rig's lateness with a dashboard attached vs detached")
    bench.add_argument("--link", action="store_true",
                       help="benchmark the rig's pacing and UDP link instead of the plant")
    bench.add_argument("--serial-ber", type=float, nargs="+", default=None, metavar="BER",
                       help="--link: the serial link through a noisy cable at these bit "
                       "error rates (and clean, in the same run) instead of UDP")
    bench.add_argument("--serial-mode", choices=("lockstep", "realtime"), default="lockstep",
                       help="--serial-ber: the rig's timing mode")
    bench.add_argument("--board", default=None, metavar="COMMAND",
                       help="--serial-ber: the controller's command line with {device} for "
                       "its serial device and {fec} for --fec (default: the reference "
                       "controller)")
    bench.add_argument("--fec", type=int, nargs="+", default=[0], metavar="PARITY",
                       help="--serial-ber: forward error correction, Reed-Solomon parity "
                       "bytes per block (0: none; even, 2..64); the sweep is run for each")
    bench.add_argument("--recording", action="store_true",
                       help="recording: MB per second of plant time by channel set, the "
                       "frame loop's cost per frame, real time with and without a "
                       "recording, MDF export time")
    bench.add_argument("--throughput", action="store_true",
                       help="the demo in lockstep with the reference controller in this "
                       "process and over UDP: real-time factors and each stage's cost per "
                       "frame")
    bench.add_argument("--plant-seconds", type=float, default=400.0,
                       help="--throughput: end each demo run at this plant time")
    bench.add_argument("--runs", type=int, default=3,
                       help="--throughput: plain runs each way; the median is given")
    bench.add_argument("--seconds", type=float, default=10.0,
                       help="length of each timed run of --link and --monitor")
    bench.add_argument("--soak", type=float, default=None, metavar="MINUTES",
                       help="run the demo rig in real time this long with a dashboard "
                       "attached: memory growth, late frames (and the host's own stalls), "
                       "counters")
    bench.add_argument("--soak-controller", choices=("inprocess", "process"),
                       default="inprocess", help="--soak: the reference controller in the "
                       "rig's process, or in its own over UDP as a board would be")


def run(args: argparse.Namespace) -> int:
    """Print the chosen benchmark's figures (a table, or JSON)."""
    from emulator.bench.plant import plant_benchmark
    from emulator.profiles.reader import load_trainset
    from emulator.rig.warmup import warm_up

    params = load_trainset(args.profile)
    warm_up(params, say=console.print)
    if args.soak is not None:
        return _print_soak(args, params.name)
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
    if args.throughput:
        return _print_throughput(args, params.name)
    if args.recording:
        return _print_recording(args, params.name)
    if args.link and args.serial_ber:
        return _print_serial_ber(args, params)
    if args.link:
        from emulator.bench.link import link_benchmark

        figures = link_benchmark(params, seconds=args.seconds)
        if args.json:
            print(json.dumps(figures))
            return 0
        table = pairs_table(f"Rig pacing and link: {params.name}, {args.seconds:g} s at 1 kHz")
        for key, value in figures.items():
            table.add_row(key, str(value))
        Console().print(table)
        return 0
    figures = plant_benchmark(params, frames=args.frames)
    if args.json:
        print(json.dumps(figures))
        return 0
    table = pairs_table(f"Plant cost per frame: {params.name}")
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
    table.add_row("the machines alone by solve_ivp (RK45, rtol 1e-6)",
                  f"{figures['solve_ivp_frame_us_median']:.0f} us, "
                  f"{figures['machines_apart_solve_ivp']:.1e} from the reference")
    table.add_row("  by our plant (matrices once a frame)",
                  f"{figures['machines_frame_us_median']:.1f} us, "
                  f"{figures['machines_apart_ours']:.1e} from the reference")
    table.add_row("  by our plant (matrices each sub-step)",
                  f"{figures['machines_frame_us_refresh_each_substep']:.1f} us, "
                  f"{figures['machines_apart_ours_refresh_each_substep']:.1e} from the "
                  "reference")
    table.add_row("solve_ivp / our machines (once a frame; each sub-step)",
                  f"{figures['solve_ivp_machines_ratio']:.0f}x; "
                  f"{figures['solve_ivp_machines_ratio_refresh_each_substep']:.0f}x")
    table.add_row("  by solve_ivp (RK45, rtol = atol = 1e-3)",
                  f"{figures['solve_ivp_loose_frame_us_median']:.0f} us, "
                  f"{figures['machines_apart_solve_ivp_loose']:.1e} from the reference")
    table.add_row("solve_ivp at 1e-3 / our machines (once a frame)",
                  f"{figures['solve_ivp_loose_machines_ratio']:.0f}x")
    table.add_row("solve_ivp's machines / our whole frame",
                  f"{figures['solve_ivp_ratio']:.0f}x")
    Console().print(table)
    return 0


def _print_throughput(args: argparse.Namespace, name: str) -> int:
    from emulator.bench.throughput import throughput_benchmark
    from emulator.profiles.reader import resolve_profile

    if args.runs < 1:
        console.print(f"[red]--runs must be at least 1, got {args.runs}[/red]")
        return 2
    console.print(f"throughput: {name}, the demo in lockstep {args.runs} times each in "
                  "process and over UDP (in turn), then once in process with each stage "
                  "timed, a recording and a monitor client")
    figures = throughput_benchmark(resolve_profile(args.profile), args.plant_seconds,
                                   args.runs)
    if args.json:
        print(json.dumps(figures))
        return 0
    table = pairs_table(f"Lockstep throughput: {name}, {figures['plant_time_s']:.1f} s of "
                        f"plant time, {figures['frames']} frames")
    for key, where in (("inprocess", "in process"), ("udp", "over UDP")):
        runs = ", ".join(f"{f:.1f}" for f in figures[f"{key}_runs"])
        table.add_row(f"real-time factor, controller {where} (median)",
                      f"{figures[f'{key}_realtime_factor']:.1f}x ({runs})")
    table.add_row("frame, instrumented run", f"{figures['frame_us_instrumented']:.1f} us")
    for stage, us in figures["stage_us"].items():
        table.add_row(f"  {stage.replace('_', ' ')}", f"{us:.1f} us")
    Console().print(table)
    return 0


def _print_serial_ber(args: argparse.Namespace, params) -> int:
    from emulator.bench.serial_ber import serial_ber_benchmark
    from emulator.link.framing import check_fec
    from emulator.profiles.reader import resolve_profile

    try:
        for fec in args.fec:
            check_fec(fec)
    except ValueError as exc:
        console.print(f"[red]--fec: {escape(str(exc))}[/red]")
        return 2
    console.print(f"serial link under bit errors: {params.name}, {args.serial_mode}, "
                  f"{args.seconds:g} s at each rate (clean first), pseudo-terminals joined "
                  "by a noisy cable process")
    figures = serial_ber_benchmark(params, resolve_profile(args.profile), args.serial_ber,
                                   mode=args.serial_mode, seconds=args.seconds,
                                   board=args.board, fecs=tuple(args.fec))
    if args.json:
        print(json.dumps(figures))
        return 0
    table = Table(title=f"Serial link, {figures['mode']}, controller "
                  f"{figures['controller']}, {figures['seconds_each']:g} s each")
    table.add_column("bit error rate")
    for row in figures["rows"]:
        table.add_column(f"{row['ber']:g}" + (f" fec {row['fec']}" if row["fec"] else ""),
                         justify="right")
    keys = ["frames", "realtime_factor", "factor_vs_clean", "frames_to_rig",
            "spoiled_to_rig", "spoiled_to_board", "rig_framing_errors", "repeats",
            "repeat_requests", "held", "watchdog_trips", "rejected",
            "accepted_beyond_clean"]
    if any(row["fec"] for row in figures["rows"]):
        if "factor_vs_plain_clean" in figures["rows"][0]:
            keys.insert(3, "factor_vs_plain_clean")
        keys.insert(keys.index("rig_framing_errors") + 1, "fec_mended_to_rig")
    for key in keys:
        table.add_row(key.replace("_", " "), *(
            ", ".join(f"{k} {v}" for k, v in row[key].items()) or "0"
            if isinstance(row[key], dict) else f"{row[key]:g}" for row in figures["rows"]))
    Console().print(table)
    return 0


def _print_recording(args: argparse.Namespace, name: str) -> int:
    from emulator.bench.recording import recording_benchmark
    from emulator.profiles.reader import resolve_profile

    console.print(f"recording: {name}, the demo in lockstep to 90 s of plant time once "
                  f"per channel set, then {args.seconds:g} s in real time without and "
                  "with a recording")
    figures = recording_benchmark(resolve_profile(args.profile), realtime_s=args.seconds)
    if args.json:
        print(json.dumps(figures))
        return 0
    out = Console()
    sets = Table(title=f"Recording by channel set: {name}, {figures['plant_s']:g} s of "
                 "plant time (lockstep)")
    for col in ("set", "columns", "MB / plant s", "append us median", "p99", "max"):
        sets.add_column(col, justify="left" if col == "set" else "right")
    for set_name, f in figures["sets"].items():
        sets.add_row(set_name, str(f["columns"]), f"{f['mb_per_plant_s']:.3f}",
                     f"{f['append_us_median']:.2f}", f"{f['append_us_p99']:.1f}",
                     f"{f['append_us_max']:.0f}")
    out.print(sets)
    rt = figures["realtime"]
    table = pairs_table(f"Real time, {rt['seconds']:g} s each, in one run")
    for label, key in (("without recording", "without_recording"),
                       ("with the default set", "with_default_recording")):
        f = rt[key]
        table.add_row(f"{label}: late frames / p99 lateness",
                      f"{f['late_frames']} / {f['lateness_us_p99']:.0f} us")
    table.add_row("default set in real time",
                  f"{rt['with_default_recording']['mb_per_plant_s']:.3f} MB/s, "
                  f"{rt['one_hour_gb']:.2f} GB an hour")
    table.add_row("MDF 4 export of the 'all' recording",
                  f"{figures['mdf_export_s']:.2f} s for {figures['mdf_export_frames']} "
                  f"frames ({figures['mdf_mb']:.0f} MB)")
    out.print(table)
    return 0


def _print_soak(args: argparse.Namespace, name: str) -> int:
    from emulator.bench.soak import soak_benchmark
    from emulator.profiles.reader import resolve_profile

    console.print(f"soak: {name}, {args.soak:g} min in real time with a dashboard attached")
    figures = soak_benchmark(resolve_profile(args.profile), minutes=args.soak,
                             controller=args.soak_controller)
    if args.json:
        print(json.dumps(figures))
        return 0
    samples = Table(title="Samples")
    columns = ("t_s", "rig_rss_mb", "dashboard_rss_mb", "late_frames", "held",
               "watchdog_trips", "clients", "legs")
    for col in columns:
        samples.add_column(col.replace("_", " "), justify="right")
    for s in figures["samples"]:
        samples.add_row(*(str(s[c]) for c in columns))
    out = Console()
    out.print(samples)
    table = pairs_table(f"Soak: {name}, {figures['minutes']:g} min, clock {figures['clock']}, "
                        f"controller {figures['controller']}, dashboard {figures['dashboard']}")
    for key in ("frames", "plant_time_s", "legs_driven", "rig_rss_mb_first_last",
                "rig_rss_growth_mb_per_h", "dashboard_rss_growth_mb_per_h", "late_frames",
                "late_frames_during_host_stalls", "late_frames_rig_alone", "host_stalls",
                "lateness_us_median", "lateness_us_p99", "lateness_us_max", "watchdog_trips",
                "held", "overrun_held"):
        value = figures[key]
        table.add_row(key.replace("_", " "), f"{value:.2f}" if isinstance(value, float)
                      else str(value))
    table.add_row("monitor", ", ".join(f"{k} {v}" for k, v in figures["monitor"].items()))
    out.print(table)
    return 0
