"""Telemetry recorded once from a real run, so layout tests do not depend on the plant.

``python -m tests.tui.canned`` runs the demo trainset with the reference controller in
lockstep for 20 s of plant time (switch-on, then accelerating), takes the rig's hello and
one snapshot every 0.5 s, fixes the timing figures (they depend on the machine), and
writes tests/tui/data/demo-telemetry.json. Run it again when the telemetry's keys change.
"""

from __future__ import annotations

import asyncio
import json
from pathlib import Path

DATA = Path(__file__).parent / "data" / "demo-telemetry.json"
FIXED_TIMING = {"frames": 0, "lateness_us_p99": 180.0, "compute_us_median": 420.0,
                "late_frames": 0}


def load() -> tuple[dict, list[dict]]:
    """(hello, snapshots) as stored."""
    data = json.loads(DATA.read_text())
    return data["hello"], data["snapshots"]


async def _record() -> dict:
    from emulator.controller.inprocess import attach_reference
    from emulator.faults import FaultSet
    from emulator.link import open_link
    from emulator.monitor.telemetry import TelemetryBuilder
    from emulator.profiles.reader import load_trainset
    from emulator.rig.frame_loop import Rig
    from emulator.scenario.driver import demo_program

    from .conftest import TRAINSET

    link = open_link("loop://canned")
    await link.open()
    rig = Rig(load_trainset(TRAINSET), link, mode="lockstep")
    await attach_reference("canned", rig, TRAINSET)
    rig.program = demo_program(target_kmh=60.0, stop_at_m=3000.0)
    rig.faults = FaultSet(rig)
    rig.faults.add("low-adhesion", "INV-B2.m2", {"factor": 0.4}, at_s=15.0)
    builder = TelemetryBuilder(rig)

    class Averaging:  # the part of a monitor that runs every frame
        @staticmethod
        def service() -> None:
            builder.accumulate()

        @staticmethod
        def may_run() -> bool:
            return True

    rig.monitor = Averaging()
    hello = builder.hello(rig.faults.targets())
    hello["events"] = []
    snaps = []
    for k in range(1, 41):
        await rig.run(frames=500 * k)
        snap = builder.snapshot(False, None, rig.program.phase)
        snap["timing"] = dict(FIXED_TIMING, frames=rig.frame)
        snap["monitor"] = {"clients": 1}
        snaps.append(snap)
    link.close()
    return {"hello": hello, "snapshots": snaps}


def _plain(obj):
    if hasattr(obj, "tolist"):
        return obj.tolist()
    raise TypeError(type(obj).__name__)


if __name__ == "__main__":
    DATA.write_text(json.dumps(asyncio.run(_record()), default=_plain, indent=0))
    print(f"wrote {DATA}")
