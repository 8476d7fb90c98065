"""Fakes for the rig and link tests."""

from __future__ import annotations

import asyncio
import itertools
from collections.abc import Callable

import msgpack

from emulator.link import open_link
from emulator.profiles.reader import PROFILES_DIR
from emulator.protocol.header import H_FLAGS, H_MAP_DIGEST, H_PERIOD_US
from emulator.rig.clock import FakeClock
from emulator.rig.frame_loop import Rig

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
_names = itertools.count()


class SyncController:
    """Answers each measurement at once, inside the rig's send, through the loop link.

    ``answer(measurement_list) -> telegram bytes | None`` decides what goes back.
    """

    def __init__(self, link, answer: Callable[[list], bytes | None]) -> None:
        self.link = link
        self.answer = answer
        self.received: list[bytes] = []

    def deliver(self, payload: bytes) -> None:
        self.received.append(payload)
        reply = self.answer(msgpack.unpackb(payload))
        if reply is not None:
            self.link.send(reply)  # through this end's manipulator


def command(rig: Rig, seq: int, duty: float = 0.5, gates: int = 1, **over) -> bytes:
    """A valid command telegram in wire units, answering measurement seq."""
    values = []
    for s in rig.signal_map.commands:
        if s.name.endswith(("duty_a", "duty_b", "duty_c")):
            v = duty
        elif s.name.endswith("gates_enabled"):
            v = gates
        else:
            v = 0.0
        values.append(round(over.get(s.name, v) / s.scale))
    return msgpack.packb([rig.signal_map.version, seq, 0, 0, 0, 0, *values])


async def make_rig(params, answer, *, mode: str = "afap", **kw) -> tuple[Rig, SyncController]:
    """A rig on a fresh loop channel with a synchronous controller on the other end."""
    name = f"t{next(_names)}"
    rig_link, ctl_link = open_link(f"loop://{name}"), open_link(f"loop://{name}")
    await rig_link.open()
    await ctl_link.open()
    rig = Rig(params, rig_link, mode=mode, clock=FakeClock(), **kw)
    ctl = SyncController(ctl_link, lambda m: answer(rig, m))
    ctl_link._deliver = ctl.deliver
    return rig, ctl


def run(coro):
    return asyncio.run(coro)


def with_header(telegram: bytes, **fields: int) -> bytes:
    """The telegram with header fields (period_us, flags, map_digest) set anew."""
    items = msgpack.unpackb(telegram)
    index = {"period_us": H_PERIOD_US, "flags": H_FLAGS, "map_digest": H_MAP_DIGEST}
    for name, value in fields.items():
        items[index[name]] = value
    return msgpack.packb(items)
