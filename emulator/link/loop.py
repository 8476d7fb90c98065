"""In-memory link: two endpoints of a named channel, with a manipulator on each direction.

``loop://NAME`` opened twice gives the two ends of one channel (the rig and an
in-process controller). Each endpoint's outgoing direction passes a
:class:`Manipulator` that can drop, delay, duplicate, reorder or corrupt telegrams,
deterministically from a seed: used by tests and by link fault injection alike.
"""

from __future__ import annotations

import random
from collections import deque
from dataclasses import dataclass
from urllib.parse import SplitResult

from .base import Link, LinkError

_channels: dict[str, list[LoopLink]] = {}
_SETTINGS = ("drop", "duplicate", "reorder", "corrupt", "delay")  # (Manipulator.idle)


@dataclass
class Manipulator:
    """What happens to telegrams on their way; probabilities per telegram.

    Attributes:
        drop: probability a telegram is lost.
        duplicate: probability it arrives twice.
        reorder: probability it is held back and delivered after the next one.
        corrupt: probability one of its bytes is flipped.
        delay: every telegram is held back until this many later ones were sent.
        seed: of the generator that draws the events.
    """

    drop: float = 0.0
    duplicate: float = 0.0
    reorder: float = 0.0
    corrupt: float = 0.0
    delay: int = 0
    seed: int = 0

    def __post_init__(self) -> None:
        for name in ("drop", "duplicate", "reorder", "corrupt"):
            p = getattr(self, name)
            if not 0.0 <= p <= 1.0:
                raise LinkError(f"manipulator {name} must be a probability, got {p!r}")
        if self.delay < 0:
            raise LinkError(f"manipulator delay must be >= 0 telegrams, got {self.delay}")
        self._rng = random.Random(self.seed)
        self._delayed: deque[bytes] = deque()
        self._held: bytes | None = None
        self.counts = {"dropped": 0, "duplicated": 0, "reordered": 0, "corrupted": 0}

    def __setattr__(self, name: str, value) -> None:
        """Keep ``idle`` (no manipulation configured: telegrams pass untouched) up to
        date with the settings, so that a send reads one attribute."""
        object.__setattr__(self, name, value)
        if name in _SETTINGS:
            object.__setattr__(self, "idle", not any(getattr(self, s, 0) for s in _SETTINGS))

    def apply(self, payload: bytes) -> list[bytes]:
        """The telegrams that arrive now because payload was sent."""
        rng = self._rng
        if self.drop and rng.random() < self.drop:
            self.counts["dropped"] += 1
            return []
        if self.corrupt and payload and rng.random() < self.corrupt:
            data = bytearray(payload)
            data[rng.randrange(len(data))] ^= 1 << rng.randrange(8)
            payload = bytes(data)
            self.counts["corrupted"] += 1
        out = [payload]
        if self.duplicate and rng.random() < self.duplicate:
            out.append(payload)
            self.counts["duplicated"] += 1
        if self._held is not None:
            out.append(self._held)
            self._held = None
        elif self.reorder and rng.random() < self.reorder:
            self._held = out.pop(0)
            self.counts["reordered"] += 1
        if self.delay:
            self._delayed.extend(out)
            out = []
            while len(self._delayed) > self.delay:
                out.append(self._delayed.popleft())
        return out


class LoopLink(Link):
    """One end of an in-memory channel named by the URL's host part."""

    def __init__(self, parts: SplitResult, query: dict[str, str], *,
                 allow_remote: bool = False) -> None:
        super().__init__()
        if query:
            raise LinkError(f"{parts.geturl()}: loop links take no options")
        self.name = parts.netloc or "default"
        self.manipulator = Manipulator()
        self.peer: LoopLink | None = None

    async def open(self) -> None:
        await super().open()
        ends = _channels.setdefault(self.name, [])
        ends[:] = [end for end in ends if end.peer is None and end is not self]
        if ends:
            other = ends.pop()
            self.peer, other.peer = other, self
        else:
            ends.append(self)

    def send(self, payload: bytes) -> None:
        if self.peer is None:
            self.stats.tx_errors += 1  # nobody at the other end yet
            return
        self.stats.sent += 1
        if self.manipulator.idle:
            self.peer._deliver(payload)
            return
        for item in self.manipulator.apply(payload):
            self.peer._deliver(item)

    def close(self) -> None:
        if self.peer is not None:
            self.peer.peer = None
            self.peer = None
        ends = _channels.get(self.name, [])
        if self in ends:
            ends.remove(self)
