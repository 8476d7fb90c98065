"""The dashboard against a monitor that misbehaves: malformed hello and telemetry, and a
rig that dies mid-session. It says so in its log and status; no traceback, no exit."""

from __future__ import annotations

import asyncio
import copy
import shutil
import tempfile
from pathlib import Path

import msgpack

from tui.app import RigDashboard

from .canned import load


class FakeMonitor:
    """A Unix-socket server that plays a script of messages to each client, then hangs
    up (as a rig that dies)."""

    def __init__(self, script: list) -> None:
        self.script = script
        self.where = Path(tempfile.mkdtemp(prefix="rr"))
        self.address = str(self.where / "m.sock")
        self.done = asyncio.Event()

    async def __aenter__(self) -> FakeMonitor:
        self.server = await asyncio.start_unix_server(self._serve, path=self.address)
        return self

    async def __aexit__(self, *exc) -> None:
        self.server.close()
        shutil.rmtree(self.where, ignore_errors=True)

    async def _serve(self, reader, writer) -> None:
        for message in self.script:
            writer.write(message if isinstance(message, bytes) else msgpack.packb(message))
            await writer.drain()
            await asyncio.sleep(0.15)  # more than one redraw of the dashboard apart
        writer.close()
        self.done.set()


async def _until(pilot, condition, seconds: float = 30.0) -> None:
    for _ in range(int(seconds / 0.05)):
        if condition():
            return
        await pilot.pause(0.05)
    raise AssertionError("condition not reached")


async def test_malformed_telemetry_is_dropped_and_the_rig_dying_is_said() -> None:
    hello, snaps = load()
    good, later = snaps[10], snaps[12]
    no_motors = {k: v for k, v in good.items() if k != "motors"}
    bad_types = copy.deepcopy(good)
    bad_types["train"]["speed_kmh"] = "fast"
    bad_groups = copy.deepcopy(good)
    bad_groups["groups"] = [{"name": "DC-A"}]
    script = [hello, good, no_motors, bad_types, bad_groups, {"kind": "telemetry"},
              {"no kind": 1}, [1, 2, 3], "text", later]
    async with FakeMonitor(script) as rig:
        app = RigDashboard(rig.address, retry=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await _until(pilot, lambda: rig.done.is_set() and not app.attached)
            await pilot.pause(0.3)
            assert app.is_running
            assert app.malformed >= 4
            assert app.good_snap is not None and app.good_snap["t_s"] == later["t_s"]
            log = "\n".join(app.log_lines)
            assert "malformed" in log
            assert "detached" in log  # the rig went away: said, not raised
            assert "DETACHED" in str(app.query_one("#status").render())


async def test_a_malformed_hello_is_refused_with_a_message() -> None:
    hello, _ = load()
    broken = {k: v for k, v in hello.items() if k != "motors"}
    async with FakeMonitor([broken]) as rig:
        app = RigDashboard(rig.address, retry=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await _until(pilot, lambda: any("hello is malformed" in line
                                            for line in app.log_lines))
            assert app.is_running and not app.attached
