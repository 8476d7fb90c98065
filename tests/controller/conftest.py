"""Helpers: the reference controller in the rig's process, through telegrams."""

from __future__ import annotations

import asyncio
import itertools

import pytest

from emulator.controller.inprocess import attach_reference
from emulator.controller.tcu import ReferenceController
from emulator.link import open_link
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.rig.frame_loop import Rig

TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
_names = itertools.count()


async def rig_with_controller(**rig_kw) -> tuple[Rig, ReferenceController]:
    name = f"ctl{next(_names)}"
    link = open_link(f"loop://{name}")
    await link.open()
    rig = Rig(load_trainset(TRAINSET), link, mode="lockstep", **rig_kw)
    return rig, await attach_reference(name, rig, TRAINSET)


@pytest.fixture
def run():
    return asyncio.run
