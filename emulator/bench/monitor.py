"""The rig's lateness with a dashboard attached and detached, in one run: figures printed,
never asserted.

The demo rig (reference controller in this process, real time, monitor on a private
Unix socket) runs for three equal windows: detached, then with a dashboard attached (the
real Textual app in a child process, headless: it draws every view but to no terminal),
then detached again. The two detached windows bracket the attached one, so a drift of a
shared host's speed shows as a difference between them rather than as the dashboard's.
With ``pty=True`` the dashboard draws into a pseudo-terminal (util-linux ``script``), as it
would in a terminal, which costs it more than drawing headless.
"""

from __future__ import annotations

import asyncio
import shlex
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

import numpy as np

DASHBOARD = ("import sys; from tui.app import RigDashboard; "
             "RigDashboard(sys.argv[1], retry=False).run(headless=True)")


def _window(stats, first: int, last: int) -> dict[str, float]:
    i = np.arange(first, last) % stats.capacity
    late = stats.lateness_us[i]
    return {"frames": int(last - first), "lateness_us_median": float(np.median(late)),
            "lateness_us_p99": float(np.percentile(late, 99)),
            "lateness_us_p999": float(np.percentile(late, 99.9)),
            "late_frames": int(np.sum(late > 1000.0)),
            "compute_us_median": float(np.median(stats.compute_us[i])),
            "compute_us_p99": float(np.percentile(stats.compute_us[i], 99))}


async def _run(profile: Path, seconds: float, pty: bool) -> dict[str, Any]:
    from emulator.controller.inprocess import attach_reference
    from emulator.link import open_link
    from emulator.monitor.endpoint import Monitor
    from emulator.profiles.reader import load_trainset
    from emulator.rig.clock import MonotonicClock
    from emulator.rig.frame_loop import Rig
    from emulator.scenario.driver import demo_program

    where = Path(tempfile.mkdtemp(prefix="railrig-bench-"))
    link = open_link("loop://bench-monitor")
    await link.open()
    rig = Rig(load_trainset(profile), link, mode="realtime", clock=MonotonicClock())
    await attach_reference("bench-monitor", rig, profile)
    rig.program = demo_program(target_kmh=80.0, stop_at_m=4000.0)
    monitor = Monitor(rig, str(where / "monitor.sock"))
    await monitor.start()
    stop = asyncio.Event()
    task = asyncio.create_task(rig.run(stop=stop))
    windows: dict[str, dict] = {}
    child = None
    try:
        await asyncio.sleep(3.0)  # switch-on and the first allocations, not measured
        for name in ("detached_before", "attached", "detached_after"):
            if name == "attached":
                argv = [sys.executable, "-c", DASHBOARD, monitor.address]
                if pty:
                    drawn = DASHBOARD.replace(".run(headless=True)", ".run()")
                    argv = ["script", "-q", "-e", "-c", shlex.join(
                        [sys.executable, "-c", drawn, monitor.address]), "/dev/null"]
                child = subprocess.Popen(argv, stdout=subprocess.DEVNULL,
                                         stderr=subprocess.DEVNULL, stdin=subprocess.PIPE)
                for _ in range(300):
                    if monitor.clients and monitor.counts["snapshots"] > 10:
                        break
                    await asyncio.sleep(0.05)
                else:
                    raise RuntimeError("the dashboard did not attach")
            first = rig.stats.frames
            sent = monitor.counts["snapshots"]
            await asyncio.sleep(seconds)
            windows[name] = _window(rig.stats, first, rig.stats.frames)
            windows[name]["snapshots"] = monitor.counts["snapshots"] - sent
            if name == "attached":
                child.terminate()  # and wait without blocking the rig's loop
                for _ in range(200):
                    if child.poll() is not None and not monitor.clients:
                        break
                    await asyncio.sleep(0.05)
                else:
                    child.kill()
                await asyncio.sleep(1.0)  # the next window starts on a settled rig
    finally:
        if child is not None and child.poll() is None:
            child.kill()
        stop.set()
        await task
        monitor.close()
        link.close()
        rig.clock.close()
        shutil.rmtree(where, ignore_errors=True)
    detached_p99 = 0.5 * (windows["detached_before"]["lateness_us_p99"]
                          + windows["detached_after"]["lateness_us_p99"])
    return {"seconds_per_window": seconds, "clock": rig.clock.method,
            "dashboard": "in a pseudo-terminal" if pty else "headless", **windows,
            "p99_ratio_attached_to_detached": windows["attached"]["lateness_us_p99"]
            / max(detached_p99, 1e-3)}


def monitor_benchmark(profile: Path, seconds: float = 20.0,
                      pty: bool | None = None) -> dict[str, Any]:
    """Lateness detached / attached / detached, each window ``seconds`` long; the
    dashboard in a pseudo-terminal if ``script`` is there (pty=None) or as told."""
    if pty is None:
        pty = shutil.which("script") is not None
    return asyncio.run(_run(profile, seconds, pty))
