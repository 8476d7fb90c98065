"""Pacing of the frame loop: wall-clock deadlines, and the statistics that keep it honest.

Frame k is due at t0 + k T on the monotonic clock, so sleep error never accumulates.
``asyncio.sleep`` cannot wait less than about 1 ms (the selector rounds its timeout to
whole milliseconds), so on Linux the loop watches a kernel timer (timerfd, absolute
CLOCK_MONOTONIC; Python 3.11 reaches it through ctypes) armed ~150 us before the
deadline, then spins on the monotonic clock for the rest; I/O is served while it waits.
Elsewhere it sleeps to ~1.5 ms before the deadline and spins. A late frame is counted,
never hidden; the policy is to run late frames at once and keep the original schedule
(catch up), so plant time stays k T.

All reading of time goes through a clock object, so tests run on :class:`FakeClock`.
"""

from __future__ import annotations

import asyncio
import bisect
import contextlib
import ctypes
import ctypes.util
import os
import sys
import time
from dataclasses import dataclass

import numpy as np

EARLY_NS = 150_000  # arm the kernel timer this long before the deadline
FALLBACK_EARLY_NS = 1_500_000


class _Timespec(ctypes.Structure):
    _fields_ = [("tv_sec", ctypes.c_long), ("tv_nsec", ctypes.c_long)]


class _Itimerspec(ctypes.Structure):
    _fields_ = [("it_interval", _Timespec), ("it_value", _Timespec)]


class _TimerFd:
    """A CLOCK_MONOTONIC timerfd armed at absolute times (Linux, via ctypes)."""

    CLOCK_MONOTONIC = 1
    TFD_TIMER_ABSTIME = 1
    TFD_NONBLOCK = 0o4000
    TFD_CLOEXEC = 0o2000000

    def __init__(self) -> None:
        libc = ctypes.CDLL(ctypes.util.find_library("c"), use_errno=True)
        self._settime = libc.timerfd_settime
        self._settime.argtypes = [ctypes.c_int, ctypes.c_int, ctypes.POINTER(_Itimerspec),
                                  ctypes.c_void_p]
        fd = libc.timerfd_create(self.CLOCK_MONOTONIC, self.TFD_NONBLOCK | self.TFD_CLOEXEC)
        if fd < 0:
            raise OSError(ctypes.get_errno(), "timerfd_create failed")
        self.fd = fd
        self._spec = _Itimerspec()

    def arm(self, when_ns: int) -> None:
        self._spec.it_value.tv_sec, self._spec.it_value.tv_nsec = divmod(when_ns, 1_000_000_000)
        if self._settime(self.fd, self.TFD_TIMER_ABSTIME, ctypes.byref(self._spec), None) < 0:
            raise OSError(ctypes.get_errno(), "timerfd_settime failed")

    def clear(self) -> None:
        with contextlib.suppress(BlockingIOError):
            os.read(self.fd, 8)

    def close(self) -> None:
        os.close(self.fd)


class MonotonicClock:
    """The real clock: CLOCK_MONOTONIC, with precise waits."""

    def __init__(self, use_timerfd: bool | None = None, spin_ns: int = EARLY_NS) -> None:
        """spin_ns: how long before each deadline to stop sleeping and spin.

        150 us suits a bare-metal Linux box; a virtual machine whose idle vCPU wakes late
        (seen here: p99 0.7-1 ms) needs a spin as long as the period for a tight p99, at
        the cost of a whole core.
        """
        if spin_ns < 0:
            raise ValueError(f"spin must be >= 0 ns, got {spin_ns}")
        self.spin_ns = spin_ns
        if use_timerfd is None:
            use_timerfd = sys.platform.startswith("linux")
        self._timer: _TimerFd | None = None
        if use_timerfd:
            try:
                self._timer = _TimerFd()
            except (OSError, AttributeError):
                self._timer = None
        self._waiter: asyncio.Future | None = None

    @property
    def method(self) -> str:
        """How waits are made: 'timerfd+spin' or 'sleep+spin'."""
        return "timerfd+spin" if self._timer else "sleep+spin"

    #: monotonic time, ns: time.monotonic_ns itself (the frame loop asks twice a frame)
    now_ns = staticmethod(time.monotonic_ns)

    async def sleep_until(self, deadline_ns: int) -> None:
        """Return as close after deadline_ns as possible, serving I/O while waiting."""
        now = time.monotonic_ns()
        if self._timer is not None:
            if deadline_ns - now > self.spin_ns:
                loop = asyncio.get_running_loop()
                self._waiter = loop.create_future()
                loop.add_reader(self._timer.fd, self._on_timer)
                self._timer.arm(deadline_ns - self.spin_ns)
                try:
                    await self._waiter
                finally:
                    loop.remove_reader(self._timer.fd)
                    self._timer.clear()
            else:
                await asyncio.sleep(0)  # behind: still let I/O (the monitor) in once
        elif deadline_ns - now > max(FALLBACK_EARLY_NS, self.spin_ns):
            await asyncio.sleep((deadline_ns - now - max(FALLBACK_EARLY_NS, self.spin_ns)) / 1e9)
        else:
            await asyncio.sleep(0)  # let I/O in even when there is no time to sleep
        while time.monotonic_ns() < deadline_ns:
            if self.spin_ns > EARLY_NS and deadline_ns - time.monotonic_ns() > EARLY_NS:
                await asyncio.sleep(0)  # a long spin still serves I/O between polls

    def _on_timer(self) -> None:
        if self._waiter is not None and not self._waiter.done():
            self._waiter.set_result(None)

    def close(self) -> None:
        """Release the kernel timer."""
        if self._timer is not None:
            self._timer.close()
            self._timer = None


class FakeClock:
    """A clock that jumps to every deadline at once (tests; as-fast-as-possible runs)."""

    method = "fake"

    def __init__(self, start_ns: int = 0) -> None:
        self.t_ns = start_ns

    def now_ns(self) -> int:
        """The fake time, ns."""
        return self.t_ns

    def advance(self, ns: int) -> None:
        """Move the fake time on (a test's way of making a frame late)."""
        self.t_ns += ns

    async def sleep_until(self, deadline_ns: int) -> None:
        """Jump to the deadline (if it is ahead) and yield to the loop once."""
        self.t_ns = max(self.t_ns, deadline_ns)
        await asyncio.sleep(0)

    def close(self) -> None:
        """Nothing to release."""


#: upper edges of the lateness histogram bins, us (the last bin is open)
LATENESS_BINS_US = (1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000)


@dataclass
class FrameStats:
    """Timing of the frame loop, in preallocated rings (no per-frame growth)."""

    capacity: int = 1 << 16

    def __post_init__(self) -> None:
        self.lateness_us = np.zeros(self.capacity, dtype=np.float32)
        self.compute_us = np.zeros(self.capacity, dtype=np.float32)
        # record() stores through these: a float into a float32 item, as numpy rounds it,
        # at a third of the cost of numpy's item assignment
        self._lateness_items = memoryview(self.lateness_us)
        self._compute_items = memoryview(self.compute_us)
        self._bins = np.zeros(len(LATENESS_BINS_US) + 1, dtype=np.int64)
        self._on_time = 0  # frames not late, not yet in _bins[0] (record)
        self.frames = 0
        self.late_frames = 0  # started more than one period after their deadline
        self.max_lateness_us = 0.0
        self._cpu0 = time.process_time_ns()
        self._wall0 = time.monotonic_ns()

    def record(self, lateness_ns: int, compute_ns: int, period_ns: int) -> None:
        """Add one frame's start lateness and compute time."""
        i = self.frames % self.capacity
        self._compute_items[i] = compute_ns / 1e3
        self.frames += 1
        if lateness_ns <= 0:  # (lockstep and afap: always)
            self._lateness_items[i] = 0.0
            self._on_time += 1  # the first bin's, added to it when read
            return
        late_us = lateness_ns / 1e3
        self._lateness_items[i] = late_us
        self._bins[bisect.bisect_left(LATENESS_BINS_US, late_us)] += 1
        if lateness_ns > period_ns:
            self.late_frames += 1
        self.max_lateness_us = max(self.max_lateness_us, late_us)

    @property
    def histogram(self) -> np.ndarray:
        """Frames by start lateness, in the bins LATENESS_BINS_US (the last open)."""
        self._bins[0] += self._on_time
        self._on_time = 0
        return self._bins

    def restart_cpu_window(self) -> None:
        """Start measuring the CPU share from now (after warm-up)."""
        self._cpu0 = time.process_time_ns()
        self._wall0 = time.monotonic_ns()

    def summary(self) -> dict[str, float]:
        """Median/p99/max lateness, late share, compute time, CPU share of one core."""
        n = min(self.frames, self.capacity)
        late = self.lateness_us[:n] if n else np.zeros(1, dtype=np.float32)
        comp = self.compute_us[:n] if n else np.zeros(1, dtype=np.float32)
        wall = max(time.monotonic_ns() - self._wall0, 1)
        return {
            "frames": self.frames,
            "lateness_us_median": float(np.median(late)),
            "lateness_us_p99": float(np.percentile(late, 99)),
            "lateness_us_max": float(self.max_lateness_us),
            "late_frames": self.late_frames,
            "late_frame_share": self.late_frames / max(self.frames, 1),
            "compute_us_median": float(np.median(comp)),
            "compute_us_p99": float(np.percentile(comp, 99)),
            "cpu_share": (time.process_time_ns() - self._cpu0) / wall,
            "lateness_histogram_us": {
                (f"<={edge}" if i < len(LATENESS_BINS_US) else f">{LATENESS_BINS_US[-1]}"): int(c)
                for i, (edge, c) in enumerate(zip((*LATENESS_BINS_US, LATENESS_BINS_US[-1]),
                                                  self.histogram, strict=True))},
        }
