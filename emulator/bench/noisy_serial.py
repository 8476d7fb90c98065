"""A noisy serial cable between two pseudo-terminals: bit errors at a seeded rate, and
optionally lost and inserted bytes, with a log of which frames it spoiled.

Run as a process of its own (so that it shares no interpreter with the rig or the
board)::

    python -m emulator.bench.noisy_serial --ber 1e-4 --seed 1 --report line.json

It prints ``rig=/dev/pts/A board=/dev/pts/B`` on its first line, then copies bytes both
ways until its standard input closes or it gets SIGTERM, and writes the report.

Bit errors are independent, with probability ``ber`` per bit (a binary symmetric
channel): the gap to the next flipped bit is drawn from a geometric distribution, so the
flips depend only on the position in each direction's byte stream, not on how the bytes
were chunked by the reads, and the relay does work only where a flip lands. Lost and
inserted bytes are drawn the same way per byte.

The log counts, per direction, the frames as the sender wrote them (0x00-delimited) and
the ones the line spoiled: a frame is spoiled when any of its bytes or the delimiter
before or after it was touched (a flipped delimiter merges two frames; a byte flipped to
0x00 splits one). A receiver with a sound CRC accepts exactly the unspoiled ones: the
tests compare these counts with the rig's and the board's.
"""

from __future__ import annotations

import argparse
import json
import os
import select
import signal
import sys
import tty
from dataclasses import asdict, dataclass

import numpy as np


@dataclass
class DirectionLog:
    """What one direction of the line did."""

    bytes: int = 0
    frames: int = 0  # complete frames (delimiters) the sender wrote
    spoiled: int = 0  # of those, frames the line touched
    flipped_bits: int = 0
    dropped_bytes: int = 0
    inserted_bytes: int = 0

    @property
    def clean(self) -> int:
        """Complete frames that crossed untouched."""
        return self.frames - self.spoiled


class NoisyDirection:
    """One direction of the cable: ``carry(data) -> bytes`` with the errors applied."""

    def __init__(self, ber: float, drop: float, insert: float, seed: int) -> None:
        for name, p in (("ber", ber), ("drop", drop), ("insert", insert)):
            if not 0.0 <= p < 1.0:
                raise ValueError(f"{name} must be within 0 .. 1, got {p!r}")
        self.rng = np.random.default_rng(seed)
        self.ber, self.drop, self.insert = ber, drop, insert
        self.log = DirectionLog()
        self._next_flip = self._gap(ber) - 1  # bit index in the stream, from 0
        self._next_drop = self._gap(drop) - 1  # byte index
        self._next_insert = self._gap(insert) - 1
        self._frame_touched = False  # the frame now being written was touched

    def _gap(self, p: float) -> int:
        return int(self.rng.geometric(p)) if p > 0 else 1 << 62

    def carry(self, data: bytes) -> bytes:
        """The bytes that come out of the line for ``data`` put in."""
        start = self.log.bytes
        arr = np.frombuffer(data, dtype=np.uint8).copy()
        end = start + len(arr)
        touched: list[float] = []  # stream positions of touched bytes (an insertion
        # before byte p at p - 0.5: it spoils the frame of byte p, never its delimiter)
        while self._next_flip < 8 * end:
            pos = self._next_flip // 8
            arr[pos - start] ^= np.uint8(1 << (7 - self._next_flip % 8))
            touched.append(pos)
            self.log.flipped_bits += 1
            self._next_flip += self._gap(self.ber)
        keep = np.ones(len(arr), dtype=bool)
        while self._next_drop < end:
            keep[self._next_drop - start] = False
            touched.append(self._next_drop)
            self.log.dropped_bytes += 1
            self._next_drop += self._gap(self.drop)
        inserts: list[tuple[int, int]] = []
        while self._next_insert < end:
            inserts.append((self._next_insert - start, int(self.rng.integers(0, 256))))
            touched.append(self._next_insert - 0.5)
            self.log.inserted_bytes += 1
            self._next_insert += self._gap(self.insert)
        self._count_frames(np.frombuffer(data, dtype=np.uint8), start, sorted(touched))
        self.log.bytes = end
        out = arr[keep] if not keep.all() else arr
        if inserts:
            out = np.insert(arr, [i for i, _ in inserts], [b for _, b in inserts])[
                np.insert(keep, [i for i, _ in inserts], True)]
        return out.tobytes()

    def _count_frames(self, original: np.ndarray, start: int, touched: list[float]) -> None:
        """Frames completed by this chunk, and which of them were touched (the frame of
        a touched delimiter and the frame after it both count as spoiled)."""
        ends = np.flatnonzero(original == 0) + start  # delimiter positions in the stream
        t = 0
        for end in ends:
            while t < len(touched) and touched[t] < end:
                self._frame_touched = True
                t += 1
            delimiter_hit = bool(t < len(touched) and touched[t] == end)
            if delimiter_hit:
                t += 1
            self.log.frames += 1
            self.log.spoiled += int(self._frame_touched or delimiter_hit)
            self._frame_touched = delimiter_hit  # the next frame merges with this one
        if t < len(touched):  # touched bytes of a frame not finished yet
            self._frame_touched = True


def _raw_pty() -> tuple[int, int]:
    master, slave = os.openpty()
    tty.setraw(master)
    tty.setraw(slave)
    return master, slave


def relay(ber: float, drop: float, insert: float, seed: int, report: str | None) -> None:
    """Open the two ptys, say their names, copy until stdin closes or SIGTERM."""
    (m_rig, s_rig), (m_board, s_board) = _raw_pty(), _raw_pty()
    to_board = NoisyDirection(ber, drop, insert, seed)
    to_rig = NoisyDirection(ber, drop, insert, seed + 1)
    print(f"rig={os.ttyname(s_rig)} board={os.ttyname(s_board)}", flush=True)
    stop = False

    def on_term(*_) -> None:
        nonlocal stop
        stop = True
    signal.signal(signal.SIGTERM, on_term)
    stdin = sys.stdin.fileno()
    try:
        while not stop:
            ready, _, _ = select.select([m_rig, m_board, stdin], [], [], 0.2)
            if stdin in ready and not os.read(stdin, 4096):
                break  # the parent closed our input: done
            for fd, other, line in ((m_rig, m_board, to_board), (m_board, m_rig, to_rig)):
                if fd in ready:
                    try:
                        data = os.read(fd, 65536)
                    except OSError:  # the other side closed its end
                        continue
                    out = line.carry(data)
                    while out:
                        out = out[os.write(other, out):]
    finally:
        if report:
            with open(report, "w", encoding="utf-8") as f:
                json.dump({"ber": ber, "drop": drop, "insert": insert, "seed": seed,
                           "to_board": {**asdict(to_board.log), "clean": to_board.log.clean},
                           "to_rig": {**asdict(to_rig.log), "clean": to_rig.log.clean}}, f)
        for fd in (m_rig, s_rig, m_board, s_board):
            os.close(fd)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(prog="python -m emulator.bench.noisy_serial",
                                     description=__doc__.split("\n\n")[0])
    parser.add_argument("--ber", type=float, default=0.0, help="bit error rate")
    parser.add_argument("--drop", type=float, default=0.0, help="lost bytes, per byte")
    parser.add_argument("--insert", type=float, default=0.0,
                        help="inserted random bytes, per byte")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--report", default=None, help="JSON log written at the end")
    args = parser.parse_args(argv)
    relay(args.ber, args.drop, args.insert, args.seed, args.report)


if __name__ == "__main__":
    main()
