"""A real rig with the reference controller and a monitor on a Unix socket, running in a
thread with its own event loop (as it would in its own process), beside the dashboard
or client under test in the test's loop."""

from __future__ import annotations

import asyncio
import itertools
import shutil
import tempfile
import threading
from pathlib import Path

import msgpack
import pytest

from emulator.commands.demo_live import START_TIMEOUT_S, start_rig, stop_rig, wait_for_socket
from emulator.controller.inprocess import attach_reference
from emulator.link import open_link
from emulator.monitor.endpoint import Monitor
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.rig.clock import MonotonicClock
from emulator.rig.frame_loop import Rig
from emulator.scenario.driver import demo_program

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
_names = itertools.count()


class RigThread:
    """The demo rig in real time, its monitor listening in a private directory."""

    def __init__(self) -> None:
        self.where = Path(tempfile.mkdtemp(prefix="rr"))  # Unix socket paths: ~100 chars
        self.ready = threading.Event()
        self.error: BaseException | None = None
        self.thread = threading.Thread(target=self._main, name="rig", daemon=True)

    def __enter__(self) -> RigThread:
        self.thread.start()
        if not self.ready.wait(120) or self.error is not None:
            raise RuntimeError(f"the rig did not start: {self.error}")
        return self

    def _main(self) -> None:
        try:
            asyncio.run(self._serve())
        except BaseException as exc:  # reported to the test through start()
            self.error = exc
            self.ready.set()

    async def _serve(self) -> None:
        channel = f"dash-{next(_names)}"
        link = open_link(f"loop://{channel}")
        await link.open()
        self.rig = rig = Rig(load_trainset(TRAINSET), link, mode="realtime",
                             clock=MonotonicClock(spin_ns=0))
        await attach_reference(channel, rig, TRAINSET)
        rig.program = demo_program(target_kmh=60.0, stop_at_m=3000.0)
        self.monitor = Monitor(rig, str(self.where / "monitor.sock"),
                               record_dir=self.where / "recordings")
        await self.monitor.start()
        self.loop = asyncio.get_running_loop()
        self.stop = asyncio.Event()
        self.ready.set()
        try:
            await rig.run(stop=self.stop)
        finally:
            self.monitor.close()
            link.close()
            rig.clock.close()

    def __exit__(self, *exc) -> None:
        self.loop.call_soon_threadsafe(self.stop.set)
        self.thread.join(30)
        shutil.rmtree(self.where, ignore_errors=True)


@pytest.fixture
def live_rig():
    """(rig, monitor) of a rig running in its own thread and event loop."""
    with RigThread() as r:
        yield r.rig, r.monitor


class RawClient:
    """A monitor client with no dashboard: msgpack maps over the socket."""

    def __init__(self, reader, writer) -> None:
        self.reader, self.writer = reader, writer
        self.unpacker = msgpack.Unpacker(strict_map_key=False)
        self.seen: list[dict] = []

    @classmethod
    async def open(cls, address: str) -> RawClient:
        return cls(*await asyncio.open_unix_connection(address))

    async def next(self, kind: str, timeout: float = 20.0, **match) -> dict:
        async def find() -> dict:
            while True:
                for m in self.unpacker:
                    self.seen.append(m)
                    if m.get("kind") == kind and all(m.get(k) == v for k, v in match.items()):
                        return m
                data = await self.reader.read(65536)
                if not data:
                    raise ConnectionError("closed by the rig")
                self.unpacker.feed(data)
        return await asyncio.wait_for(find(), timeout)

    async def ask(self, op: str, **args) -> dict:
        ident = len(self.seen) + 1000
        self.writer.write(msgpack.packb({"op": op, "id": ident, **args}))
        return await self.next("reply", id=ident)


@pytest.fixture(scope="module")
def rig_process():
    """The monitor address of ``railrig serve`` running the demo in real time in its own
    process, started and stopped as ``railrig demo`` does (the dashboard's pilot waits for
    its own process to go idle, so the rig must not share it)."""
    where = Path(tempfile.mkdtemp(prefix="rr"))
    log = where / "rig.log"
    rig, address = start_rig(TRAINSET, where, 60.0, 3000.0, log, extra=("--spin-us", "0"))
    try:
        if not wait_for_socket(rig, address, START_TIMEOUT_S):
            raise RuntimeError(f"railrig serve did not start: {log.read_text()}")
        yield address
    finally:
        stop_rig(rig)
        shutil.rmtree(where, ignore_errors=True)
