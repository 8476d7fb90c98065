"""A block of frames stored column by column, each column at the precision it carries,
byte-shuffled and compressed with Zstandard.

Storage kinds, per column:

- ``f64``: float64 as computed (plant time, positions, energies: what must stay exact);
- ``f32``: float32 (plant states: 24 bits of mantissa, a relative step of 6e-8, far
  finer than any model's accuracy);
- ``sent``: the integer a telegram carried, value x (1 / scale) rounded half to even as
  the telegram codec rounds it (measurements: what the controller received); read back
  as wire x scale;
- ``wire``: the same integer where the value is one exactly (commands: the rig applies
  wire x scale; a controller may also send floats, which are kept as they were).

A block in which a ``sent`` or ``wire`` column has a value that is not finite, past
int32, or (``wire``) off the grid stores that column as float64 instead (per block, said
in the block's type string), and so does a block in which a float32 column has a finite
value past float32's range.

Byte shuffle: the k-th bytes of all values of a column are stored together, so the
slowly changing high bytes of neighbouring frames form long runs that the compressor
takes (the filter of HDF5's "shuffle" and Blosc). Measured on the 40 s wet-gradient
start (231 columns): 0.36 MB per second of plant time with Zstandard level 3 alone,
0.24 with the shuffle first (DEVELOPERS.md); Zstandard (RFC 8878) through the
``zstandard`` package.
"""

from __future__ import annotations

import numba as nb
import numpy as np
import zstandard

KINDS = ("f64", "f32", "sent", "wire")
LEVEL = 3
#: per-block type codes: d float64, f float32, i int32 wire units
_ITEM = {"d": np.dtype("<f8"), "f": np.dtype("<f4"), "i": np.dtype("<i4")}
_INT32 = 2**31 - 1
_F32_MAX = float(np.finfo(np.float32).max)


def kept_rows(frame0: int, rows: int, every: int) -> np.ndarray:
    """Which rows of a block starting at frame ``frame0`` a column decimated to every
    ``every``-th frame keeps: the frames whose number is a multiple of it."""
    first = (-frame0) % every
    return np.arange(first, rows, every)


def encode_block(block: np.ndarray, kinds: list[str], scales: np.ndarray,
                 every: np.ndarray | None = None, frame0: int = 0) -> tuple[str, bytes]:
    """Frames x columns (float64) -> (type string, one char per column; compressed
    bytes). ``scales``: the wire scale of each sent or wire column (others unused).
    ``every``: per column, keep every n-th frame only (1: all; frames counted from the
    recording's start, ``frame0`` the block's first).

    The recorder calls this at each block, in its writer thread beside the frame loop
    (real time) or in the frame loop itself (lockstep). The casting and shuffling run
    compiled without the interpreter lock, and so does the compressor: a thread holds
    the lock for a few calls a block. (Whole-array numpy in the thread took and gave back
    the lock at every operation, and the frame loop paid about 40 us a frame for the
    hand-overs, measured on the full-braking scenario: DEVELOPERS.md, Throughput.)"""
    block = np.ascontiguousarray(block, dtype=np.float64)
    if block.ndim != 2 or not block.shape[1] == len(kinds) == len(scales) == (
            len(kinds) if every is None else len(every)):
        raise ValueError("a block needs one kind, scale and decimation per column")
    kind_codes = np.array([_KIND_CODE[k] for k in kinds], dtype=np.int64)
    scales = np.asarray(scales, dtype=np.float64)
    every = (np.ones(len(kinds), dtype=np.int64) if every is None
             else np.asarray(every, dtype=np.int64))
    codes = np.zeros(len(kinds), dtype=np.int64)
    raw = _shuffled_columns(block, kind_codes, scales, every, int(frame0), codes)
    compressor = zstandard.ZstdCompressor(level=LEVEL)
    return "".join(_CODE_CHAR[c] for c in codes.tolist()), compressor.compress(raw)


#: storage kinds and per-block type codes as the compiled encoder numbers them
_KIND_CODE = {k: i for i, k in enumerate(KINDS)}
_F64, _F32, _SENT, _WIRE = range(4)
_CODE_CHAR = ("d", "f", "i")
_CODE_SIZE = np.array([8, 4, 4], dtype=np.int64)


@nb.njit(cache=True, nogil=True)
def _kept_count(rows, every, frame0):
    """How many of a block's rows a column keeping every n-th frame holds (kept_rows)."""
    first = (-frame0) % every
    return 0 if first >= rows else (rows - first + every - 1) // every


@nb.njit(cache=True, nogil=True)
def _column_code(block, j, kind, scale, every, frame0):
    """A column's type in this block: 0 float64, 1 float32, 2 int32 wire units.

    Wire and sent columns: x (1 / scale) rounded half to even (as the telegram codec
    rounds) must be within int32 for every kept frame (NaN and infinity are not), and a
    wire column must read back exactly as that integer x scale; otherwise float64. A
    float32 column with a finite value past float32's range is float64."""
    rows = block.shape[0]
    first = (-frame0) % every
    if kind in (_SENT, _WIRE):
        inv = 1.0 / scale
        for r in range(first, rows, every):
            v = block[r, j]
            w = np.rint(v * inv)
            if not abs(w) <= _INT32:
                return 0
            if kind == _WIRE and w * scale != v:
                return 0
        return 2
    if kind == _F32:
        for r in range(first, rows, every):
            if abs(block[r, j]) > _F32_MAX:
                return 0
        return 1
    return 0


@nb.njit(cache=True, nogil=True)
def _shuffled_columns(block, kinds, scales, every, frame0, codes):
    """The block's bytes: column after column, each its kept frames in its type
    (little-endian, as every platform numba targets here), byte k of all of them
    together (the shuffle); ``codes`` receives each column's type."""
    rows, ncol = block.shape
    total = 0
    for j in range(ncol):
        codes[j] = _column_code(block, j, kinds[j], scales[j], every[j], frame0)
        total += _kept_count(rows, every[j], frame0) * _CODE_SIZE[codes[j]]
    out = np.empty(total, dtype=np.uint8)
    at = 0
    for j in range(ncol):
        n = every[j]
        first = (-frame0) % n
        count = _kept_count(rows, n, frame0)
        code = codes[j]
        if code == 2:
            inv = 1.0 / scales[j]
            cast32 = np.empty(count, dtype=np.int32)
            for c in range(count):
                cast32[c] = np.int32(np.rint(block[first + c * n, j] * inv))
            raw = cast32.view(np.uint8)
        elif code == 1:
            castf = np.empty(count, dtype=np.float32)
            for c in range(count):
                castf[c] = np.float32(block[first + c * n, j])
            raw = castf.view(np.uint8)
        else:
            castd = np.empty(count, dtype=np.float64)
            for c in range(count):
                castd[c] = block[first + c * n, j]
            raw = castd.view(np.uint8)
        size = _CODE_SIZE[code]
        for c in range(count):
            for k in range(size):
                out[at + k * count + c] = raw[c * size + k]
        at += count * size
    return out


def decode_block(codes: str, payload: bytes, rows: int, scales: np.ndarray,
                 every: np.ndarray | None = None, frame0: int = 0,
                 before: np.ndarray | None = None) -> np.ndarray:
    """The inverse of encode_block: frames x columns, float64 (wire x scale for the
    wire columns). A decimated column holds each kept sample until the next (zero-order
    hold); rows before its first kept one hold ``before`` (the previous block's last
    row). Raises ValueError for a block that does not hold what it says."""
    if not isinstance(codes, str) or len(codes) != len(scales) or set(codes) - set(_ITEM):
        raise ValueError("the block's type string does not fit the columns")
    if type(rows) is not int or rows < 0 or not isinstance(payload, bytes):
        raise ValueError("the block's row count or data is not what a block holds")
    every = np.ones(len(codes), dtype=np.int64) if every is None else np.asarray(every)
    counts = [rows if n == 1 else len(kept_rows(frame0, rows, int(n))) for n in every]
    size = sum(c * _ITEM[code].itemsize for c, code in zip(counts, codes, strict=True))
    raw = zstandard.ZstdDecompressor().decompress(payload, max_output_size=max(size, 1))
    if len(raw) != size:
        raise ValueError(f"a block of {len(raw)} bytes where its columns need {size}")
    out = np.empty((rows, len(codes)))
    at = 0
    for j, code in enumerate(codes):
        item, count = _ITEM[code], counts[j]
        n = count * item.itemsize
        col = np.frombuffer(raw[at:at + n], dtype=np.uint8).reshape(item.itemsize, count)
        values = col.T.copy().view(item).reshape(count)
        values = values * scales[j] if code == "i" else values.astype(np.float64)
        at += n
        if every[j] == 1:
            out[:, j] = values
            continue
        kept = kept_rows(frame0, rows, int(every[j]))
        last = np.searchsorted(kept, np.arange(rows), side="right") - 1
        held = np.concatenate([[np.nan if before is None else before[j]], values])
        out[:, j] = held[last + 1]
    return out
