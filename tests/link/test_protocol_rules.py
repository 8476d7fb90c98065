"""The header rules the rig enforces and the lockstep pacing it promises (the rules are
written in emulator/protocol/header.py and the README): the map digest, whole flags, the
period per mode, and a measurement said again at once after a bad telegram, a damaged
serial frame or a repeat request, with the repeat flag and the same sequence."""

from __future__ import annotations

import asyncio
import contextlib
import os
import time

import msgpack
import numpy as np
import pytest

from emulator.link import open_link
from emulator.link.framing import encode_frame
from emulator.protocol.header import (
    CFLAG_REPEAT_REQUEST,
    FLAG_BAD_TELEGRAM,
    FLAG_FRAMING,
    FLAG_REPEAT,
    FLAG_SEQUENCE,
    H_FLAGS,
    H_MAP_DIGEST,
    H_SEQUENCE,
    HEADER,
)
from emulator.rig.clock import FakeClock
from emulator.rig.frame_loop import Rig

from .conftest import command, make_rig, run, with_header


@pytest.mark.parametrize(("mode", "period_us", "accepted"), [
    ("afap", 0, True), ("afap", 1000, True), ("afap", 2000, False), ("afap", 500, False),
    ("realtime", 1000, True), ("realtime", 2000, False),
    ("lockstep", 2000, True), ("lockstep", 100, True), ("lockstep", 99, False),
    ("lockstep", 10_001, False),
])
def test_period_us_is_read_by_the_mode(params, mode, period_us, accepted) -> None:
    async def go():
        rig, _ = await make_rig(params, lambda rig, m: with_header(
            command(rig, m[H_SEQUENCE]), period_us=period_us), mode=mode)
        if mode == "lockstep":
            await rig.run(frames=2) if accepted else await _run_briefly(rig, 0.05)
        else:
            await rig.run(frames=5)
        return rig
    rig = run(go())
    # afap and real time: five frames, five measurements, each answered at once (an
    # in-process controller): five answers taken, or five refused
    answered = {"afap": 5, "realtime": 5, "lockstep": 2 if accepted else None}[mode]
    if accepted:
        assert rig.health.rejected["period"] == 0 and rig.health.accepted == answered
        if mode == "lockstep":  # frame 0 runs before any answer (the rig's period),
            # frame 1 on the answer to y_0 (command delay 1), for the period it asked
            assert rig.plant.time_s == pytest.approx(1e-3 + period_us * 1e-6, abs=1e-12)
    else:
        assert rig.health.accepted == 0
        if answered is not None:
            assert rig.health.rejected["period"] == answered
        else:  # lockstep: y_0 said again while the 50 ms last (a busy machine: fewer)
            assert rig.health.rejected["period"] >= 1


async def _run_briefly(rig: Rig, seconds: float) -> None:
    stop = asyncio.Event()
    asyncio.get_running_loop().call_later(seconds, stop.set)
    await rig.run(stop=stop)


@pytest.mark.parametrize(("digest", "accepted"), [(0, True), (None, True), (1, False)])
def test_the_map_digest_must_be_zero_or_the_rigs(params, digest, accepted) -> None:
    async def go():
        rig, _ = await make_rig(params, lambda rig, m: with_header(
            command(rig, m[H_SEQUENCE]), map_digest=(
                rig.signal_map.digest() if digest is None else digest)))
        await rig.run(frames=5)
        return rig
    rig = run(go())
    assert (rig.health.valid > 0) is accepted
    assert rig.health.rejected["map"] == (0 if accepted else 5)


def test_every_measurement_carries_the_rigs_digest(params) -> None:
    async def go():
        rig, ctl = await make_rig(params, lambda rig, m: command(rig, m[H_SEQUENCE]))
        await rig.run(frames=3)
        return rig, ctl
    rig, ctl = run(go())
    assert {msgpack.unpackb(p)[H_MAP_DIGEST] for p in ctl.received} == {rig.signal_map.digest()}


def test_a_fractional_contactor_command_is_rejected(params) -> None:
    async def go():
        def answer(rig, m):
            items = msgpack.unpackb(command(rig, m[H_SEQUENCE]))
            items[len(HEADER) + rig.signal_map.index(
                "command", "LC-A1.line_contactor_close")] = 0.5  # half closed?
            return msgpack.packb(items)
        rig, _ = await make_rig(params, answer)
        await rig.run(frames=4)
        return rig
    rig = run(go())
    assert rig.health.rejected["fractional"] == 4 and rig.health.valid == 0


def test_lockstep_answers_a_bad_telegram_with_the_same_measurement_at_once(params) -> None:
    # the first answer to y_3 is spoiled (a NaN duty): y_3 comes again, flagged as a
    # repeat and as a rejection, and the good answer then paces frame 3 as usual
    spoiled = {3}

    def answer(rig, m):
        seq = m[H_SEQUENCE]
        if seq in spoiled:
            spoiled.discard(seq)
            items = msgpack.unpackb(command(rig, seq))
            items[len(HEADER) + rig.signal_map.index("command", "INV-A1.duty_a")] = float("nan")
            return msgpack.packb(items)
        return command(rig, seq)

    async def go():
        rig, ctl = await make_rig(params, answer, mode="lockstep")
        await rig.run(frames=6)
        return rig, ctl
    rig, ctl = run(go())
    heads = [msgpack.unpackb(p)[:6] for p in ctl.received]
    assert [h[H_SEQUENCE] for h in heads] == [0, 1, 2, 3, 3, 4, 5, 6]
    again = heads[4]
    assert again[H_FLAGS] & FLAG_REPEAT and again[H_FLAGS] & FLAG_BAD_TELEGRAM
    assert not any(h[H_FLAGS] & FLAG_REPEAT for i, h in enumerate(heads) if i != 4)
    values = [msgpack.unpackb(p)[len(HEADER):] for p in ctl.received]
    assert values[3] == values[4]  # the same measurement, only the flags differ
    assert rig.repeat_causes == {"bad_telegram": 1}
    # frames 1..5 ran on the answers to y_0..y_4 (frame 0 has none: command delay 1)
    assert rig.health.rejected["non_finite"] == 1 and rig.health.valid == 5
    assert rig.health.missing == 0  # nothing held: the frame waited for the good answer


def test_lockstep_repeat_request_gets_the_measurement_again(params) -> None:
    asked = {2}

    def answer(rig, m):
        seq = m[H_SEQUENCE]
        if seq in asked:  # "I lost it": a valid telegram with the request bit
            asked.discard(seq)
            return with_header(command(rig, 0), flags=CFLAG_REPEAT_REQUEST)
        return command(rig, seq)

    async def go():
        rig, ctl = await make_rig(params, answer, mode="lockstep")
        await rig.run(frames=4)
        return rig, ctl
    rig, ctl = run(go())
    heads = [msgpack.unpackb(p)[:6] for p in ctl.received]
    assert [h[H_SEQUENCE] for h in heads] == [0, 1, 2, 2, 3, 4]
    assert heads[3][H_FLAGS] & FLAG_REPEAT
    assert rig.health.repeat_requests == 1 and rig.repeat_causes == {"request": 1}
    assert sum(rig.health.sequence.values()) == 0  # its sequence was not read


def test_lockstep_silence_repeats_after_the_interval_then_doubling(params) -> None:
    # a controller that stays silent: the rig says y_0 again after 5 ms, then 10, 20,
    # 40 ms ... (doubling, RFC 6298 5.5), and sends nothing once it is stopped
    sent: list[float] = []

    def silent(rig, m):
        sent.append(time.monotonic())
        return None

    async def go():
        rig, _ = await make_rig(params, silent, mode="lockstep", lockstep_repeat_s=0.005)
        rig.start()  # compile and warm up before the clock of this test starts
        rig._started = True
        stop = asyncio.Event()
        t0 = time.monotonic()
        asyncio.get_running_loop().call_later(0.3, stop.set)
        await rig.run(stop=stop)
        return rig, t0
    rig, t0 = run(go())
    gaps = np.diff(sent)
    nominal = 0.005 * 2.0 ** np.arange(len(gaps))
    # a timer never fires early (asyncio rounds by its clock resolution, 1 ms allowed);
    # a busy machine only makes the gaps longer, so only their lower bounds are checked
    assert len(gaps) >= 2 and np.all(gaps >= nominal - 1e-3), gaps
    assert sent[-1] <= t0 + 0.3 + 1e-3  # nothing sent after the stop
    assert rig.repeat_causes == {"silence": len(gaps)} and rig.frame == 0


def test_a_board_that_repeats_its_bad_answer_meets_the_watchdog_not_a_storm(params) -> None:
    # a board that follows the repeat rule (the same answer for the same sequence) and
    # whose answer to y_3 carries another map's digest: y_3 is said again three times,
    # then frame 4 runs on the held command, and the run goes on
    replies: dict[int, bytes] = {}

    def answer(rig, m):
        seq = m[H_SEQUENCE]
        if seq not in replies:
            reply = command(rig, seq)
            replies[seq] = with_header(reply, map_digest=1) if seq == 3 else reply
        return replies[seq]

    async def go():
        rig, ctl = await make_rig(params, answer, mode="lockstep")
        await asyncio.wait_for(rig.run(frames=8), 10.0)
        return rig, ctl
    rig, ctl = run(go())
    sequences = [msgpack.unpackb(p)[H_SEQUENCE] for p in ctl.received]
    assert sequences == [0, 1, 2, 3, 3, 3, 3, 4, 5, 6, 7, 8]
    assert rig.repeat_causes == {"bad_telegram": 3}
    assert rig.health.rejected["map"] == 4 and rig.health.missing == 1


def test_lockstep_repeat_interval_is_bounded(params) -> None:
    from emulator.link.loop import LoopLink  # noqa: F401 (the registry knows loop://)
    from emulator.rig.frame_loop import RigError

    for bad in (0.0, 2.0):
        with pytest.raises(RigError, match="repeat interval"):
            Rig(params, open_link("loop://bounded"), mode="lockstep", lockstep_repeat_s=bad)


def test_a_damaged_serial_frame_gets_the_measurement_again_at_once(params) -> None:
    # lockstep over a pty: the board's answer to y_2 arrives with a flipped bit (the CRC
    # catches it); the rig sends y_2 again at once with the framing and repeat flags
    async def go():
        master, slave = os.openpty()
        link = open_link(f"serial://{os.ttyname(slave)}?baud=921600")
        await link.open()
        rig = Rig(params, link, mode="lockstep", clock=FakeClock(),
                  lockstep_repeat_s=1.0)  # a silence repeat would come far later
        os.set_blocking(master, False)
        got: list[list] = []
        buffer = bytearray()

        async def read_measurement() -> list:
            nonlocal buffer
            while b"\x00" not in buffer:
                await asyncio.sleep(0.0005)
                with contextlib.suppress(BlockingIOError):
                    buffer += os.read(master, 65536)
            frame, _, rest = bytes(buffer).partition(b"\x00")
            buffer = bytearray(rest)
            from cobs import cobs
            return msgpack.unpackb(cobs.decode(frame)[:-2])

        async def board():
            damaged = False
            while len(got) < 6:
                m = await read_measurement()
                got.append(m)
                frame = bytearray(encode_frame(command(rig, m[H_SEQUENCE])))
                if m[H_SEQUENCE] == 2 and not damaged:
                    frame[5] ^= 0x10  # one bit: COBS or the CRC fails
                    damaged = True
                os.write(master, bytes(frame))

        task = asyncio.ensure_future(board())
        try:
            await asyncio.wait_for(rig.run(frames=4), 5.0)
            await asyncio.wait_for(task, 5.0)
        finally:
            task.cancel()
            link.close()
            os.close(master)
            os.close(slave)
        return rig, got

    rig, got = asyncio.run(go())
    assert [m[H_SEQUENCE] for m in got] == [0, 1, 2, 2, 3, 4]
    assert got[3][H_FLAGS] & FLAG_REPEAT and got[3][H_FLAGS] & FLAG_FRAMING
    assert rig.repeat_causes == {"framing": 1}
    f = rig.link.stats.framing
    assert f.crc_errors + f.cobs_errors == 1


def test_a_damaged_serial_frame_in_real_time_holds_its_frame_and_is_flagged(params) -> None:
    # real time over a pty (10 ms frames, a command delay of one frame): the board's
    # answer to y_2 arrives with a flipped bit. Nothing is said again (real time has no
    # repeats); the frame that answer was for runs on the held command (counted missing)
    # and the next measurement the rig sends carries the framing flag (README, protocol
    # rules: "in real time the command lost in the frame counts as missing (held, flag
    # bit 1)", flag bit 5 for the damaged frame)
    from cobs import cobs

    from emulator.rig.clock import MonotonicClock

    async def go():
        master, slave = os.openpty()
        link = open_link(f"serial://{os.ttyname(slave)}?baud=921600")
        await link.open()
        rig = Rig(params, link, mode="realtime", clock=MonotonicClock(), period_s=0.01)
        os.set_blocking(master, False)
        got: list[list] = []
        buffer = bytearray()

        async def board():
            nonlocal buffer
            while True:
                await asyncio.sleep(0.0005)
                with contextlib.suppress(BlockingIOError):
                    buffer += os.read(master, 65536)
                while b"\x00" in buffer:
                    frame, _, rest = bytes(buffer).partition(b"\x00")
                    buffer = bytearray(rest)
                    m = msgpack.unpackb(cobs.decode(frame)[:-2])
                    got.append(m)
                    answer = bytearray(encode_frame(command(rig, m[H_SEQUENCE])))
                    if m[H_SEQUENCE] == 2:
                        answer[5] ^= 0x10  # one bit: COBS or the CRC fails
                    os.write(master, bytes(answer))

        task = asyncio.ensure_future(board())
        try:
            rig.start()
            await asyncio.wait_for(rig.run(frames=8), 10.0)
        finally:
            task.cancel()
            link.close()
            rig.clock.close()
            os.close(master)
            os.close(slave)
        return rig, got

    rig, got = asyncio.run(go())
    sequences = [m[H_SEQUENCE] for m in got]
    assert sequences == list(range(len(sequences))) and len(sequences) >= 7  # no repeat
    flagged = [m[H_SEQUENCE] for m in got if m[H_FLAGS] & FLAG_FRAMING]
    assert len(flagged) == 1 and flagged[0] > 2, flagged
    assert not any(m[H_FLAGS] & FLAG_REPEAT for m in got)
    f = rig.link.stats.framing
    assert f.crc_errors + f.cobs_errors == 1
    # held: the damaged frame's, and any answer a busy machine delivered after its frame
    # (counted late or expired by the rig), nothing else
    link = rig.report()["link"]
    late = link["sequence"].get("late", 0) + link["expired"]
    assert rig.health.missing == 1 + late and rig.repeats == 0


def _repeats_board(asked: set[int], replays: dict[int, int]):
    """A scripted board: asks for each measurement in ``asked`` again once (a repeat
    request instead of its answer), answers a repeat of y_4 now and keeps a second
    answer to y_4 back, sent when y_5 is said again; ``replays`` {at: seq}: with its
    answer to y_at, also its answer to y_seq once more. Returns (answer, board) where
    board["link"] must be set to the board's link end."""
    held: list[bytes] = []
    board: dict = {}

    def answer(rig, m):
        seq = m[H_SEQUENCE]
        if seq in asked and not m[H_FLAGS] & FLAG_REPEAT:
            asked.discard(seq)
            return with_header(command(rig, 0), flags=CFLAG_REPEAT_REQUEST)
        if seq == 4 and m[H_FLAGS] & FLAG_REPEAT:
            held.append(command(rig, 4))
        if seq == 5 and m[H_FLAGS] & FLAG_REPEAT and held:
            board["link"].send(held.pop())  # y_4's second answer, after y_5's repeat
        if seq in replays and not m[H_FLAGS] & FLAG_REPEAT:
            board["link"].send(command(rig, replays.pop(seq)))
        return command(rig, seq)

    return answer, board


def _run_board(params, answer, board, frames: int = 8):
    async def go():
        rig, ctl = await make_rig(params, answer, mode="lockstep")
        board["link"] = ctl.link
        await rig.run(frames=frames)
        return rig, ctl
    return run(go())


def test_an_answer_to_an_earlier_repeat_after_a_later_one_is_no_sequence_error(params) -> None:
    # The board asks for y_4 again (it lost it), answers the repeat, and keeps a second
    # answer to y_4 back (it answered y_4 twice: the copy it had and the repeat); then it
    # asks for y_5 again too, and the held answer to y_4 arrives after the rig has said
    # y_5 again. That second answer is to a measurement the rig itself said again:
    # counted as an answer to a repeat, no sequence error flagged to the board (the rig
    # had remembered only its last repeat, and the held answer was a "duplicate" with
    # flag bit 3; a board's relay met it in the kit's serial test).
    answer, board = _repeats_board({4, 5}, {})
    rig, ctl = _run_board(params, answer, board)
    heads = [msgpack.unpackb(p)[:6] for p in ctl.received]
    assert [h[H_SEQUENCE] for h in heads] == [0, 1, 2, 3, 4, 4, 5, 5, 6, 7, 8]
    assert rig.health.repeat_requests == 2
    assert rig.health.answers_to_repeats == 1
    assert sum(rig.health.sequence.values()) == 0
    assert not any(h[H_FLAGS] & FLAG_SEQUENCE for h in heads)


def test_an_answer_said_again_beyond_the_repeats_is_still_a_sequence_error(params) -> None:
    # The same board, which also sends its answer to y_4 a third time with its answer to
    # y_7 (the rig said y_4 again once: one further answer is owed, not two), and its
    # answer to y_1 again with y_3 (y_1 was never said again). Both are sequence errors:
    # y_1's the answer the rig last used ("duplicate"), y_4's an older one ("late"),
    # each flagged (bit 3) in the next measurement: y_4 (and its repeat) and y_8.
    answer, board = _repeats_board({4, 5}, {3: 1, 7: 4})
    rig, ctl = _run_board(params, answer, board, frames=9)
    heads = [msgpack.unpackb(p)[:6] for p in ctl.received]
    assert rig.health.answers_to_repeats == 1
    assert rig.health.sequence == {"duplicate": 1, "late": 1}, rig.health.sequence
    assert [h[H_SEQUENCE] for h in heads if h[H_FLAGS] & FLAG_SEQUENCE] == [4, 4, 8]
