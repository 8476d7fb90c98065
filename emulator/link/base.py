"""What every transport offers the rig: non-blocking send, queued receive, counters."""

from __future__ import annotations

import asyncio
from collections import deque
from dataclasses import dataclass, field

from .framing import FramingStats

#: received telegrams kept at most; older ones are dropped (and counted) beyond it
RX_QUEUE_CAP = 256


class LinkError(ValueError):
    """A link URL or option that cannot be used (raised at open, never while running)."""


@dataclass
class LinkStats:
    """Counters of one link endpoint."""

    sent: int = 0
    received: int = 0
    tx_errors: int = 0
    rx_overflow: int = 0
    foreign_dropped: int = 0  # datagrams from an address other than the peer
    framing: FramingStats = field(default_factory=FramingStats)


class Link:
    """Base of the transports: a queue of received payloads and an arrival event."""

    url = ""

    def __init__(self) -> None:
        self.stats = LinkStats()
        self._rx: deque[bytes] = deque()
        self._waiter: asyncio.Future | None = None
        self._damaged = 0  # frames the framing dropped since take_damaged()

    async def open(self) -> None:
        """Acquire the transport's resources (socket, port)."""

    def send(self, payload: bytes) -> None:
        """Send one telegram without blocking; failures are counted, never raised."""
        raise NotImplementedError

    def close(self) -> None:
        """Release the transport's resources."""

    def _deliver(self, payload: bytes) -> None:
        if len(self._rx) >= RX_QUEUE_CAP:
            self._rx.popleft()
            self.stats.rx_overflow += 1
        self._rx.append(payload)
        self.stats.received += 1
        self._wake()

    def _note_damage(self, frames: int) -> None:
        """The framing dropped frames (a serial line's COBS or CRC errors): a waiting
        rig is woken, as by a telegram, so that lockstep can ask again at once."""
        if frames:
            self._damaged += frames
            self._wake()

    def _wake(self) -> None:
        waiter = self._waiter
        if waiter is not None and not waiter.done():
            waiter.set_result(True)

    def take_damaged(self) -> int:
        """Frames dropped for damage since the last call (0 on links without framing)."""
        n, self._damaged = self._damaged, 0
        return n

    def poll(self) -> None:
        """Read what the OS holds for us now, without waiting for the event loop.

        The rig calls this at the start of a frame: a telegram that arrived while the
        clock was spinning towards the deadline is then not a frame late.
        """

    def take(self) -> list[bytes]:
        """All telegrams received since the last call, oldest first."""
        out = list(self._rx)
        self._rx.clear()
        return out

    def take_one(self) -> bytes | None:
        """The oldest telegram waiting, or None."""
        if not self._rx:
            return None
        return self._rx.popleft()

    def pending(self) -> bool:
        """Whether a telegram is waiting."""
        return bool(self._rx)

    async def wait(self, timeout: float | None) -> bool:
        """Wait until a telegram is waiting, or damaged frames were dropped, or timeout
        seconds pass; True unless the time ran out.

        A bare future and a timer handle: cheaper per frame than asyncio.wait_for,
        which wraps the wait in a task.
        """
        if self._rx or self._damaged:
            return True
        loop = asyncio.get_running_loop()
        waiter = self._waiter = loop.create_future()
        timer = (loop.call_later(timeout, _expire, waiter) if timeout is not None else None)
        try:
            await waiter
        finally:
            if timer is not None:
                timer.cancel()
            self._waiter = None
        return bool(self._rx or self._damaged)


def _expire(waiter: asyncio.Future) -> None:
    if not waiter.done():
        waiter.set_result(False)


def host_port(text: str, what: str, url: str) -> tuple[str, int]:
    """Split HOST:PORT, with a message naming the URL on error."""
    host, sep, port = text.rpartition(":")
    if not sep or not host or not port.isdigit() or not 0 <= int(port) <= 65535:
        raise LinkError(f"{url}: {what} must be HOST:PORT, got {text!r}")
    return host.strip("[]"), int(port)
