"""Frames run ahead in lockstep (rig/lockstep.py, ``_run_ahead``): the rig runs frame k
while the board computes its answer to y_k, and no board can tell: every telegram it
gets, and the rig's link counters, are what frames run one by one give."""

from __future__ import annotations

import asyncio

import msgpack
import pytest

from emulator.protocol.header import CFLAG_REPEAT_REQUEST, FLAG_REPEAT, H_FLAGS, H_SEQUENCE

from .conftest import command, make_rig, run, with_header


def test_frames_run_ahead_send_the_board_what_frames_run_one_by_one_send(params) -> None:
    # lockstep runs frame k while the board computes its answer to y_k (frame k acts on
    # the answer to y_(k-1)); the board must not be able to tell: every telegram it gets,
    # repeats of y_k asked for after frame k ran included, is the same to the byte
    def telegrams(run_ahead: bool) -> tuple[list[bytes], int]:
        asked = {2, 5, 6}

        def answer(rig, m):
            seq = m[H_SEQUENCE]
            if seq in asked:
                asked.discard(seq)
                return with_header(command(rig, 0), flags=CFLAG_REPEAT_REQUEST)
            return command(rig, seq, duty=0.5 + 0.01 * seq)

        async def go():
            rig, ctl = await make_rig(params, answer, mode="lockstep")
            rig.run_ahead = run_ahead
            await rig.run(frames=10)
            return rig, ctl
        rig, ctl = run(go())
        return list(ctl.received), rig.frames_ahead

    ahead, n_ahead = telegrams(True)
    one_by_one, n_one = telegrams(False)
    assert n_one == 0 and n_ahead >= 5
    heads = [msgpack.unpackb(p)[:6] for p in ahead]
    assert [h[H_SEQUENCE] for h in heads] == [0, 1, 2, 2, 3, 4, 5, 5, 6, 6, 7, 8, 9, 10]
    assert ahead == one_by_one


def _both_ways(go) -> tuple[tuple, tuple]:
    """go(run_ahead) -> (rig, controller) run with frames run ahead and one by one: what
    the board received and the rig's link counters, for each."""
    def seen(run_ahead: bool) -> tuple:
        rig, ctl = run(go(run_ahead))
        health = rig.health.as_dict()
        return list(ctl.received), health, rig.frame, rig.plant.time_s
    return seen(True), seen(False)


def test_a_run_stopped_while_a_frame_ran_ahead_resumes_as_one_by_one(params) -> None:
    # the board does not answer y_5 before the run is stopped (frame 5 has run ahead);
    # resumed, the rig must still owe y_5 its answer (say it again), not send y_6
    def go(run_ahead: bool):
        async def inner():
            alive = {"yes": False}

            def answer(rig, m):
                seq = m[H_SEQUENCE]
                if seq >= 5 and not alive["yes"]:
                    return None
                return command(rig, seq, duty=0.5 + 0.01 * seq)
            rig, ctl = await make_rig(params, answer, mode="lockstep")
            rig.run_ahead = run_ahead
            stop = asyncio.Event()
            asyncio.get_running_loop().call_later(0.3, stop.set)
            await rig.run(stop=stop)
            alive["yes"] = True
            await rig.run(frames=10)
            return rig, ctl
        return inner()
    (ahead, h_ahead, f_ahead, _), (one, h_one, f_one, _) = _both_ways(go)
    assert h_ahead["missing"] == h_one["missing"] == 0
    assert f_ahead == f_one == 10
    # y_5 said again (silence) while stopped and after: the repeats' count depends on
    # timing, so compare the telegrams past the last repeat of y_5
    def past_y5(telegrams):
        heads = [msgpack.unpackb(p)[:6] for p in telegrams]
        last = max(i for i, h in enumerate(heads) if h[H_SEQUENCE] == 5)
        return telegrams[:6], telegrams[last + 1:]
    assert past_y5(ahead) == past_y5(one)
    assert all(msgpack.unpackb(p)[H_FLAGS] & ~FLAG_REPEAT == 0 for p in ahead)


@pytest.mark.parametrize("late_at", [4, 5])
def test_a_late_answer_after_a_frame_ran_ahead_is_told_as_one_by_one(params, late_at) -> None:
    # y_3 is said again after silence; the board's first answer to it arrives two round
    # trips late (UDP may reorder): an answer to a repeat, no error, with or without
    # frames run ahead; and a plain duplicate of the answer to y_3 likewise
    def go_with(slow: bool):
        def go(run_ahead: bool):
            async def inner():
                first = set()

                def answer(rig, m):
                    seq = m[H_SEQUENCE]
                    if slow and seq == 3 and seq not in first:
                        first.add(seq)
                        return None
                    if seq == late_at:
                        ctl.link.send(command(rig, 3, duty=0.53))
                    return command(rig, seq, duty=0.5 + 0.01 * seq)
                rig, ctl = await make_rig(params, answer, mode="lockstep",
                                          lockstep_repeat_s=0.005)
                rig.run_ahead = run_ahead
                await rig.run(frames=10)
                return rig, ctl
            return inner()
        return go
    (ahead, h_ahead, *_), (one, h_one, *_) = _both_ways(go_with(slow=True))
    # one repeat of y_3 (the answer to it comes at once), so one answer owed to it: the
    # late one
    assert h_ahead["answers_to_repeats"] == h_one["answers_to_repeats"] == 1
    assert h_ahead["sequence"] == h_one["sequence"] == {}
    assert ahead == one
    (ahead, h_ahead, *_), (one, h_one, *_) = _both_ways(go_with(slow=False))
    assert h_ahead["sequence"] == h_one["sequence"] != {}  # a duplicate, told alike
    assert ahead == one
