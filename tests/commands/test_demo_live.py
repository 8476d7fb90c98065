"""railrig demo's rig child: it starts, serves its monitor, and stops cleanly when the
dashboard quits (the dashboard itself is tested in tests/tui)."""

from __future__ import annotations

import asyncio
import shutil
import tempfile
from pathlib import Path

from emulator.commands.demo_live import START_TIMEOUT_S, start_rig, stop_rig, wait_for_socket
from tests.tui.conftest import TRAINSET, RawClient


def test_the_demo_rig_starts_serves_and_stops() -> None:
    where = Path(tempfile.mkdtemp(prefix="rr"))
    try:
        child, address = start_rig(TRAINSET, where, 60.0, 1000.0, where / "rig.log")
        try:
            assert wait_for_socket(child, address, START_TIMEOUT_S), (
                where / "rig.log").read_text()

            async def look() -> dict:
                c = await RawClient.open(address)
                hello = await c.next("hello")
                snap = await c.next("telemetry")
                c.writer.close()
                return {"hello": hello, "snap": snap}

            seen = asyncio.run(look())
            assert seen["hello"]["mode"] == "realtime"
            assert seen["snap"]["train"]["program"]  # the demo driver drives
        finally:
            code = stop_rig(child)
        assert code == 0  # SIGTERM is the rig's normal stop, with its report
        assert "frames, plant time" in (where / "rig.log").read_text()
        assert not Path(address).exists()  # the monitor removed its socket
    finally:
        shutil.rmtree(where, ignore_errors=True)
