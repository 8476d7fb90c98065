"""``railrig serve``: the plant behind a controller link, with its monitor endpoint.

The controller is a board or program on ``--link``, or the reference controller in this
process (``--controller reference``, over an in-process channel). ``--program demo``
gives the train the demo's driver; without it the demand stays zero until an operator
takes it from a dashboard. The monitor listens unless ``--no-monitor``.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import signal
import time

from rich.markup import escape

from emulator.commands import DEFAULT_TRAINSET, stderr_console
from emulator.profiles.reader import load_trainset, resolve_profile

console = stderr_console()
HELP = "run the plant behind a controller link"


def add_arguments(serve: argparse.ArgumentParser) -> None:
    """The options of ``railrig serve``."""
    serve.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    serve.add_argument("--link", default=None,
                       help="udp://HOST:PORT?peer=HOST:PORT or serial:///dev/ttyX?baud=N[&fec=P] "
                       "(not with --controller reference)")
    serve.add_argument("--controller", choices=("reference",), default=None,
                       help="run the reference controller in this process instead of a link")
    serve.add_argument("--program", choices=("demo",), default=None,
                       help="drive the train by a driver program (default: the operator's "
                       "demand from a dashboard, zero until set)")
    serve.add_argument("--target-kmh", type=float, default=80.0, help="demo program: speed")
    serve.add_argument("--stop-at-m", type=float, default=2000.0, help="demo program: stop")
    serve.add_argument("--mode", choices=("realtime", "lockstep", "afap"), default="realtime")
    serve.add_argument("--period-ms", type=float, default=1.0, help="control period T")
    serve.add_argument("--command-delay", type=int, default=1,
                       help="frames between a measurement and the command answering it")
    serve.add_argument("--watchdog-frames", type=int, default=10,
                       help="frames a missing command is held before the gates are blocked")
    serve.add_argument("--lockstep-repeat-ms", type=float, default=None,
                       help="lockstep: say the measurement again after this much silence "
                       "(default 20 periods; doubling up to 1 s while the silence lasts)")
    serve.add_argument("--spin-us", type=float, default=150.0,
                       help="busy-wait the last N us before each deadline (realtime)")
    serve.add_argument("--cpu", type=int, default=None,
                       help="pin the rig to this CPU (Linux)")
    serve.add_argument("--seed", type=int, default=0, help="seed of the sensor noise")
    serve.add_argument("--frames", type=int, default=None, help="stop after N frames")
    serve.add_argument("--duration", type=float, default=None, help="stop after S seconds "
                       "of plant time")
    serve.add_argument("--ideal-dc-links", action="store_true",
                       help="hold the DC links at nominal voltage (motor-side studies)")
    serve.add_argument("--allow-remote", action="store_true",
                       help="allow a non-loopback UDP peer (a board on the lab network)")
    serve.add_argument("--report-json", default=None, help="write the run's counters here")
    serve.add_argument("--record", default=None, help="record every frame to this file")
    serve.add_argument("--record-channels", default=None, metavar="SETS",
                       help="--record: channel sets and globs, comma-separated (all, "
                       "default, line, motors, link, or e.g. p.motor.*); default: default")
    serve.add_argument("--record-decimate", default=None, metavar="GLOB=N,...",
                       help="--record: keep the matching columns every N-th frame only "
                       "(slow signals), e.g. '*temperature*=100'")
    serve.add_argument("--monitor", default=None, metavar="ADDRESS",
                       help="monitor endpoint: a Unix socket path or 127.0.0.1:PORT "
                       "(default: railrig-monitor.sock in the runtime directory)")
    serve.add_argument("--no-monitor", action="store_true", help="no monitor endpoint")
    serve.add_argument("--record-dir", default="recordings",
                       help="folder of the recordings a dashboard starts (it may name a file "
                       "in it, never a path); default ./recordings")


def run(args: argparse.Namespace) -> int:
    """Run the rig until the frame count, the duration, or Ctrl-C/SIGTERM."""
    from emulator.link import LinkError, open_link
    from emulator.monitor.endpoint import Monitor, MonitorError
    from emulator.recording.channels import (
        ChannelError,
        parse_channels,
        parse_decimation,
        select_channels,
    )
    from emulator.rig.clock import MonotonicClock
    from emulator.rig.frame_loop import Rig, RigError
    from emulator.scenario.runner import recorded_states

    if (args.link is None) == (args.controller is None):
        console.print("[red]error:[/red] give either --link or --controller reference")
        return 2
    profile = resolve_profile(args.profile)
    params = load_trainset(profile)
    from emulator.rig.warmup import warm_up

    warm_up(params, say=console.print)  # says so first when it compiles (first start)
    if args.cpu is not None:
        try:
            os.sched_setaffinity(0, {args.cpu})
        except (AttributeError, OSError, ValueError) as exc:
            console.print(f"[red]error:[/red] cannot pin to CPU {args.cpu}: {escape(str(exc))}")
            return 2
    link_url = args.link or f"loop://railrig-serve-{os.getpid()}"
    try:
        link = open_link(link_url, allow_remote=args.allow_remote)
        rig = Rig(params, link, mode=args.mode, period_s=args.period_ms / 1e3,
                  command_delay=args.command_delay, watchdog_frames=args.watchdog_frames,
                  seed=args.seed, clock=MonotonicClock(spin_ns=round(args.spin_us * 1e3)),
                  ideal_dc_links=args.ideal_dc_links,
                  lockstep_repeat_s=(None if args.lockstep_repeat_ms is None
                                     else args.lockstep_repeat_ms / 1e3))
        monitor = None if args.no_monitor else Monitor(rig, args.monitor,
                                                        record_dir=args.record_dir)
        channels = parse_channels(args.record_channels) or ["default"]
        states = recorded_states(rig)
        select_channels(rig.record_columns(states), channels)  # a wrong name is said
        # now, not after the plant has started
        decimate = parse_decimation(args.record_decimate)
    except (LinkError, RigError, MonitorError, ChannelError) as exc:
        console.print(f"[red]error:[/red] {escape(str(exc))}")
        return 2
    if args.program == "demo":
        from emulator.scenario.driver import demo_program

        rig.program = demo_program(target_kmh=args.target_kmh, stop_at_m=args.stop_at_m,
                                   cruise_s=10.0, coast_s=5.0)

    async def serve() -> None:
        stop = asyncio.Event()
        loop = asyncio.get_running_loop()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.add_signal_handler(sig, stop.set)
        try:
            await link.open()
        except (LinkError, OSError) as exc:
            raise LinkError(f"{link_url}: {exc}") from None
        if args.controller == "reference":
            from emulator.controller.inprocess import attach_reference

            await attach_reference(link_url.removeprefix("loop://"), rig, profile,
                                   args.period_ms / 1e3)
        if monitor is not None:
            try:
                await monitor.start()
            except (OSError, MonitorError) as exc:
                link.close()
                raise LinkError(f"monitor {monitor.address}: {exc}") from None
        controller = args.link or "the reference controller in this process"
        console.print(f"railrig serve: {params.name}; controller {controller}; mode "
                      f"{args.mode}; period {rig.period_us} us; command delay {rig.delay} "
                      "frame(s)" + (f"; clock {rig.clock.method}" if args.mode == "realtime"
                                    else "")
                      + (f"; monitor {monitor.address}" if monitor else "") + ". Ctrl-C stops.")
        frames = args.frames
        if args.duration is not None:
            frames = round(args.duration * 1e6 / rig.period_us)
        recorder = (rig.start_recording(args.record, channels=channels, states=states,
                                        decimate=decimate)
                    if args.record else None)
        waiting = (asyncio.create_task(_say_until_first_telegram(rig, args.link))
                   if args.link else None)
        try:
            await rig.run(frames=frames, stop=stop)
        finally:
            if waiting is not None:
                waiting.cancel()
            if monitor is not None:
                monitor.close()
            link.close()
            rig.clock.close()
            if recorder is not None:
                recorder.close()

    try:
        asyncio.run(serve())
    except LinkError as exc:
        console.print(f"[red]link error:[/red] {escape(str(exc))}")
        return 2
    report = rig.report()
    if monitor is not None:
        report["monitor"] = dict(monitor.counts)
    if args.report_json:
        with open(args.report_json, "w") as fh:
            json.dump(report, fh, indent=1)
    _print_report(report)
    return 0


async def _say_until_first_telegram(rig, link: str) -> None:
    """Say that the rig waits for the controller, every 10 s, until its first telegram."""
    t0 = time.monotonic()
    console.print(f"waiting for the controller's first telegram on {link} ...")
    while rig.health.accepted == 0 and sum(rig.health.rejected.values()) == 0:
        await asyncio.sleep(0.2)
        if time.monotonic() - t0 >= 10.0:
            t0 = time.monotonic()
            console.print(f"still waiting for the controller's first telegram on {link} ...")
    console.print("the controller answers.")


def _print_report(report: dict) -> None:
    t = report["timing"]
    pq = report["power_quality"]
    if pq:
        console.print(f"pantograph: {pq['voltage_rms_v']:.0f} V rms, {pq['current_rms_a']:.1f} A "
                      f"rms, {pq['active_power_w'] / 1e3:.0f} kW, power factor "
                      f"{pq['power_factor']:.3f} (displacement {pq['displacement_factor']:.3f}), "
                      f"current THD {100 * pq['current_thd']:.1f} %")
    console.print(f"{report['frames']} frames, plant time {report['plant_time_s']:.3f} s; "
                  f"lateness median {t['lateness_us_median']:.1f} us, "
                  f"p99 {t['lateness_us_p99']:.1f} us, late frames {t['late_frames']}, "
                  f"CPU {100 * t['cpu_share']:.0f} %")
    console.print(link_counters_table(report))


def link_counters_table(report: dict):
    """The link's counters of a run as a table: telegrams taken, held frames, watchdog,
    each kind of rejection and sequence error (only the kinds that occurred)."""
    from emulator.commands import pairs_table

    link = report["link"]
    table = pairs_table("link counters", first="counter")
    labels = (("accepted", "telegrams accepted"), ("valid", "frames with their command"),
              ("missing", "frames held: command missing"),
              ("overrun_held", "frames held: the rig's overrun"),
              ("expired", "answers too late (expired)"), ("reordered", "reordered"),
              ("watchdog_trips", "watchdog trips"))
    for key, label in labels:
        table.add_row(label, str(link.get(key, 0)))
    for kind, n in sorted(link.get("rejected", {}).items()):
        table.add_row(f"rejected: {kind}", str(n))
    for kind, n in sorted(link.get("sequence", {}).items()):
        table.add_row(f"sequence error: {kind}", str(n))
    framing = report.get("transport", {}).get("framing", {})
    for key in ("crc_errors", "cobs_errors", "runts", "oversized", "fec_failures",
                "fec_mended_frames"):
        if framing.get(key):
            table.add_row(f"serial {key.replace('_', ' ')}", str(framing[key]))
    for cause, n in sorted(report.get("lockstep_repeat_causes", {}).items()):
        table.add_row(f"measurement said again: {cause.replace('_', ' ')}", str(n))
    for key, label in (("repeat_requests", "repeat requests from the controller"),
                       ("answers_to_repeats", "second answers to a repeat")):
        if link.get(key):
            table.add_row(label, str(link[key]))
    return table
