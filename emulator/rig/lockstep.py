"""Lockstep pacing: the controller is the clock (a part of emulator.rig.frame_loop.Rig).

Every valid command telegram paces one frame, answered at once; a bad one, a damaged
serial frame or a repeat request gets the measurement again at once; silence gets it
again after RFC 6298's timeout (round_trip.py). The rules as a board sees them:
emulator/protocol/header.py, LOCKSTEP_PACING.
"""

from __future__ import annotations

import asyncio
import os
import time

from emulator.protocol.header import FLAG_FRAMING, FLAG_REPEAT, FLAG_WATCHDOG

#: lockstep: say the current measurement again after at most this many periods of
#: silence; sooner when the measured round trips allow (Rig._silence_s)
LOCKSTEP_REPEAT_PERIODS = 20
LOCKSTEP_REPEAT_MIN_PERIODS = 2  # never sooner than this
LOCKSTEP_REPEAT_MAX_S = 1.0  # while the silence lasts, the interval doubles up to this
LOCKSTEP_BAD_REPEATS = 3  # a rejected telegram gets y_k again this often, then is held
#: a damaged frame or a repeat request gets y_k again at once this often in a row; then
#: the silence timer paces (at a BER of 1e-3 the demo's round trip fails 93 % of the
#: time: 64 in a row happens once in about 100 frames)
LOCKSTEP_QUICK_REPEATS = 64
LOCKSTEP_STOP_CHECK_S = 0.05  # a silence wait looks at the stop event this often
SAID_AGAIN_KEPT = 8  # lockstep: sequences whose repeats' answers are remembered
LOCKSTEP_POLL_NS = 300_000  # lockstep: poll the link this long before blocking on it


class LockstepPacing:
    """The lockstep half of the rig's pacing (the rig's frame, codec and counters are
    its own: frame_loop.py)."""

    def _repeat_measurement(self, cause: str) -> None:
        """Lockstep: y_k again, with the flags it went out with, what was seen since,
        and the repeat bit (the board answers it with its last command for k)."""
        flags = self._sent_flags | self._flags | FLAG_REPEAT
        flags |= FLAG_WATCHDOG if self.tripped else 0
        y = self._y if self.frame == self._sent_frame else self._y_out  # (run ahead)
        self.link.send(self.codec.encode(self._sent_frame, self._sent_time_us,
                                         self.period_us, flags, y))
        self._repeated = self._sent_frame
        owed = self._said_again
        owed[self._sent_frame] = owed.get(self._sent_frame, 0) + 1
        if len(owed) > SAID_AGAIN_KEPT:
            del owed[next(iter(owed))]  # the oldest sequence
        self._sent_flags = flags & ~FLAG_REPEAT
        self._flags = 0
        self.repeats += 1
        self.repeat_causes[cause] += 1

    async def _run_lockstep(self, frames: int | None, stop: asyncio.Event | None) -> None:
        """Each valid command telegram paces one frame: the controller is the clock.

        The rules a board sees are in emulator/protocol/header.py (LOCKSTEP_PACING): a
        rejected telegram, a damaged serial frame or a repeat request gets y_k again at
        once (a rejected one at most LOCKSTEP_BAD_REPEATS times for the same k, then the
        frame runs on the held command, so a board that keeps sending a bad telegram
        meets the watchdog rather than a frozen plant; damage and requests at most
        LOCKSTEP_QUICK_REPEATS times, then the silence timer); silence gets it again
        after ``_silence_s()``, then at doubling intervals (up to LOCKSTEP_REPEAT_MAX_S)
        until a frame runs on a clean round trip (RFC 6298, 5.5 and 5.7)."""
        if self._sent_frame != self.frame and not self._ran_ahead:  # not when resuming
            self._send_measurement(self.frame)  # a run under way (frame k run ahead: y_k's
            # answer is still owed)
        self._sent_mono_ns = time.monotonic_ns()
        self._repeated = self._sent_frame  # the first measurement's round trip includes the
        # controller's start-up: not a sample
        self.stats.restart_cpu_window()
        silence_s = self._silence_s()
        bad_repeats = quick_repeats = 0  # immediate repeats of y_k, by kind
        while not self._done(frames, stop):
            # poll briefly before blocking: a sleeping process wakes late on some machines
            # (tens of us to ms on a VM), which would pace lockstep more than the work does
            link = self.link
            if not link.pending():  # (an in-process controller has answered already)
                spin_until = time.monotonic_ns() + LOCKSTEP_POLL_NS
                while not link.pending() and time.monotonic_ns() < spin_until:
                    link.poll()
                    os.sched_yield()  # the core to the controller if it waits for one
            if not link.pending():
                if silence_s is None:  # the round trips changed since it was last asked
                    silence_s = self._silence_s()
                if not await self._wait_link(silence_s, stop):
                    if self._done(frames, stop):
                        break
                    # the controller is silent (not started yet, or one of the telegrams
                    # was lost): plant time stands still; say the measurement again
                    self._repeat_measurement("silence")
                    silence_s = min(2 * silence_s, LOCKSTEP_REPEAT_MAX_S)
                    continue
            paced = False
            repeat = ""
            while not self._done(frames, stop):
                payload = self.link.take_one()
                if payload is None:
                    break
                arrived_ns = time.monotonic_ns()
                k = self._sent_frame  # (self.frame is k + 1 when frame k ran ahead)
                rejected, injected_loss = self._receive([payload])
                if self._repeat_asked:
                    self._repeat_asked, repeat = False, "request"
                    continue
                if k not in self._answers and not injected_loss:  # (an injected loss runs
                    # the frame on the held command, as a lost command does in real time)
                    if not rejected:
                        continue  # a duplicate or stale telegram paces nothing
                    if bad_repeats < LOCKSTEP_BAD_REPEATS:
                        repeat = "bad_telegram"
                        continue  # asked again below
                    # refused this often for the same k: the frame runs on the held command
                repeat = ""
                clean_sample = self._repeated != k  # Karn: no sample from a repeat
                if clean_sample:  # y_k out, its answer in
                    self._note_round_trip(arrived_ns - self._sent_mono_ns)
                if self.frame == k:  # frame k has not run ahead: run it now
                    if (self.monitor is not None and not self.monitor.may_run()
                            and not await self.monitor.hold(stop)):
                        break  # stopped while paused (the controller waits for y_k)
                    self._run_frame(k)
                if self.link.take_damaged():  # seen with this batch: say so in y_(k+1)
                    self._flags |= FLAG_FRAMING
                self._send_measurement(self.frame)
                self._sent_mono_ns = time.monotonic_ns()
                paced = True
                bad_repeats = quick_repeats = 0
                if clean_sample:  # the backed-off wait stays until a clean sample
                    silence_s = None  # (worked out again when it is next waited for)
                self._run_ahead(frames, stop)
                if self.monitor is not None and self.frame % self.monitor.every == 0:
                    await asyncio.sleep(0)  # an in-process controller never waits: let
                    # the monitor's socket and snapshot in
            if self.link.take_damaged():
                self._flags |= FLAG_FRAMING
                if not paced:  # the answer to y_k was in it: ask again, now
                    repeat = repeat or "framing"
            if not repeat or self._done(frames, stop):
                continue
            if repeat == "bad_telegram":
                bad_repeats += 1
            else:
                quick_repeats += 1
                if quick_repeats > LOCKSTEP_QUICK_REPEATS:
                    continue  # a line this bad, or a board asking this often: the
                    # silence timer paces the repeats from here
            self._repeat_measurement(repeat)
            if self.repeats % 16 == 0:
                await asyncio.sleep(0)  # never starve the loop (stop, monitor, I/O)

    def _run_ahead(self, frames: int | None, stop: asyncio.Event | None) -> None:
        """Run frame k while the controller computes its answer to y_k (just sent).

        Frame k acts on the command answering y_(k-d), d >= 1, which is here: so it can
        run before the answer to y_k arrives, and the rig's work overlaps the
        controller's. What the board sees is unchanged: y_(k+1) goes out only after the
        answer to y_k, a repeat of y_k carries y_k, and answers read meanwhile are told
        as if frame k had not run (Rig._receive). Only in the plain case: a command of
        its own for frame k (no hold, no watchdog; nor a stale answer to expire, as
        none older than y_(k-d) is ever accepted: so the frame raises no flag for
        y_(k+1)), no faults (their telegram drops draw in the order of the frames), not
        paused, not the last frame asked for; otherwise frame k runs when the answer to
        y_k is in, as before. Runs are the same bit for bit either way."""
        k = self.frame
        if (not self.run_ahead or self.delay == 0 or self.tripped
                or (k - self.delay) not in self._answers
                or (frames is not None and k + 1 >= frames)
                or (stop is not None and stop.is_set())
                or (self.faults is not None and self.faults.faults)
                or (self.monitor is not None and not self.monitor.may_run())):
            return
        self._y_out = self._y  # y_k, for a repeat while frame k has run (the sampler
        # takes y_(k+1) into its other array: MeasurementSampler.sample)
        self._used_before_ahead, self._ran_ahead = self._last_used, True
        self._run_frame(k)
        self.frames_ahead += 1

    def _run_frame(self, k: int) -> None:
        """Frame k on its command, timed."""
        start = self.clock.now_ns()
        period = self._take_command(k) or self.period_us
        self._step(period)
        self.stats.record(0, self.clock.now_ns() - start, period * 1000)

    async def _wait_link(self, timeout_s: float, stop: asyncio.Event | None) -> bool:
        """Wait for the link up to timeout_s; False when the time ran out or stop was
        set (checked every LOCKSTEP_STOP_CHECK_S, so a long silence wait ends soon)."""
        deadline = time.monotonic() + timeout_s
        while True:
            left = deadline - time.monotonic()
            if left <= 0 or (stop is not None and stop.is_set()):
                return False
            if await self.link.wait(min(left, LOCKSTEP_STOP_CHECK_S)):
                return True
            if self.recorder is not None:
                self.recorder.tick()  # rows buffered before the silence reach the disk

    def _note_round_trip(self, ns: int) -> None:
        """A lockstep round trip into the smoothed estimate (round_trip.py)."""
        self._round_trip.note(ns * 1e-9)

    def _silence_s(self) -> float:
        """How long lockstep waits in silence before it says the measurement again:
        RFC 6298's timeout from the round trips measured, within
        [LOCKSTEP_REPEAT_MIN_PERIODS periods, lockstep_repeat_s]. A lost delimiter or a
        measurement lost on the way costs this, not the ceiling."""
        return self._round_trip.timeout(
            LOCKSTEP_REPEAT_MIN_PERIODS * self.period_us * 1e-6, self.lockstep_repeat_s)
