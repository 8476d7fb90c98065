"""What recording costs: the file's size per second of plant time for each channel set,
the frame loop's cost per frame (the recorder's append: a copy, and every block a
hand-over to the writer thread in real time, or in lockstep the block compressed and
written there: its p99 and maximum are those blocks), late frames in real time with
and without a recording in the same run, and the export of a recording to MDF 4.
Figures printed, nothing asserted.

The runs are the demo (reference controller in the rig's process, the demo's driver),
recording the plant states a scenario records beside the measurements and commands.
"""

from __future__ import annotations

import asyncio
import os
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

from emulator.scenario.runner import recorded_states

SETS = ("default", "all", "link")


def _timed_append(recorder, samples: list[int]) -> None:
    inner = recorder.append
    clock = time.perf_counter_ns

    def append(row):
        start = clock()
        inner(row)
        samples.append(clock() - start)

    recorder.append = append


async def _lockstep(profile, channels: str, plant_s: float, path: Path,
                    samples: list[int]) -> dict[str, Any]:
    from emulator.scenario.demo_run import run_reference_demo

    held: dict[str, Any] = {}

    def setup(rig, _tcu) -> None:
        held["rig"] = rig
        rig.start_recording(str(path), channels=[channels], states=recorded_states(rig))
        _timed_append(rig.recorder, samples)

    summary = await run_reference_demo(profile, in_process=True, max_plant_s=plant_s,
                                       setup=setup)
    rig = held["rig"]
    rig.recorder.close()
    return {"plant_s": summary.plant_time_s, "columns": len(rig.recorder.columns),
            "bytes": os.path.getsize(path)}


async def _realtime(profile, seconds: float, path: Path | None) -> dict[str, Any]:
    from emulator.controller.inprocess import attach_reference
    from emulator.link import open_link
    from emulator.profiles.reader import load_trainset
    from emulator.rig.frame_loop import Rig
    from emulator.scenario.driver import demo_program

    name = f"railrig-bench-rec-{os.getpid()}-{path is not None}"
    link = open_link(f"loop://{name}")
    await link.open()
    rig = Rig(load_trainset(profile), link, mode="realtime")
    await attach_reference(name, rig, profile)
    rig.program = demo_program(target_kmh=80.0, stop_at_m=2000.0)
    if path is not None:
        rig.start_recording(str(path), channels=["default"], states=recorded_states(rig))
    try:
        await rig.run(frames=round(seconds * 1e6 / rig.period_us))
    finally:
        if rig.recorder is not None:
            rig.recorder.close()
        link.close()
        rig.clock.close()
    timing = rig.stats.summary()
    out = {"frames": rig.frame, "late_frames": timing["late_frames"],
           "lateness_us_p99": timing["lateness_us_p99"],
           "compute_us_median": timing["compute_us_median"]}
    if path is not None:
        out["mb_per_plant_s"] = os.path.getsize(path) / 1e6 / rig.plant.time_s
    return out


def recording_benchmark(profile, plant_s: float = 90.0,
                        realtime_s: float = 20.0) -> dict[str, Any]:
    """The figures of the module docstring (sizes in MB = 1e6 bytes)."""
    from emulator.recording.mdf import export_mdf
    from emulator.recording.recorder import read_recording

    out: dict[str, Any] = {"plant_s": plant_s, "sets": {}}
    with tempfile.TemporaryDirectory(prefix="railrig-bench-rec-") as tmp:
        for name in SETS:
            samples: list[int] = []
            path = Path(tmp) / f"{name}.rrec"
            run = asyncio.run(_lockstep(profile, name, plant_s, path, samples))
            us = np.array(samples) / 1e3
            out["sets"][name] = {
                "columns": run["columns"],
                "mb_per_plant_s": run["bytes"] / 1e6 / run["plant_s"],
                "append_us_median": float(np.median(us)),
                "append_us_p99": float(np.percentile(us, 99)),
                "append_us_max": float(us.max())}
        rec = read_recording(Path(tmp) / "all.rrec")
        start = time.perf_counter()
        export_mdf(rec, Path(tmp) / "all.mf4")
        out["mdf_export_s"] = time.perf_counter() - start
        out["mdf_export_frames"] = len(rec.data)
        out["mdf_mb"] = os.path.getsize(Path(tmp) / "all.mf4") / 1e6
        without = asyncio.run(_realtime(profile, realtime_s, None))
        with_rec = asyncio.run(_realtime(profile, realtime_s, Path(tmp) / "rt.rrec"))
    out["realtime"] = {"seconds": realtime_s, "without_recording": without,
                       "with_default_recording": with_rec,
                       "one_hour_gb": with_rec["mb_per_plant_s"] * 3600 / 1e3}
    return out
