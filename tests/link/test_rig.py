"""The frame loop: command delay, validation counters, watchdog, determinism."""

from __future__ import annotations

import msgpack
import numpy as np
import pytest

from emulator.link.loop import Manipulator
from emulator.protocol.header import (
    FLAG_BAD_TELEGRAM,
    FLAG_COMMAND_HELD,
    FLAG_OVERRUN,
    FLAG_WATCHDOG,
    HEADER,
    PROTOCOL_VERSION,
)

from .conftest import command, make_rig, run


def echo(rig, m):
    return command(rig, m[1], duty=0.5, gates=1)


def test_every_frame_gets_a_valid_command(params) -> None:
    async def go():
        rig, ctl = await make_rig(params, echo)
        await rig.run(frames=200)
        return rig, ctl
    rig, ctl = run(go())
    assert rig.health.valid == 199  # frame 0 has no answer yet with a one-frame delay
    assert rig.health.missing == 0 and not rig.health.rejected
    assert len(ctl.received) == 200
    assert [msgpack.unpackb(p)[1] for p in ctl.received] == list(range(200))


@pytest.mark.parametrize("delay", [0, 1, 2])
def test_command_acts_after_the_stated_delay(params, delay: int) -> None:
    # the controller releases the gates only in its answer to measurement 10
    def answer(rig, m):
        return command(rig, m[1], duty=0.9, gates=1 if m[1] == 10 else 0)

    async def go():
        rig, _ = await make_rig(params, answer, command_delay=delay)
        enabled = []
        for k in range(16):
            await rig.run(frames=k + 1)
            enabled.append(bool(rig.plant.iu[0, 3]))
        return enabled
    enabled = run(go())
    assert enabled.index(True) == 10 + delay
    assert enabled.count(True) == 1


@pytest.mark.parametrize(("telegram", "kind"), [
    (b"\xc1", "malformed"),
    (msgpack.packb({"a": 1}), "malformed"),
    (msgpack.packb([99, 0, 0, 0, 0, 0]), "version"),
    (msgpack.packb([PROTOCOL_VERSION, 0, 0, 0, 0]), "length"),
    (msgpack.packb([PROTOCOL_VERSION, 0, 0, 0, 0, 0, 1, 2]), "length"),
    (msgpack.packb([PROTOCOL_VERSION, "0", 0, 0, 0, 0]), "type"),
])
def test_bad_telegrams_are_counted_by_kind(params, telegram: bytes, kind: str) -> None:
    async def go():
        rig, ctl = await make_rig(params, lambda rig, m: telegram)
        await rig.run(frames=20)
        return rig, ctl
    rig, ctl = run(go())
    assert rig.health.rejected[kind] == 20
    assert rig.health.valid == 0
    flags = [msgpack.unpackb(p)[4] for p in ctl.received]
    assert flags[5] & FLAG_BAD_TELEGRAM


@pytest.mark.parametrize(("value", "kind"), [(float("nan"), "non_finite"),
                                              (float("inf"), "non_finite"),
                                              (1.5e4, "range"), (-1.0, "range"),
                                              ("x", "type"), (None, "type")])
def test_bad_values_are_rejected(params, value, kind: str) -> None:
    def answer(rig, m):
        tg = msgpack.unpackb(command(rig, m[1]))
        tg[len(HEADER) + rig.signal_map.index("command", "INV-A1.duty_c")] = value
        return msgpack.packb(tg)

    async def go():
        rig, _ = await make_rig(params, answer)
        await rig.run(frames=10)
        return rig
    rig = run(go())
    assert rig.health.rejected[kind] == 10
    assert np.all(np.isfinite(rig.plant.iu))


def test_sequence_errors_are_counted(params) -> None:
    def answer(rig, m):
        k = m[1]
        if k == 5:
            return command(rig, 4)  # answers an old measurement again: duplicate
        if k == 8:
            return command(rig, 30)  # answers a measurement never sent
        return command(rig, k)

    async def go():
        rig, _ = await make_rig(params, answer)
        await rig.run(frames=20)
        return rig
    rig = run(go())
    assert rig.health.sequence["duplicate"] == 1
    assert rig.health.sequence["unexpected"] == 1
    assert rig.health.missing == 2  # frames 6 and 9 held the previous command


def test_watchdog_blocks_the_gates_and_recovers(params) -> None:
    def answer(rig, m):
        k = m[1]
        return None if 50 <= k < 120 else command(rig, k, duty=0.6, gates=1)

    async def go():
        rig, ctl = await make_rig(params, answer, watchdog_frames=10)
        states = []
        for k in range(160):
            await rig.run(frames=k + 1)
            states.append((rig.tripped, bool(rig.plant.iu[:, 3].any())))
        return rig, ctl, states
    rig, ctl, states = run(go())
    # frames 51.. hold; after 10 held frames the 11th trips
    first_trip = next(k for k, (tripped, _) in enumerate(states) if tripped)
    assert first_trip == 61
    assert not states[first_trip][1]  # gates blocked by the rig
    assert states[first_trip - 1][1]  # still held (enabled) just before
    recovered = next(k for k, (tripped, _) in enumerate(states) if k > 61 and not tripped)
    assert recovered == 121  # the answer to y_120 acts in frame 121
    assert states[recovered][1]
    flags = [msgpack.unpackb(p)[4] for p in ctl.received]
    assert flags[62] & FLAG_WATCHDOG and flags[55] & FLAG_COMMAND_HELD
    assert rig.health.watchdog_trips == 1


def test_lossy_link_holds_commands_without_tripping(params) -> None:
    async def go():
        rig, _ = await make_rig(params, echo, watchdog_frames=10)
        rig.link.peer.manipulator = Manipulator(drop=0.1, duplicate=0.05, seed=3)
        await rig.run(frames=2000)
        return rig
    rig = run(go())
    # each lost answer holds one frame, and nothing else does (a duplicate is refused as
    # one); of the 2000 answers the last (to y_1999) is wanted by no frame of the run, so
    # its loss holds none. The losses themselves within 4 sigma of the binomial
    # (n = 2000, p = 0.1: 200 +- 54), seeded
    dropped = rig.link.peer.manipulator.counts["dropped"]
    assert 146 <= dropped <= 254
    assert rig.health.missing in (dropped, dropped - 1)
    assert rig.health.watchdog_trips == 0
    assert rig.health.valid + rig.health.missing == 1999


def _measurements(params, seed: int) -> list[bytes]:
    def answer(rig, m):
        i = rig.signal_map.index("measurement", "INV-A1.m1.speed_rad_s")
        speed = m[len(HEADER) + i]
        theta = (m[1] * 0.01 + speed * 1e-5) % 6.28
        return command(rig, m[1], duty=0.5 + 0.4 * np.cos(theta), gates=1)

    async def go():
        rig, ctl = await make_rig(params, answer, mode="lockstep", seed=seed)
        await rig.run(frames=300)
        return ctl.received
    return run(go())


def test_lockstep_runs_are_reproducible_bit_for_bit(params) -> None:
    a = _measurements(params, seed=7)
    b = _measurements(params, seed=7)
    c = _measurements(params, seed=8)
    assert len(a) == 301
    assert a == b
    assert a != c  # the seed reaches the sensor noise


def test_measurements_do_not_depend_on_the_same_exchange(params) -> None:
    # y_(k+1) is sampled from the state after frame k, which used the answer to y_(k-1):
    # changing the answer to y_k must not change y_(k+1)
    def answer_for(bump_at: int):
        def answer(rig, m):
            # one leg only: equal duties on all legs are common mode, which a motor with a
            # floating star point does not see
            bump = {"INV-A1.duty_a": 0.9} if m[1] == bump_at else {}
            return command(rig, m[1], duty=0.5, gates=1, **bump)
        return answer

    async def go(bump):
        rig, ctl = await make_rig(params, answer_for(bump), ideal_dc_links=True)
        await rig.run(frames=40)
        return ctl.received
    base = run(go(-1))
    bumped = run(go(30))
    assert base[:32] == bumped[:32]  # y_31 unaffected; the bump acts in frame 31
    assert base[32:] != bumped[32:]


class TimedController:
    """Answers y_k once ``compute`` of the rig's (fake) time has passed since y_k went
    out, as a board that computes during its period; answers go out when it next hears
    from the rig (its next measurement)."""

    def __init__(self, rig, link, compute_ns: int, silent_from: int | None = None) -> None:
        self.rig, self.link, self.compute_ns = rig, link, compute_ns
        self.silent_from = silent_from
        self.pending: list[tuple[int, int]] = []  # (due, sequence)
        self.flags: list[int] = []

    def deliver(self, payload: bytes) -> None:
        m = msgpack.unpackb(payload)
        now = self.rig.clock.now_ns()
        self.flags.append(m[4])
        if self.silent_from is None or m[1] < self.silent_from:
            self.pending.append((now + self.compute_ns, m[1]))
        for due, seq in [p for p in self.pending if p[0] <= now]:
            self.link.send(command(self.rig, seq))
            self.pending.remove((due, seq))


class Stall:
    """A driver program that stalls the rig's (fake) clock once, after one frame."""

    def __init__(self, after_frame: int, stall_ns: int) -> None:
        self.after_frame, self.stall_ns = after_frame, stall_ns

    def update(self, rig) -> None:
        if rig.frame == self.after_frame:
            rig.clock.advance(self.stall_ns)


async def _timed_rig(params, compute_ns: int, stall: Stall | None = None,
                     silent_from: int | None = None, watchdog_frames: int = 3):
    from emulator.link import open_link
    from emulator.rig.clock import FakeClock
    from emulator.rig.frame_loop import Rig

    rig_link, ctl_link = open_link("loop://timed"), open_link("loop://timed")
    await rig_link.open()
    await ctl_link.open()
    rig = Rig(params, rig_link, mode="realtime", clock=FakeClock(),
              watchdog_frames=watchdog_frames)
    ctl = TimedController(rig, ctl_link, compute_ns, silent_from)
    ctl_link._deliver = ctl.deliver
    rig.program = stall
    await rig.run(frames=300)
    rig_link.close()
    ctl_link.close()
    return rig, ctl


def test_a_rig_stall_is_not_blamed_on_a_punctual_controller(params) -> None:
    # the controller needs half a period; after a 5 ms stall the rig runs four frames
    # back to back (catch-up) and gives it no time: those are the rig's overruns
    rig, ctl = run(_timed_rig(params, compute_ns=500_000, stall=Stall(100, 5_000_000),
                              watchdog_frames=4))
    assert rig.health.watchdog_trips == 0 and not rig.tripped
    assert rig.health.missing == 0
    assert rig.health.overrun_held == 4  # frames 102..105 wanted answers not yet due
    assert all(f & FLAG_OVERRUN for f in ctl.flags[102:106])  # the board is told
    assert not any(f & FLAG_OVERRUN for f in ctl.flags[:101] + ctl.flags[107:])


def test_a_controller_too_slow_for_its_period_still_trips_the_watchdog(params) -> None:
    # 1.5 periods of computing with the rig on time: every answer misses its frame. The
    # answer to y_k is due at t_k + 1.5 T and goes out with the board's next chance, at
    # y_(k+2): frame k + 1, which wanted it (d = 1), has held; frame k + 2 refuses it as
    # late. So frames 1..299 of the 300 hold (frame 0 wants no answer), the answers to
    # y_0..y_297 come in late, and the watchdog trips once and stays tripped
    rig, _ = run(_timed_rig(params, compute_ns=1_500_000))
    assert rig.health.overrun_held == 0
    assert rig.health.missing == 299 and rig.health.sequence["late"] == 298
    assert rig.health.watchdog_trips == 1 and rig.tripped


def test_a_controller_that_falls_silent_trips_the_watchdog(params) -> None:
    # silent from y_150: the answer to y_149 still comes (with the board's next chance,
    # at y_150), so frames 151..299 hold: 149, and the watchdog trips once
    rig, _ = run(_timed_rig(params, compute_ns=500_000, silent_from=150))
    assert rig.tripped and rig.health.watchdog_trips == 1
    assert rig.health.missing == 149 and rig.health.overrun_held == 0


def test_a_long_stall_does_not_excuse_a_silent_controller_for_ever(params) -> None:
    # 150 ms of stall, and the controller falls silent with it: at most watchdog_frames
    # (3) held frames are excused as the rig's, then the watchdog counts and trips
    rig, _ = run(_timed_rig(params, compute_ns=500_000, stall=Stall(100, 150_000_000),
                            silent_from=101))
    assert rig.tripped and rig.health.watchdog_trips == 1
    assert rig.health.overrun_held == 3
