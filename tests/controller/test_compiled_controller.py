"""The compiled reference controller (period_kernel.py) against its plain-Python
description (tcu.ReferenceController), period by period, over the demo's start on both
trainsets with both motor controls. The fault paths (hardware trips, a failed encoder, a
dead line, neutral sections, sliding wheels) are compared in the scenario library's runs
(tests/scenario/test_library.py, TWINNED)."""

from __future__ import annotations

import asyncio
import dataclasses

import pytest

from emulator.controller.compiled_tcu import CompiledController
from emulator.controller.config import config_from_profile
from emulator.controller.inprocess import attach
from emulator.link import open_link
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.protocol.signal_map import MODES
from emulator.rig.frame_loop import Rig

from .twin import Twin

MODES_INV = {v: k for k, v in MODES.items()}


async def _demo_start(trainset: str, control: str, seconds: float) -> Twin:
    path = PROFILES_DIR / "trainsets" / trainset
    link = open_link(f"loop://twin-{trainset}-{control}")
    await link.open()
    rig = Rig(load_trainset(path), link, mode="lockstep")
    cfg = dataclasses.replace(config_from_profile(path), motor_control=control)
    tcu = CompiledController(cfg, rig.signal_map.as_dict())
    twin = Twin()
    twin.install(tcu)
    await attach(f"twin-{trainset}-{control}", tcu.answer)
    rig.driver.mode, rig.driver.effort_demand = MODES_INV["accelerate"], 1.0  # from the start
    await rig.run(frames=round(seconds * 1e6 / rig.period_us))
    return twin


@pytest.mark.parametrize("trainset", ["tern-25kv.toml", "tern-15kv.toml"])
@pytest.mark.parametrize("control", ["scalar", "vector"])
def test_compiled_period_is_the_plain_pythons(trainset: str, control: str) -> None:
    """Switch-on, precharge, the PLL's lock and a start at full effort: 4 s, every
    command equal to the last bit."""
    twin = asyncio.run(_demo_start(trainset, control, 4.0))
    twin.assert_identical(at_least=3999)
    assert twin.compiled.effort_n > 0.0  # it got as far as pulling
