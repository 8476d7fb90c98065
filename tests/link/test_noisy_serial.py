"""The noisy cable of the bit-error tests (emulator/bench/noisy_serial.py) is itself
checked: its flips are a binary symmetric channel at the rate asked (binomial bounds),
independent of how the stream is chunked, and its log of spoiled frames agrees with a
frame-by-frame comparison of what went in and what came out."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.bench.noisy_serial import NoisyDirection


def _frames(n: int, seed: int) -> bytes:
    rng = np.random.default_rng(seed)
    out = bytearray()
    for _ in range(n):
        out += bytes(rng.integers(1, 256, int(rng.integers(20, 120)), dtype=np.uint8)) + b"\0"
    return bytes(out)


@settings(max_examples=30, deadline=None)
@given(cuts=st.lists(st.integers(1, 5000), max_size=20), seed=st.integers(0, 1000))
def test_the_flips_do_not_depend_on_the_chunking(cuts, seed) -> None:
    stream = _frames(300, seed)
    whole = NoisyDirection(3e-3, 0.0, 0.0, seed)
    chunked = NoisyDirection(3e-3, 0.0, 0.0, seed)
    edges = sorted({0, len(stream), *[c for c in cuts if c < len(stream)]})
    pieces = b"".join(chunked.carry(stream[a:b]) for a, b in itertools.pairwise(edges))
    assert pieces == whole.carry(stream)
    assert chunked.log == whole.log


def test_the_bit_error_rate_is_the_one_asked_for() -> None:
    # 8e6 bits at 1e-4: 800 flips expected, binomial sd 28; 4 sd either side
    line = NoisyDirection(1e-4, 0.0, 0.0, seed=3)
    data = bytes(1_000_000)
    out = np.frombuffer(line.carry(data), dtype=np.uint8)
    flipped = int(np.unpackbits(out).sum())
    assert flipped == line.log.flipped_bits
    assert abs(flipped - 800) <= 4 * 28


def test_spoiled_frames_are_the_ones_that_differ() -> None:
    # with bit flips only, the stream keeps its length: split what went in at its
    # delimiters and what came out at the same positions; a frame is spoiled when its
    # bytes or either delimiter differ
    stream = _frames(2000, seed=11)
    line = NoisyDirection(1e-3, 0.0, 0.0, seed=5)
    out = line.carry(stream)
    a = np.frombuffer(stream, dtype=np.uint8)
    b = np.frombuffer(out, dtype=np.uint8)
    ends = np.flatnonzero(a == 0)
    starts = np.concatenate([[0], ends[:-1] + 1])
    spoiled = 0
    for s, e in zip(starts, ends, strict=True):
        lo = max(s - 1, 0)  # the delimiter before this frame
        spoiled += not np.array_equal(a[lo:e + 1], b[lo:e + 1])
    assert line.log.frames == 2000
    assert line.log.spoiled == spoiled
    assert 0 < spoiled < 2000


@pytest.mark.parametrize(("ber", "drop", "insert"), [
    (0.0, 1e-3, 0.0), (0.0, 0.0, 1e-3), (1e-3, 1e-3, 1e-3), (0.0, 0.0, 0.02)])
def test_clean_frames_are_the_ones_that_arrive_whole(ber, drop, insert) -> None:
    # lengths change with lost and inserted bytes, so compare by content: split what
    # came out at its 0x00 bytes; an original frame (random, so unique) that appears
    # there whole crossed untouched. The cable's count of clean frames must be that.
    stream = _frames(1500, seed=4)
    line = NoisyDirection(ber, drop, insert, seed=8)
    out = line.carry(stream)
    assert len(out) == len(stream) - line.log.dropped_bytes + line.log.inserted_bytes
    sent = stream.split(b"\0")[:-1]
    received = out.split(b"\0")[:-1]  # after the last 0x00: empty, or an unfinished
    # frame (its delimiter lost), not a frame
    whole = len(set(sent) & set(received))
    assert line.log.frames == 1500
    assert line.log.clean == whole
    assert 0 < line.log.spoiled < 1500
