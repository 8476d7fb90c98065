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

    def __init__(self, script: list, pace=None) -> None:
        self.script = script
        self.pace = pace  # awaited after each message: the test says when to go on
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
        for k, message in enumerate(self.script):
            writer.write(message if isinstance(message, bytes) else msgpack.packb(message))
            await writer.drain()
            if self.pace is not None:
                await self.pace(k, message)
        writer.close()
        self.done.set()


async def _wait(condition, seconds: float = 30.0) -> None:
    for _ in range(int(seconds / 0.02)):
        if condition():
            return
        await asyncio.sleep(0.02)
    raise AssertionError("the dashboard did not take the message")


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
    # each malformed message is either refused on arrival or drawn once and dropped; the
    # fake rig waits for the dashboard to have dealt with one before it sends the next.
    # Messages that are no map (a list, a string, a number, nil) are counted alike
    script = [hello, good, no_motors, bad_types, bad_groups, {"kind": "telemetry"},
              {"no kind": 1}, [1, 2], "telemetry", 7, None, later]
    holder = {}

    async def pace(k: int, message) -> None:
        app = holder["app"]
        if k == 0:
            return
        if message is good or message is later:
            await _wait(lambda: app.good_snap is not None
                        and app.good_snap["t_s"] == message["t_s"])
        else:
            await _wait(lambda: app.malformed >= k - 1)

    async with FakeMonitor(script, pace) as rig:
        app = holder["app"] = RigDashboard(rig.address, retry=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await _until(pilot, lambda: rig.done.is_set() and not app.attached)
            assert app.is_running
            assert app.malformed == 9
            assert app.good_snap is not None and app.good_snap["t_s"] == later["t_s"]
            log = "\n".join(app.log_lines)
            assert "malformed" in log
            assert "detached" in log  # the rig went away: said, not raised
            await _until(pilot, lambda: "DETACHED" in str(app.query_one("#status").render()))


async def test_a_malformed_hello_is_refused_with_a_message() -> None:
    hello, _ = load()
    broken = {k: v for k, v in hello.items() if k != "motors"}
    async with FakeMonitor([broken]) as rig:
        app = RigDashboard(rig.address, retry=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await _until(pilot, lambda: any("hello is malformed" in line
                                            for line in app.log_lines))
            assert app.is_running and not app.attached
