"""A block of frames stored column by column, each column at the precision it carries,
byte-shuffled and compressed with Zstandard.

Storage kinds, per column:

- ``f64``: float64 as computed (plant time, positions, energies: what must stay exact);
- ``f32``: float32 (plant states: 24 bits of mantissa, a relative step of 6e-8, far
  finer than any model's accuracy);
- ``wire``: the integer a telegram carries, value / scale rounded (measurements and
  commands: what crossed the link, exactly); read back as wire x scale. A block in which
  such a column has a value that is not finite or past int32 stores that column as
  float64 instead (per block, said in the block's type string), and so does a block in
  which a float32 column has a finite value past float32's range.

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

KINDS = ("f64", "f32", "wire")
LEVEL = 3
#: per-block type codes: d float64, f float32, i int32 wire units
_ITEM = {"d": np.dtype("<f8"), "f": np.dtype("<f4"), "i": np.dtype("<i4")}
_INT32 = 2**31 - 1
_F32_MAX = float(np.finfo(np.float32).max)


def encode_block(block: np.ndarray, kinds: list[str], inv_scales: np.ndarray) -> tuple[str, bytes]:
    """Frames x columns (float64) -> (type string, one char per column; compressed
    bytes). ``inv_scales``: 1 / scale of each wire column (others unused)."""
    codes = []
    parts = []
    for j, kind in enumerate(kinds):
        x = block[:, j]
        if kind == "wire":
            w = np.rint(x * inv_scales[j])
            if np.all(np.abs(w) <= _INT32):  # False for NaN and infinity too
                codes.append("i")
                parts.append(_shuffle(w.astype("<i4")))
                continue
            kind = "f64"
        elif kind == "f32" and np.any(np.abs(x) > _F32_MAX):  # finite, past float32
            kind = "f64"
        code = "d" if kind == "f64" else "f"
        codes.append(code)
        parts.append(_shuffle(x.astype(_ITEM[code])))
    compressor = zstandard.ZstdCompressor(level=LEVEL)
    return "".join(codes), compressor.compress(b"".join(parts))


def decode_block(codes: str, payload: bytes, rows: int, scales: np.ndarray) -> np.ndarray:
    """The inverse of encode_block: frames x columns, float64 (wire x scale for the
    wire columns)."""
    raw = zstandard.ZstdDecompressor().decompress(payload)
    out = np.empty((rows, len(codes)))
    at = 0
    for j, code in enumerate(codes):
        item = _ITEM[code]
        n = rows * item.itemsize
        col = np.frombuffer(raw[at:at + n], dtype=np.uint8).reshape(item.itemsize, rows)
        values = col.T.copy().view(item).reshape(rows)
        out[:, j] = values * scales[j] if code == "i" else values
        at += n
    if at != len(raw):
        raise ValueError(f"a block of {len(raw)} bytes holds {at} for its columns")
    return out


def _shuffle(a: np.ndarray) -> bytes:
    """The values' bytes grouped by byte position (all first bytes, then all second)."""
    return a.view(np.uint8).reshape(len(a), a.itemsize).T.tobytes()
