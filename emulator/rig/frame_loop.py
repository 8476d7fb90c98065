"""The frame loop: where clock, link, plant and sensors meet (DESIGN.md, "One frame").

At the start of frame k (plant time t_k = k T): send the measurement y_k, sampled from
the state at t_k; take the command telegram answering y_(k-d), d the command delay
(default 1: the controller computes during the frame and its command acts from t_(k+1),
as on a real signal processor; 0 only when asked for); validate it, or hold the last
good command; after ``watchdog_frames`` frames without one, block the gates and raise
the watchdog flag until valid commands resume; advance the plant to t_(k+1) with the
command held; sample y_(k+1).

Modes: ``realtime`` (the rig's clock paces, deadlines t0 + k T), ``lockstep`` (every
valid command telegram paces one frame, answered at once; a telegram may carry its own
period; a bad one, or a damaged serial frame, gets the measurement again at once:
emulator/protocol/header.py, LOCKSTEP_PACING), ``afap`` (no waiting: commands are taken
if present).
"""

from __future__ import annotations

import asyncio
import gc
import logging
from collections import Counter, deque
from typing import Any

import numpy as np

from emulator.link import Link
from emulator.link.telegram import TelegramCodec, TelegramError
from emulator.plant import Plant
from emulator.plant.params import TrainsetParams
from emulator.protocol.header import (
    CFLAG_REPEAT_REQUEST,
    FLAG_BAD_TELEGRAM,
    FLAG_COMMAND_HELD,
    FLAG_FRAMING,
    FLAG_OVERRUN,
    FLAG_SEQUENCE,
    FLAG_WATCHDOG,
    PROTOCOL_VERSION,
)
from emulator.protocol.signal_map import build_signal_map
from emulator.rig.clock import FrameStats, MonotonicClock
from emulator.rig.command_mapping import CommandMapper
from emulator.rig.link_health import LinkHealth
from emulator.rig.lockstep import (
    LOCKSTEP_REPEAT_MAX_S,
    LOCKSTEP_REPEAT_MIN_PERIODS,
    LOCKSTEP_REPEAT_PERIODS,
    LockstepPacing,
)
from emulator.rig.record_layout import RecordsFrames
from emulator.rig.round_trip import RoundTrip
from emulator.rig.sampling import DriverDemand, MeasurementSampler

log = logging.getLogger(__name__)

MODES = ("realtime", "lockstep", "afap")
MIN_PERIOD_US, MAX_PERIOD_US = 100, 10_000  # 0.1 .. 10 ms
START_LEAD_NS = 20_000_000  # first deadline after warm-up
#: real time: a missing command counts against the controller only if it had at least
#: (delay - FAIR_SLACK) periods between our measurement and the frame that wanted the
#: answer; less than that (a frame started late, a catch-up burst) is the rig's overrun
FAIR_SLACK = 0.25


class RigError(ValueError):
    """A rig setting that cannot be used."""


class Rig(LockstepPacing, RecordsFrames):
    """One trainset plant behind one controller link (its recording: RecordsFrames)."""

    def __init__(self, params: TrainsetParams, link: Link, *, mode: str = "realtime",
                 period_s: float | None = None, command_delay: int = 1,
                 watchdog_frames: int = 10, seed: int = 0, clock=None,
                 ideal_dc_links: bool = False,
                 lockstep_repeat_s: float | None = None) -> None:
        if mode not in MODES:
            raise RigError(f"mode must be one of {', '.join(MODES)}, got {mode!r}")
        if command_delay not in (0, 1, 2, 3):
            raise RigError(f"command delay must be 0..3 frames, got {command_delay}")
        period_s = params.frame_s if period_s is None else period_s
        if not MIN_PERIOD_US <= round(period_s * 1e6) <= MAX_PERIOD_US:
            raise RigError(f"period must be within 0.1..10 ms, got {period_s * 1e3:g} ms")
        if watchdog_frames < 1:
            raise RigError("watchdog must allow at least one missing frame")
        if lockstep_repeat_s is None:
            lockstep_repeat_s = LOCKSTEP_REPEAT_PERIODS * period_s
        if not (LOCKSTEP_REPEAT_MIN_PERIODS * period_s <= lockstep_repeat_s
                <= LOCKSTEP_REPEAT_MAX_S):
            raise RigError(f"lockstep repeat interval must be within "
                           f"{LOCKSTEP_REPEAT_MIN_PERIODS} periods and "
                           f"{LOCKSTEP_REPEAT_MAX_S * 1e3:g} ms, got "
                           f"{lockstep_repeat_s * 1e3:g} ms")
        self.lockstep_repeat_s = lockstep_repeat_s
        self.params = params
        self.link = link
        self.mode = mode
        self.period_us = round(period_s * 1e6)
        self.delay = command_delay
        self.watchdog_frames = watchdog_frames
        self.clock = clock or MonotonicClock()
        self.plant = Plant(params, ideal_dc_links=ideal_dc_links)
        self.signal_map = build_signal_map(params)
        sm = self.signal_map
        self.codec = TelegramCodec(
            PROTOCOL_VERSION, np.array([s.scale for s in sm.measurements]),
            np.array([s.scale for s in sm.commands]), np.array([s.lo for s in sm.commands]),
            np.array([s.hi for s in sm.commands]), map_digest=sm.digest(),
            recv_whole=np.array([s.kind != "analog" for s in sm.commands]))
        self.seed = seed
        self.rng = np.random.default_rng(seed)
        self.driver = DriverDemand()
        self.program = None  # a driver program: update(rig) after every frame
        self.faults = None  # an emulator.faults.FaultSet, applied every frame
        self.recorder = None  # an emulator.recording.recorder.Recorder, see record_columns()
        self.monitor = None  # an emulator.monitor.Monitor: service() after every frame
        self._command_index = {s.name: i for i, s in enumerate(sm.commands)}
        self.record_columns()  # allocates the row a recorder is given each frame
        self.sampler = MeasurementSampler(self.plant, sm, params.sensors, self.rng)
        self.mapper = CommandMapper(self.plant, sm)
        self._reply_at = self.mapper.reply_positions()
        self.health = LinkHealth()
        self.stats = FrameStats()
        self.frame = 0  # k: the frame about to run
        self._answers: dict[int, tuple[np.ndarray, int]] = {}  # seq -> (values, period_us)
        self._held = self.mapper.safe.copy()
        self._missing_run = 0
        self._excused_run = 0  # held frames in a row excused as the rig's overruns
        self.tripped = False
        self._flags = 0
        self._last_seq = -1
        self._last_used = -1
        self._started = False
        self._sent_frame = -1  # the frame whose measurement went out last
        self._sent_flags = 0  # the flags y_k went out with (a repeat carries them again)
        self._sent_mono_ns = 0  # lockstep: when y_k went out (for the round trip)
        self._sent_time_us = 0  # the plant time y_k went out with
        self._y_out = np.zeros(len(sm.measurements))  # y_k while frame k has run ahead
        self._ran_ahead = False  # frame _sent_frame ran before its answer came
        self._used_before_ahead = -1  # _last_used before it ran
        self.frames_ahead = 0  # lockstep: frames run while the controller computed
        #: lockstep: run frame k while the controller computes its answer to y_k
        #: (lockstep.py, _run_ahead); False runs it when the answer is in (comparisons)
        self.run_ahead = True
        self.repeats = 0  # lockstep: measurements said again (the causes: repeat_causes)
        self.repeat_causes: Counter = Counter()  # silence, bad_telegram, framing, request
        self._repeat_asked = False
        self._repeated = -1  # the last sequence said again (no round-trip sample from it)
        #: lockstep: for the last SAID_AGAIN_KEPT sequences said again, the further
        #: answers still owed to those repeats (one a repeat): such an answer is no error,
        #: even when it crosses a later repeat; a replay beyond them still is
        self._said_again: dict[int, int] = {}
        self._accepted: deque[int] = deque(maxlen=16)  # sequences answered, lately
        self._round_trip = RoundTrip()  # lockstep round trips (RFC 6298 estimator)
        self._y = np.zeros(len(sm.measurements))
        self._sent_ns = np.zeros(8, dtype=np.int64)  # when y_k went out, by k mod 8

    @property
    def replies(self) -> dict[str, float]:
        """The controller's train-interface replies in the command last taken
        (CommandMapper.replies); none before the first."""
        return self.mapper.replies(self._held) if self._last_used >= 0 else {}

    def reply(self, name: str) -> float:
        """One of them (CommandMapper.REPLIES) as a float, 0 before the first command:
        for a reader every frame, without the dict."""
        return float(self._held[self._reply_at[name]]) if self._last_used >= 0 else 0.0

    # --- one frame, without waiting ----------------------------------------------------
    def _send_measurement(self, k: int) -> None:
        self._ran_ahead = False
        flags = self._flags | (FLAG_WATCHDOG if self.tripped else 0)
        self._sent_time_us = round(self.plant.time_s * 1e6)
        payload = self.codec.encode(k, self._sent_time_us, self.period_us, flags, self._y)
        self.link.send(payload)
        self._sent_ns[k % len(self._sent_ns)] = self.clock.now_ns()
        self._sent_flags = flags
        self._sent_frame = k
        self._flags = 0

    def _receive(self, payloads: list[bytes]) -> tuple[int, int]:
        """Decode telegrams; keep valid answers by the sequence number they answer.
        Returns how many were rejected (health.rejected) and how many of those an
        injected fault dropped."""
        # k: the last measurement out; when frame k ran ahead (lockstep.py) self.frame is
        # k + 1 and the answers are told as if it had not (its command still waiting)
        k = self.frame - 1 if self._ran_ahead else self.frame
        last_used = self._used_before_ahead if self._ran_ahead else self._last_used
        rejected = dropped = 0
        for payload in payloads:
            if self.faults is not None and self.faults.drop():
                self.health.rejected["fault_dropped"] += 1
                rejected += 1
                dropped += 1
                continue
            try:
                tg = self.codec.decode(payload)
            except TelegramError as exc:
                self.health.rejected[exc.kind] += 1
                rejected += 1
                self._flags |= FLAG_BAD_TELEGRAM
                continue
            period = tg.period_us
            if period and not (MIN_PERIOD_US <= period <= MAX_PERIOD_US
                               if self.mode == "lockstep" else period == self.period_us):
                self.health.rejected["period"] += 1  # header.py, PERIOD_RULES
                rejected += 1
                self._flags |= FLAG_BAD_TELEGRAM
                continue
            if tg.flags & CFLAG_REPEAT_REQUEST:  # its sequence and values are not read
                self.health.repeat_requests += 1
                self._repeat_asked = True
                continue
            seq = tg.sequence
            if seq > k:
                self._sequence_error("unexpected")  # answers a measurement never sent
            elif self._said_again.get(seq, 0) > 0 and (
                    seq in self._answers or seq in self._accepted):
                self._said_again[seq] -= 1  # we asked twice: not their error
                self.health.answers_to_repeats += 1
            elif seq in self._answers or seq <= self._last_used:  # (>= last_used)
                self._sequence_error("duplicate" if seq in self._answers
                                     or seq == self._last_used or seq == last_used
                                     else "late")
            elif seq < k - self.delay:
                self._sequence_error("late")
            else:
                if seq < self._last_seq:
                    self.health.reordered += 1
                self._last_seq = max(self._last_seq, seq)
                self._answers[seq] = (tg.values, period)
                self._accepted.append(seq)
                self.health.accepted += 1
        return rejected, dropped

    def _sequence_error(self, kind: str) -> None:
        self.health.sequence[kind] += 1
        self._flags |= FLAG_SEQUENCE

    def _fair(self, want: int, start_ns: int | None) -> bool:
        """Whether the controller had its time to answer y_want by ``start_ns`` (the
        start of the frame that wants it); always so outside real time or with d = 0."""
        if start_ns is None or self.mode != "realtime" or self.delay == 0:
            return True
        window = start_ns - int(self._sent_ns[want % len(self._sent_ns)])
        return window >= (self.delay - FAIR_SLACK) * self.period_us * 1000

    def _take_command(self, k: int, start_ns: int | None = None) -> int:
        """The command for frame k (answering y_(k-d)); returns its period (0: default).

        ``start_ns``: when frame k started (real time), to tell a controller that was
        late from a rig that left it too little time (see FAIR_SLACK)."""
        want = k - self.delay
        answers = self._answers
        answer = answers.pop(want, None)
        if answers:  # (usually none: answers come in order)
            for stale in [s for s in answers if s < want]:
                del answers[stale]
                self.health.expired += 1
                self._flags |= FLAG_SEQUENCE
        if answer is not None:
            self._held = answer[0]
            self._last_used = want
            self.health.valid += 1
            self._missing_run = 0
            self._excused_run = 0
            self.tripped = False
            return answer[1]
        if (want >= 0 and not self._fair(want, start_ns)
                and self._excused_run < self.watchdog_frames):  # the rig's overrun, not theirs
            # excused at most watchdog_frames in a row: after a long stall a controller
            # that stays silent trips the watchdog all the same (stale command, gates on)
            self._excused_run += 1
            self.health.overrun_held += 1
            self._flags |= FLAG_COMMAND_HELD | FLAG_OVERRUN
        elif want >= 0:  # before the first answer can exist, holding is not a fault
            self.health.missing += 1
            self._missing_run += 1
            self._flags |= FLAG_COMMAND_HELD
            if self._missing_run > self.watchdog_frames and not self.tripped:
                self.tripped = True
                self.health.watchdog_trips += 1
                log.warning("link watchdog: no valid command for %d frames, gates blocked",
                            self._missing_run)
        return 0

    def _step(self, period_us: int) -> None:
        held = self._held
        if self.faults is not None and self.faults.faults:  # none scheduled: nothing to do
            self.faults.update()
            held = held.copy()
            self.faults.transform_command(held, self._command_index)
        self.mapper.load(held, gates_allowed=not self.tripped)
        self.plant.advance(None, period_us / 1e6)
        if self.recorder is not None:  # y_k, what acted in the frame, states at t_(k+1)
            row = self.fill_row(self.plant.time_s, self._y, held)
            self.recorder.append(row if self._record_pick is None else row[self._record_pick])
        if self.program is not None:
            self.program.update(self)  # the train's demands for the next measurement
        self._y = self.sampler.sample(period_us / 1e6, self.driver)
        self.frame += 1
        if self.monitor is not None:
            self.monitor.service()

    def start(self) -> None:
        """Warm every compiled path and take y_0 (call before the first frame)."""
        # compile or load every kernel on a throwaway plant of the same kind
        spare = Plant(self.params, ideal_dc_links=not self.plant.line_side)
        CommandMapper(spare, self.signal_map).load(self.mapper.safe.copy())
        spare.advance(None, self.period_us / 1e6)
        self.codec.encode(0, 0, 0, 0, self._y)
        self.codec.warm_up()  # the reader of commands
        self.sampler.warm_up()  # the path of the samples after a frame
        self._y = self.sampler.sample(self.period_us / 1e6, self.driver).copy()

    # --- pacing -----------------------------------------------------------------------
    async def run(self, frames: int | None = None, stop: asyncio.Event | None = None) -> None:
        """Run frames until the count is reached or stop is set; may be called again."""
        if not self._started:
            self.start()
            self._started = True
            gc.collect()  # once: a full collection costs tens of ms with numba loaded
        gc.freeze()  # warm-up objects out of the collector's way (DESIGN.md timing facts)
        try:
            if self.mode == "lockstep":
                await self._run_lockstep(frames, stop)
            else:
                await self._run_paced(frames, stop)
        finally:
            gc.unfreeze()

    def _done(self, frames: int | None, stop: asyncio.Event | None) -> bool:
        return (frames is not None and self.frame >= frames) or (stop is not None
                                                                  and stop.is_set())

    async def _run_paced(self, frames: int | None, stop: asyncio.Event | None) -> None:
        clock = self.clock
        period_ns = self.period_us * 1000
        t0 = clock.now_ns() + (START_LEAD_NS if self.mode == "realtime" else 0)
        self.stats.restart_cpu_window()
        first = self.frame
        while not self._done(frames, stop):
            if self.monitor is not None and not self.monitor.may_run():
                if not await self.monitor.hold(stop):
                    continue  # stopped while paused
                t0, first = clock.now_ns(), self.frame  # after a pause: deadlines anew
            deadline = t0 + (self.frame - first) * period_ns
            if self.mode == "realtime":
                await clock.sleep_until(deadline)
            start = clock.now_ns()
            lateness = start - deadline if self.mode == "realtime" else 0
            if lateness > period_ns:
                self._flags |= FLAG_OVERRUN
            k = self.frame
            self._send_measurement(k)
            if self.delay == 0:
                budget = (deadline + period_ns // 2 - clock.now_ns()) / 1e9
                while k not in self._answers and budget > 0 and await self.link.wait(budget):
                    self._receive(self.link.take())
                    budget = (deadline + period_ns // 2 - clock.now_ns()) / 1e9
            self.link.poll()
            self._receive(self.link.take())
            if self.link.take_damaged():
                self._flags |= FLAG_FRAMING  # the command lost with it is held, as missing
            self._repeat_asked = False  # real time: the next measurement is a period away
            self._take_command(k, start)
            self._step(self.period_us)
            self.stats.record(lateness, clock.now_ns() - start, period_ns)
            if self.mode == "afap" and self.frame % 64 == 0:
                await asyncio.sleep(0)  # let the loop serve I/O

    def report(self) -> dict[str, Any]:
        """Counters and timing of the run so far."""
        return {"frames": self.frame, "plant_time_s": self.plant.time_s, "mode": self.mode,
                "period_us": self.period_us, "command_delay": self.delay,
                "watchdog_tripped": self.tripped, "link": self.health.as_dict(),
                "lockstep_repeats": self.repeats,
                "lockstep_repeat_causes": dict(self.repeat_causes),
                "frames_ahead": self.frames_ahead,
                "transport": {"sent": self.link.stats.sent,
                              "received": self.link.stats.received,
                              "tx_errors": self.link.stats.tx_errors,
                              "rx_overflow": self.link.stats.rx_overflow,
                              "foreign_dropped": self.link.stats.foreign_dropped,
                              "framing": vars(self.link.stats.framing)},
                "timing": self.stats.summary(),
                "power_quality": self.plant.power_quality() if self.plant.line_side else {}}
