"""A soak: the demo rig in real time for minutes with a dashboard attached; figures printed,
never asserted.

The rig (reference controller in this process, real time, monitor on a private Unix
socket) drives the demo trainset from station to station (a new 2 km leg each time the
driver program stops) while a dashboard follows it from a child process. Every
``sample_s`` the soak notes the resident memory of the rig and of the dashboard, the
frames, the late frames and the link and monitor counters. At the end it fits the memory
growth (after the first minute: imports, caches and the dashboard's history fill up
then) and sets the rig's late frames beside the host's own stalls, seen by a probe
process that only sleeps 1 ms at a time and notes when it woke more than a period late:
a late frame within 20 ms of a probe stall is the host's, not the rig's.
"""

from __future__ import annotations

import asyncio
import os
import shlex
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

from emulator.bench.monitor import DASHBOARD

#: a probe of the host: sleeps 1 ms at a time and writes the monotonic times (ns) at which
#: it woke more than ``STALL_US`` late, one per line, until SIGTERM
STALL_US = 1000
PROBE = f"""
import signal, sys, time
stalls = []
def stop(*_):
    sys.stdout.write("\\n".join(map(str, stalls[-100000:])))
    sys.exit(0)
signal.signal(signal.SIGTERM, stop)
while True:
    t = time.monotonic_ns()
    time.sleep(0.001)
    late = time.monotonic_ns() - t - 1_000_000
    if late > {STALL_US} * 1000:
        stalls.append(t + 1_000_000)
"""
COINCIDE_NS = 20_000_000  # a late frame this close to a probe stall is the host's


def rss_mb(pid: int | None = None) -> float:
    """Resident set size of a process (this one by default), MB, from /proc (Linux)."""
    path = f"/proc/{pid or 'self'}/status"
    try:
        with open(path) as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return float("nan")


class StationToStation:
    """The demo driver program, leg after leg: a new 2 km leg when the train stops."""

    def __init__(self, leg_m: float = 2000.0) -> None:
        from emulator.scenario.driver import demo_program

        self.make = demo_program
        self.leg_m = leg_m
        self.legs = 1
        self.program = demo_program(target_kmh=80.0, stop_at_m=leg_m)

    @property
    def phase(self) -> str:
        return self.program.phase

    def update(self, rig) -> None:
        self.program.update(rig)
        if self.program.finished and rig.plant.read("train.speed_mps") == 0.0:
            self.legs += 1
            x = rig.plant.read("train.position_m")
            self.program = self.make(target_kmh=80.0 if self.legs % 2 else 60.0,
                                     stop_at_m=x + self.leg_m)


def _growth_mb_per_h(t_s: np.ndarray, mb: np.ndarray, skip_s: float = 60.0) -> float:
    keep = (t_s >= skip_s) & np.isfinite(mb)
    if keep.sum() < 3:
        return float("nan")
    return float(np.polyfit(t_s[keep] / 3600.0, mb[keep], 1)[0])


async def _soak(profile: Path, minutes: float, sample_s: float, pty: bool,
                controller: str) -> dict[str, Any]:
    from emulator.controller.inprocess import attach_reference
    from emulator.link import open_link
    from emulator.monitor.endpoint import Monitor
    from emulator.profiles.reader import load_trainset
    from emulator.rig.clock import MonotonicClock
    from emulator.rig.frame_loop import Rig

    where = Path(tempfile.mkdtemp(prefix="railrig-soak-"))
    board = None
    if controller == "process":  # as a board: the reference controller over UDP
        from emulator.controller.process import spawn_controller, stop_controller

        url, board = spawn_controller(profile, quiet=True)
        link = open_link(url)
        await link.open()
        rig = Rig(load_trainset(profile), link, mode="realtime", clock=MonotonicClock())
    else:
        link = open_link("loop://bench-soak")
        await link.open()
        rig = Rig(load_trainset(profile), link, mode="realtime", clock=MonotonicClock())
        await attach_reference("bench-soak", rig, profile)
    driver = StationToStation()
    rig.program = driver
    monitor = Monitor(rig, str(where / "monitor.sock"), record_dir=where / "recordings")
    await monitor.start()
    probe = subprocess.Popen([sys.executable, "-c", PROBE], stdout=subprocess.PIPE,
                             stderr=subprocess.DEVNULL)
    argv = [sys.executable, "-c", DASHBOARD, monitor.address]
    if pty:
        drawn = DASHBOARD.replace(".run(headless=True)", ".run()")
        argv = ["script", "-q", "-e", "-c", shlex.join([sys.executable, "-c", drawn,
                                                        monitor.address]), "/dev/null"]
    dashboard = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                 stdin=subprocess.PIPE)
    stop = asyncio.Event()
    task = asyncio.create_task(rig.run(stop=stop))
    period_ns = rig.period_us * 1000
    samples: list[dict[str, Any]] = []
    late_times: list[int] = []
    seen = 0
    t0 = time.monotonic()
    try:
        while time.monotonic() - t0 < minutes * 60.0:
            await asyncio.sleep(min(sample_s, max(0.0, minutes * 60.0 - (time.monotonic()
                                                                          - t0))))
            now_ns, frames = time.monotonic_ns(), rig.stats.frames
            first = max(seen, frames - rig.stats.capacity + 1)
            k = np.arange(first, frames)
            late = rig.stats.lateness_us[k % rig.stats.capacity] > rig.period_us
            late_times += [now_ns - int(n) * period_ns for n in (frames - k[late])]
            seen = frames
            dash_pid = _dashboard_pid(dashboard)
            samples.append({
                "t_s": round(time.monotonic() - t0, 1), "plant_s": round(rig.plant.time_s, 1),
                "rig_rss_mb": round(rss_mb(), 1),
                "dashboard_rss_mb": round(rss_mb(dash_pid), 1) if dash_pid else None,
                "frames": frames, "late_frames": rig.stats.late_frames,
                "held": rig.health.missing, "overrun_held": rig.health.overrun_held,
                "watchdog_trips": rig.health.watchdog_trips,
                "snapshots": monitor.counts["snapshots"], "clients": len(monitor.clients),
                "clients_dropped": monitor.counts["clients_dropped"], "legs": driver.legs})
    finally:
        stop.set()
        await task
        dashboard.terminate()
        try:
            dashboard.wait(10)
        except subprocess.TimeoutExpired:
            dashboard.kill()
        probe.send_signal(signal.SIGTERM)
        out, _ = probe.communicate(timeout=10)
        if board is not None:
            stop_controller(board)
        monitor.close()
        link.close()
        rig.clock.close()
        shutil.rmtree(where, ignore_errors=True)
    stalls = np.array([int(s) for s in out.decode().split()], dtype=np.int64)
    late = np.array(late_times, dtype=np.int64)
    host = 0
    if late.size and stalls.size:
        nearest = np.searchsorted(stalls, late)
        before = np.abs(late - stalls[np.clip(nearest - 1, 0, stalls.size - 1)])
        after = np.abs(stalls[np.clip(nearest, 0, stalls.size - 1)] - late)
        host = int(np.sum(np.minimum(before, after) <= COINCIDE_NS))
    t = np.array([s["t_s"] for s in samples])
    timing = rig.stats.summary()
    return {
        "minutes": minutes, "clock": rig.clock.method, "controller": controller,
        "dashboard": "in a pseudo-terminal" if pty else "headless",
        "frames": rig.stats.frames, "plant_time_s": rig.plant.time_s,
        "legs_driven": driver.legs,
        "rig_rss_mb_first_last": [samples[0]["rig_rss_mb"], samples[-1]["rig_rss_mb"]]
        if samples else [],
        "rig_rss_growth_mb_per_h": _growth_mb_per_h(t, np.array([s["rig_rss_mb"]
                                                                 for s in samples])),
        "dashboard_rss_growth_mb_per_h": _growth_mb_per_h(t, np.array(
            [s["dashboard_rss_mb"] or np.nan for s in samples], dtype=float)),
        "late_frames": int(late.size), "late_frames_during_host_stalls": host,
        "late_frames_rig_alone": int(late.size) - host, "host_stalls": int(stalls.size),
        "lateness_us_median": timing["lateness_us_median"],
        "lateness_us_p99": timing["lateness_us_p99"],
        "lateness_us_max": timing["lateness_us_max"],
        "watchdog_trips": rig.health.watchdog_trips, "held": rig.health.missing,
        "overrun_held": rig.health.overrun_held,
        "monitor": dict(monitor.counts), "samples": samples}


def _dashboard_pid(child: subprocess.Popen) -> int | None:
    """The dashboard's own process: the child, or the child's child under ``script``."""
    if child.poll() is not None:
        return None
    try:
        with open(f"/proc/{child.pid}/task/{child.pid}/children") as fh:
            kids = fh.read().split()
    except OSError:
        kids = []
    return int(kids[0]) if kids and os.path.basename(child.args[0]) == "script" else child.pid


def soak_benchmark(profile: Path, minutes: float = 10.0, sample_s: float = 30.0,
                   pty: bool | None = None, controller: str = "inprocess") -> dict[str, Any]:
    """Run the soak; the dashboard in a pseudo-terminal if ``script`` is there; the
    reference controller in the rig's process ("inprocess") or in its own over UDP
    ("process", as a board: the rig's frame then holds only the rig's own work)."""
    if pty is None:
        pty = shutil.which("script") is not None
    return asyncio.run(_soak(profile, minutes, sample_s, pty, controller))
