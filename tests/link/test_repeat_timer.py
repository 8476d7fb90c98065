"""Lockstep's repeat timer: the round-trip estimate (RFC 6298), the silence schedule and
the quick repeats for damaged frames, each driven without the wall clock (the rig's wait
for the link replaced by one that answers at once), so the schedule is exact.
"""

from __future__ import annotations

import asyncio

import pytest

from .conftest import make_rig, run


def test_lockstep_silence_schedule_doubles_to_its_cap(params) -> None:
    # the schedule itself, without the clock: the rig's wait for the link answers
    # "nothing came" at once, and each wait's length is noted. RFC 6298 5.5: each timeout
    # doubles the next, up to the rig's maximum (LOCKSTEP_REPEAT_MAX_S, 1 s); the first
    # is the rig's lockstep repeat interval (5 ms here: no round trip measured yet)
    from emulator.rig.lockstep import LOCKSTEP_REPEAT_MAX_S

    waits: list[float] = []

    async def go():
        rig, _ = await make_rig(params, lambda rig, m: None, mode="lockstep",
                                lockstep_repeat_s=0.005)
        stop = asyncio.Event()

        async def silence(timeout_s, _stop):
            waits.append(timeout_s)
            if len(waits) == 12:
                stop.set()
            return False

        rig._wait_link = silence
        await rig.run(stop=stop)
        return rig

    rig = run(go())
    assert LOCKSTEP_REPEAT_MAX_S == 1.0
    assert waits == pytest.approx([0.005, 0.01, 0.02, 0.04, 0.08, 0.16, 0.32, 0.64, 1.0,
                                   1.0, 1.0, 1.0], rel=1e-12)
    assert rig.repeat_causes == {"silence": 11} and rig.frame == 0


def test_damaged_frames_get_64_quick_repeats_then_the_silence_timer(params) -> None:
    # a line that only ever brings damaged frames (the framing reports damage, no
    # telegram): y_0 is said again at once for each of LOCKSTEP_QUICK_REPEATS (64) in a
    # row, then only when the silence timer runs out (lockstep.py, the rule a board sees)
    from emulator.rig.lockstep import LOCKSTEP_QUICK_REPEATS

    calls = {"wait": 0}

    async def go():
        rig, _ = await make_rig(params, lambda rig, m: None, mode="lockstep",
                                lockstep_repeat_s=0.005)
        stop = asyncio.Event()

        async def arrivals(timeout_s, _stop):
            calls["wait"] += 1  # the first 100 waits: damage arrived; then silence
            if calls["wait"] == 103:
                stop.set()
            return calls["wait"] <= 100

        rig._wait_link = arrivals
        rig.link.pending = lambda: False
        rig.link.take_damaged = lambda: 1
        await rig.run(stop=stop)
        return rig

    rig = run(go())
    assert LOCKSTEP_QUICK_REPEATS == 64
    # 64 immediate repeats for the first 64 damaged arrivals, none for the other 36, then
    # one for each silence wait that ran out before the stop (101 and 102)
    assert rig.repeat_causes == {"framing": 64, "silence": 2}, rig.repeat_causes


def test_round_trip_estimate_is_rfc_6298s() -> None:
    # RFC 6298, 2.2 and 2.3, worked by hand for samples of 10, 20 and 30 ms (alpha = 1/8,
    # beta = 1/4, RTTVAR updated with the SRTT before it):
    #   10: SRTT 10, RTTVAR 5
    #   20: RTTVAR 3/4 5 + 1/4 |10 - 20| = 6.25, SRTT 7/8 10 + 1/8 20 = 11.25
    #   30: RTTVAR 3/4 6.25 + 1/4 |11.25 - 30| = 9.375, SRTT 7/8 11.25 + 1/8 30 = 13.59375
    # the timeout SRTT + 4 RTTVAR (K = 4), within the rig's bounds, and the ceiling until
    # eight samples are in (round_trip.py: our rule)
    from fractions import Fraction

    from emulator.rig.round_trip import RoundTrip

    rt = RoundTrip()
    for ms, srtt, rttvar in ((10, 10, 5), (20, 11.25, 6.25), (30, 13.59375, 9.375)):
        rt.note(ms * 1e-3)
        assert (rt.srtt, rt.rttvar) == pytest.approx((srtt * 1e-3, rttvar * 1e-3),
                                                     rel=1e-12)
        assert rt.timeout(0.002, 0.1) == 0.1  # fewer than eight samples: the ceiling
    # five more of 10 ms, the RFC's arithmetic done here in exact fractions
    s, v = Fraction(13_59375, 100_000), Fraction(9375, 1000)
    for _ in range(5):
        rt.note(10e-3)
        v = Fraction(3, 4) * v + Fraction(1, 4) * abs(s - 10)
        s = Fraction(7, 8) * s + Fraction(1, 8) * 10
    rto = float(s + 4 * v) * 1e-3  # 8 samples now
    assert 0.002 < rto < 0.1
    assert rt.timeout(0.002, 0.1) == pytest.approx(rto, rel=1e-12)
    assert rt.timeout(0.002, 0.5 * rto) == 0.5 * rto  # the ceiling bounds it
    assert rt.timeout(2 * rto, 0.1) == 2 * rto  # and the floor
