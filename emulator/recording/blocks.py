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

    Whole-array operations per storage type, not per column: the writer thread holds
    the interpreter for microseconds a block, not milliseconds, so the frame loop it
    shares the process with does not wait for it (DESIGN.md, timing facts); the
    compressor itself runs without the interpreter lock."""
    kinds_arr = np.asarray(kinds)
    scales = np.asarray(scales, dtype=float)
    codes = np.full(len(kinds), "d")
    pieces: list = [b""] * len(kinds)
    every = np.ones(len(kinds), dtype=np.int64) if every is None else np.asarray(every)
    for n in np.unique(every).tolist():
        cols = np.flatnonzero(every == n)
        rows = slice(None) if n == 1 else kept_rows(frame0, block.shape[0], n)
        _encode_group(pieces, codes, cols, block[rows][:, cols], kinds_arr[cols],
                      scales[cols])
    compressor = zstandard.ZstdCompressor(level=LEVEL)
    return "".join(codes.tolist()), compressor.compress(b"".join(pieces))


def _encode_group(pieces: list, codes: np.ndarray, cols: np.ndarray, x: np.ndarray,
                  kinds: np.ndarray, scales: np.ndarray) -> None:
    """Columns of the same row count, by storage kind."""
    rows = x.shape[0]
    done = np.zeros(len(cols), dtype=bool)
    wire = np.flatnonzero((kinds == "wire") | (kinds == "sent"))
    if wire.size:
        v = x[:, wire]
        scale = scales[wire]
        with np.errstate(invalid="ignore", over="ignore"):
            w = np.rint(v * (1.0 / scale))  # as the telegram codec rounds (link/telegram.py)
            ok = np.all(np.abs(w) <= _INT32, axis=0)  # False for NaN and infinity too
            exact = kinds[wire] == "sent"
            exact |= np.all(w * scale == v, axis=0)  # read back as wire x scale
        ok &= exact
        _place(pieces, codes, cols[wire[ok]], "i", w[:, ok], rows)
        done[wire[ok]] = True
    f32 = np.flatnonzero(kinds == "f32")
    if f32.size:
        v = x[:, f32]
        fits = ~np.any(np.abs(v) > _F32_MAX, axis=0)  # finite values past float32 stay f64
        _place(pieces, codes, cols[f32[fits]], "f", v[:, fits], rows)
        done[f32[fits]] = True
    rest = np.flatnonzero(~done)  # float64 columns, and those that did not fit
    _place(pieces, codes, cols[rest], "d", x[:, rest], rows)


def _place(pieces: list, codes: np.ndarray, columns: np.ndarray, code: str,
           values: np.ndarray, rows: int) -> None:
    """Cast values (rows x len(columns)) to the code's type, shuffle each column's bytes,
    and put each column's bytes at its place."""
    if not columns.size:
        return
    item = _ITEM[code]
    cast = np.ascontiguousarray(values.T, dtype=item)  # column by column
    shuffled = cast.view(np.uint8).reshape(len(columns), rows, item.itemsize)
    shuffled = np.ascontiguousarray(shuffled.transpose(0, 2, 1))  # byte k of all rows
    flat = shuffled.reshape(len(columns), -1)  # each row contiguous: a buffer to join
    for n, j in enumerate(columns.tolist()):
        pieces[j] = flat[n]
        codes[j] = code


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
