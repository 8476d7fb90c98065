"""The compiled reference controller (period_kernel.py) against its plain-Python
description (tcu.ReferenceController), period by period, over the demo's start on both
trainsets with both motor controls. The fault paths (hardware trips, a failed encoder, a
dead line, neutral sections, sliding wheels) are compared in the scenario library's runs
(tests/scenario/test_library.py, TWINNED)."""

from __future__ import annotations

import asyncio
import dataclasses
import math

import msgpack
import pytest

from emulator.controller import period_kernel
from emulator.controller.compiled_tcu import CompiledController, _answer_plain
from emulator.controller.config import config_from_profile
from emulator.controller.inprocess import attach
from emulator.controller.tcu import ReferenceController
from emulator.link import open_link
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.protocol.signal_map import MODES, build_signal_map
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


def test_answers_are_the_plain_pythons_byte_for_byte() -> None:
    """The whole answer, telegram codec included: 2 s of the 25 kV demo's start, each
    reply of the compiled controller the same bytes as the plain-Python one's."""

    async def run() -> tuple[int, int]:
        path = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
        link = open_link("loop://twin-answers")
        await link.open()
        rig = Rig(load_trainset(path), link, mode="lockstep")
        cfg = config_from_profile(path)
        compiled = CompiledController(cfg, rig.signal_map.as_dict())
        plain = ReferenceController(cfg, rig.signal_map.as_dict())
        seen = {"n": 0, "differing": 0}

        def answer(payload: bytes) -> bytes:
            reply = compiled.answer(payload)
            seen["n"] += 1
            seen["differing"] += reply != plain.answer(payload)
            return reply

        await attach("twin-answers", answer)
        rig.driver.mode, rig.driver.effort_demand = MODES_INV["accelerate"], 1.0
        await rig.run(frames=2000)
        return seen["n"], seen["differing"]

    n, differing = asyncio.run(run())
    assert n >= 2000 and differing == 0


def test_a_malformed_telegram_is_refused_before_the_compiled_period() -> None:
    """What no board sends (a header field of another type, a short or long body, a
    value that is no number or not finite) raises TypeError or ValueError, as the plain
    controller's did, and never reaches the kernel with new types (no recompile, no
    stall of seconds)."""
    path = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
    params = load_trainset(path)
    signal_map = build_signal_map(params).as_dict()
    tcu = CompiledController(config_from_profile(path), signal_map)
    n = len(signal_map["measurements"])
    v = signal_map["protocol_version"]
    good = [v, 0, 0, 1000, 0, 0, *([0] * n)]
    tcu.answer(msgpack.packb(good))

    def signatures() -> tuple[int, int]:  # the kernels' compiled overloads
        return len(period_kernel.period.signatures), len(_answer_plain.signatures)

    compiled_for = signatures()
    assert compiled_for[1] >= 1
    bad = [
        [v, 1, 0, 1000, 1.5, 0, *([0] * n)], [v, 1, 0, 1000, True, 0, *([0] * n)],
        [v, 1, 0, 1000, None, 0, *([0] * n)], [v, "1", 0, 1000, 0, 0, *([0] * n)],
        [v, 1, 0, "1000", 0, 0, *([0] * n)], [v, 1, 0, 1000, 0, 0, *([0] * (n - 1))],
        [v, 1, 0, 1000, 0, 0, *([0] * (n + 1))], [v, 1, 0, 1000, 0, 0, None, *([0] * (n - 1))],
        [v, 1, 0, 1000, 0, 0, "3", *([0] * (n - 1))],
        [v, 1, 0, 1000, 0, 0, math.nan, *([0] * (n - 1))],
        [v, 1, 0, 1000, 0, 0, math.inf, *([0] * (n - 1))],
        [v, 1, 0, 2**64 - 1, 0, 0, *([0] * n)],  # a period past int64
    ]
    for telegram in bad:
        with pytest.raises((TypeError, ValueError)):
            tcu.answer(msgpack.packb(telegram))
    with pytest.raises((TypeError, ValueError)):
        tcu.answer(msgpack.packb({"a": 1}))
    assert signatures() == compiled_for
    good[1] = 2  # a new measurement (the same sequence again gets the same answer)
    assert msgpack.unpackb(tcu.answer(msgpack.packb(good)))[:2] == [v, 2]  # still answers
