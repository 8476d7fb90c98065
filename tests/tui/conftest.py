"""A real rig with the reference controller and a monitor on a Unix socket, running in
the test's event loop beside the dashboard under test."""

from __future__ import annotations

import asyncio
import itertools
import shutil
import tempfile
from pathlib import Path

import pytest_asyncio

from emulator.clock import MonotonicClock
from emulator.controller.config import config_from_profile
from emulator.controller.inprocess import attach
from emulator.controller.tcu import ReferenceController
from emulator.link import open_link
from emulator.monitor import Monitor
from emulator.profile import PROFILES_DIR, load_trainset
from emulator.rig import Rig
from emulator.scenario.driver import demo_program

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
_names = itertools.count()


@pytest_asyncio.fixture
async def live_rig():
    """(rig, monitor) running in afap mode (yielding to the loop every 64 frames)."""
    where = Path(tempfile.mkdtemp(prefix="rr"))  # short: Unix socket paths max ~100 chars
    channel = f"dash-{next(_names)}"
    link = open_link(f"loop://{channel}")
    await link.open()
    rig = Rig(load_trainset(TRAINSET), link, mode="afap", clock=MonotonicClock(spin_ns=0))
    tcu = ReferenceController(config_from_profile(TRAINSET), rig.signal_map.as_dict())
    await attach(channel, tcu.answer)
    rig.program = demo_program(target_kmh=60.0, stop_at_m=3000.0)
    monitor = Monitor(rig, str(where / "monitor.sock"))
    await monitor.start()
    stop = asyncio.Event()
    task = asyncio.create_task(rig.run(stop=stop))
    try:
        yield rig, monitor
    finally:
        stop.set()
        await task
        monitor.close()
        link.close()
        rig.clock.close()
        shutil.rmtree(where, ignore_errors=True)
