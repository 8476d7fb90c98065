"""How fast a lockstep run goes: the demo with the reference controller, in the rig's
process and in its own over UDP, and what each stage of a frame costs.

The real-time factors come from plain runs (nothing measured inside them; the median of
a few of each); the stage costs from one more in-process run whose stages are each
wrapped in a timer, which records to a scratch file (so the recorder's share shows) and
has the monitor endpoint open with one client reading its telemetry (a child process
that only reads, so the monitor's share shows: what the frame loop spends on it, not
the dashboard's drawing).
Wall time counts from the first frame, so neither a controller process starting up nor
the compile is in it.
"""

from __future__ import annotations

import asyncio
import statistics
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

#: the stages of a frame, in the order they are printed ("controller": the in-process
#: reference controller with its own codec; a dashboard's cost, the monitor's, is
#: `railrig bench --monitor`'s)
STAGES = ("plant", "sampling", "codec", "controller", "program", "recording", "monitor")

#: the monitor's client in the instrumented run: reads the telemetry until the rig closes
_READER = ("import socket, sys\n"
           "s = socket.socket(socket.AF_UNIX)\n"
           "s.connect(sys.argv[1])\n"
           "while s.recv(1 << 16):\n"
           "    pass\n")


async def _watched(rig, where: Path, spent: dict[str, int]):
    """Open rig's monitor endpoint at ``where``, its service and snapshots timed as the
    "monitor" stage, and wait until a reading client (a child process) is attached;
    returns (monitor, client process)."""
    from emulator.monitor.endpoint import Monitor

    monitor = Monitor(rig, str(where))
    await monitor.start()
    _timed(monitor, "service", "monitor", spent)
    _timed(monitor, "publish", "monitor", spent)
    reader = subprocess.Popen([sys.executable, "-c", _READER, str(where)])
    deadline = time.monotonic() + 30
    while not monitor.clients:
        if time.monotonic() > deadline or reader.poll() is not None:
            reader.kill()
            monitor.close()
            raise RuntimeError("the monitor's reading client did not connect")
        await asyncio.sleep(0.01)
    return monitor, reader


def _timed(obj, name: str, stage: str, spent: dict[str, int]) -> None:
    """Replace obj.name by a wrapper that adds its calls' time to spent[stage]."""
    inner = getattr(obj, name)
    clock = time.perf_counter_ns

    def wrapper(*args, **kwargs):
        start = clock()
        try:
            return inner(*args, **kwargs)
        finally:
            spent[stage] += clock() - start

    setattr(obj, name, wrapper)


class _FirstFrame:
    """Notes when the plant first advances (the run's start, after any start-up), and
    forgets the stage times spent before it (the rig's warm-up and first sample), so that
    the stages and the wall time cover the same frames. Then it steps aside: the frames
    after the first call the plant's own advance (unless a stage's timer wrapped this
    one since: the instrumented run), so that the plain runs time the rig, not this
    (about 1.6 us a frame when it stayed, measured with py-spy on the in-process run)."""

    def __init__(self, rig, spent: dict[str, int]) -> None:
        self.at: float | None = None
        self.plant_s = 0.0
        plant = rig.plant
        inner = plant.advance

        def advance(*args, **kwargs):
            if self.at is None:
                self.at = time.perf_counter()
                self.plant_s = plant.time_s
                spent.clear()
                if plant.__dict__.get("advance") is advance:
                    del plant.advance  # the class's method from the next frame on
            return inner(*args, **kwargs)

        plant.advance = advance


async def _demo(profile, in_process: bool, max_plant_s: float, stages: bool):
    from emulator.scenario.demo_run import run_reference_demo

    spent: dict[str, int] = defaultdict(int)
    marks: dict[str, object] = {}
    scratch = tempfile.TemporaryDirectory() if stages else None

    def setup(rig, tcu):
        marks["first"] = _FirstFrame(rig, spent)
        marks["rig"] = rig
        if not stages:
            return None
        _timed(rig.plant, "advance", "plant", spent)
        _timed(rig.sampler, "sample", "sampling", spent)
        _timed(rig.codec, "encode", "codec", spent)
        _timed(rig.codec, "decode", "codec", spent)
        # in process the controller answers inside the rig's send: its time (with its
        # own codec and the loop link's few calls) is the send's
        _timed(rig.link, "send", "controller", spent)
        if rig.program is not None:
            _timed(rig.program, "update", "program", spent)
        rig.start_recording(str(Path(scratch.name) / "bench.rrec"))
        _timed(rig.recorder, "append", "recording", spent)
        return _attach(rig)

    async def _attach(rig) -> None:
        marks["monitor"] = await _watched(rig, Path(scratch.name) / "monitor.sock", spent)

    try:
        summary = await run_reference_demo(profile, in_process=in_process,
                                           max_plant_s=max_plant_s, setup=setup)
        end = time.perf_counter()
    finally:
        rig = marks.get("rig")
        if rig is not None and rig.recorder is not None:
            rig.recorder.close()
        if "monitor" in marks:
            monitor, reader = marks["monitor"]
            monitor.close()
            # the reader ends when it sees the connection closed, which the event loop
            # does on its next turns: wait for it here without blocking the loop (a
            # blocking wait held the close back and always ran into its 10 s timeout)
            deadline = time.monotonic() + 10
            while reader.poll() is None and time.monotonic() < deadline:
                await asyncio.sleep(0.01)
            if reader.poll() is None:
                reader.kill()
                reader.wait()
        if scratch is not None:
            scratch.cleanup()
    first = marks["first"]
    wall = end - first.at
    frames = rig.frame
    out = {"plant_time_s": summary.plant_time_s, "wall_s": wall, "frames": frames,
           "realtime_factor": (summary.plant_time_s - first.plant_s) / wall,
           "completed": summary.completed}
    if stages:
        per_frame = {k: spent[k] / frames / 1e3 for k in STAGES}
        per_frame["rig_rest"] = wall * 1e6 / frames - sum(per_frame.values())
        out["stage_us"] = per_frame
        out["frame_us"] = wall * 1e6 / frames
    return out


def throughput_benchmark(profile, max_plant_s: float = 400.0, runs: int = 3) -> dict:
    """The demo's real-time factor in process and over UDP, each the median of ``runs``
    plain runs (taken in turn: in process, over UDP, ...; a shared host's noise moves a
    single run by a tenth), and the stage costs (us a frame, means over the run) of one
    instrumented in-process run."""
    if runs < 1:
        raise ValueError(f"runs must be at least 1, got {runs}")
    inprocess, udp = [], []
    for _ in range(runs):
        inprocess.append(asyncio.run(_demo(profile, True, max_plant_s, stages=False)))
        udp.append(asyncio.run(_demo(profile, False, max_plant_s, stages=False)))
    staged = asyncio.run(_demo(profile, True, max_plant_s, stages=True))
    first = inprocess[0]
    return {"inprocess_realtime_factor": statistics.median(
                r["realtime_factor"] for r in inprocess),
            "udp_realtime_factor": statistics.median(r["realtime_factor"] for r in udp),
            "inprocess_runs": [r["realtime_factor"] for r in inprocess],
            "udp_runs": [r["realtime_factor"] for r in udp],
            "stage_us": staged["stage_us"], "frame_us_instrumented": staged["frame_us"],
            "frames": first["frames"], "plant_time_s": first["plant_time_s"],
            "completed": all(r["completed"] for r in inprocess + udp),
            "wall_s": {"inprocess": [r["wall_s"] for r in inprocess],
                       "udp": [r["wall_s"] for r in udp],
                       "instrumented": staged["wall_s"]}}
