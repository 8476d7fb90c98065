"""The layout of a serial frame with forward error correction, compiled (framing.py
describes it): Reed-Solomon parity of each block of the COBS bytes, sent seven bits a
byte with the top bit set. One call each way, no Python object per byte."""

from __future__ import annotations

import numba as nb
import numpy as np

from .reed_solomon import CODEWORD_MAX, correct_with, generator, parity


@nb.njit(cache=True)
def block_count(n_coded, fec):
    """Blocks of CODEWORD_MAX - fec bytes (the last one shorter) in n_coded bytes."""
    k = CODEWORD_MAX - fec
    return (n_coded + k - 1) // k


@nb.njit(cache=True)
def seven_bit_len(n_bytes):
    """Bytes that carry n_bytes seven bits a byte."""
    return (8 * n_bytes + 6) // 7


@nb.njit(cache=True)
def append_parity(buf, n_coded, fec):
    """Write the parity of buf[:n_coded]'s blocks after them, seven bits a byte with
    the top bit set (buf must have room: n_coded + seven_bit_len(blocks x fec)).
    Returns the frame's length without its delimiter."""
    k = CODEWORD_MAX - fec
    blocks = block_count(n_coded, fec)
    n_groups = seven_bit_len(blocks * fec)
    for g in range(n_groups):
        buf[n_coded + g] = 0x80
    gen = generator(fec)
    par = np.empty(fec, dtype=np.uint8)
    bit = 0
    for b in range(blocks):
        start = b * k
        parity(buf[start:min(start + k, n_coded)], gen, par)
        for i in range(fec):
            for j in range(8):
                if par[i] & (0x80 >> j):
                    buf[n_coded + bit // 7] |= 0x40 >> (bit % 7)
                bit += 1
    return n_coded + n_groups


@nb.njit(cache=True)
def split(n, fec):
    """(COBS bytes, blocks) of a frame of n bytes without its delimiter; (-1, 0) when
    no frame has that length. The frame's length grows with its COBS bytes, so at most
    one block count fits."""
    blocks = 1
    while True:
        n_coded = n - seven_bit_len(blocks * fec)
        if n_coded < 1:
            return -1, 0
        have = block_count(n_coded, fec)
        if have == blocks:
            return n_coded, blocks
        if have < blocks:
            return -1, 0
        blocks += 1


@nb.njit(cache=True)
def mend(frame, fec):
    """Mend a frame's COBS bytes in place (frame: uint8, without its delimiter).

    Returns (COBS bytes, wrong bytes found): the bytes the code mended plus the groups
    of seven whose spare bits (the top bit, the last group's padding) were wrong, so that
    a frame hit anywhere counts; (-1, 0) when its length fits no frame or a block is
    past mending."""
    n_coded, blocks = split(frame.shape[0], fec)
    if n_coded < 0:
        return -1, 0
    k = CODEWORD_MAX - fec
    n_groups = seven_bit_len(blocks * fec)
    wrong = 0
    for g in range(n_groups):
        if frame[n_coded + g] & 0x80 == 0:
            wrong += 1
    pad = 7 * n_groups - 8 * blocks * fec
    if pad and frame[n_coded + n_groups - 1] & ((1 << pad) - 1):
        wrong += 1
    word = np.empty(CODEWORD_MAX, dtype=np.uint8)
    gen = generator(fec)
    for b in range(blocks):
        start = b * k
        size = min(k, n_coded - start)
        word[:size] = frame[start:start + size]
        for i in range(fec):
            v = 0
            for j in range(8):
                bit = (b * fec + i) * 8 + j
                v = (v << 1) | ((frame[n_coded + bit // 7] >> (6 - bit % 7)) & 1)
            word[size + i] = v
        fixed = correct_with(word[:size + fec], gen)
        if fixed < 0:
            return -1, 0
        wrong += fixed
        frame[start:start + size] = word[:size]
    return n_coded, wrong
