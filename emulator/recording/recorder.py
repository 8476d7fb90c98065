"""Append-only recordings: chunks with a CRC each, readable up to the last whole chunk.

File layout (our own; all integers little-endian)::

    chunk := b"RRC1" | length (uint32) | crc32 of the payload (uint32) | payload
    payload of the first chunk: msgpack {"meta": {...}, "columns": [...]}
    payload of the others:     msgpack {"frame0": int, "rows": int, "data": float64 bytes}
                            or {"mark": {...}}: something that happened (a fault began,
                            a driver step started), written after the rows before it

CRC-32 is zlib's (the IEEE polynomial; check value 0xCBF43926 over "123456789"). Rows are
buffered and written as a chunk at least every ``flush_s`` of wall time (and whenever the
buffer is full), then handed to the operating system: a run killed with SIGKILL leaves a
file whose chunks up to the last complete one read back intact. The reader stops at the
first truncated or corrupt chunk and says so; it never raises on a damaged tail.
"""

from __future__ import annotations

import struct
import time
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import msgpack
import numpy as np

MAGIC = b"RRC1"
_HEAD = struct.Struct("<4sII")


class RecordingError(ValueError):
    """A file that is not a recording at all (its first chunk is unreadable)."""


class Recorder:
    """Writes rows of floats (one per frame) with a header of metadata and column names."""

    def __init__(self, path: str | Path, columns: list[str], meta: dict[str, Any],
                 chunk_rows: int = 256, flush_s: float = 0.1, exclusive: bool = False) -> None:
        """``exclusive``: create the file or raise FileExistsError, never overwrite one."""
        self.path = Path(path)
        self.columns = list(columns)
        self._fh = self.path.open("xb" if exclusive else "wb")
        self._buf = np.zeros((chunk_rows, len(columns)))
        self._n = 0
        self._frame0 = 0
        self._frames = 0
        self._flush_s = flush_s
        self._last_flush = time.monotonic()
        self._write({"meta": meta, "columns": self.columns})

    def _write(self, obj: dict[str, Any]) -> None:
        payload = msgpack.packb(obj, use_bin_type=True)
        self._fh.write(_HEAD.pack(MAGIC, len(payload), zlib.crc32(payload)) + payload)
        self._fh.flush()  # to the OS: survives a killed process
        self._last_flush = time.monotonic()

    def append(self, row: np.ndarray) -> None:
        """Add one frame's values (as many as there are columns)."""
        self._buf[self._n] = row
        self._n += 1
        self._frames += 1
        if self._n == len(self._buf) or time.monotonic() - self._last_flush >= self._flush_s:
            self.flush()

    def flush(self) -> None:
        """Write the buffered rows as one chunk."""
        if self._n:
            self._write({"frame0": self._frame0, "rows": self._n,
                         "data": self._buf[:self._n].tobytes()})
            self._frame0 += self._n
            self._n = 0

    def mark(self, **what: Any) -> None:
        """Note a moment (e.g. ``label=..., t=...``) in order with the rows."""
        if not self._fh.closed:
            self.flush()
            self._write({"mark": what})

    def close(self) -> None:
        """Flush and close."""
        if not self._fh.closed:
            self.flush()
            self._fh.close()

    def __enter__(self) -> Recorder:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


@dataclass
class Recording:
    """What a recording holds, and how its reading ended."""

    meta: dict[str, Any]
    columns: list[str]
    data: np.ndarray  # frames x columns
    complete: bool  # False: the file ended in a truncated or corrupt chunk
    note: str = ""
    marks: list[dict[str, Any]] = None  # moments noted with Recorder.mark, in order

    def column(self, name: str) -> np.ndarray:
        """One column by name."""
        return self.data[:, self.columns.index(name)]


def read_recording(path: str | Path) -> Recording:
    """Read every intact chunk; stop at the first damaged one."""
    raw = Path(path).read_bytes()
    chunks, pos, note = [], 0, ""
    while pos < len(raw):
        if len(raw) - pos < _HEAD.size:
            note = f"truncated chunk header at byte {pos}"
            break
        magic, length, crc = _HEAD.unpack_from(raw, pos)
        payload = raw[pos + _HEAD.size:pos + _HEAD.size + length]
        if magic != MAGIC:
            note = f"no chunk marker at byte {pos}"
            break
        if len(payload) < length:
            note = f"truncated chunk at byte {pos}"
            break
        if zlib.crc32(payload) != crc:
            note = f"CRC mismatch in the chunk at byte {pos}"
            break
        chunks.append(msgpack.unpackb(payload, raw=False))
        pos += _HEAD.size + length
    if not chunks or "columns" not in chunks[0]:
        raise RecordingError(f"{path}: not a railrig recording ({note or 'empty'})")
    head = chunks[0]
    body = [c for c in chunks[1:] if "data" in c]
    marks = [c["mark"] for c in chunks[1:] if "mark" in c]
    n_cols = len(head["columns"])
    data = (np.concatenate([np.frombuffer(c["data"], dtype=np.float64).reshape(c["rows"],
                                                                            n_cols)
                            for c in body]) if body else np.zeros((0, n_cols)))
    return Recording(head["meta"], head["columns"], data, complete=not note, note=note,
                     marks=marks)


def export_csv(rec: Recording, path: str | Path) -> None:
    """Write the recording as CSV with a header line of column names."""
    np.savetxt(path, rec.data, delimiter=",", header=",".join(rec.columns), comments="",
               fmt="%.9g")


def export_npz(rec: Recording, path: str | Path) -> None:
    """Write the recording as a numpy archive: one array per column, plus the metadata."""
    safe = {name.replace(".", "__"): rec.data[:, i] for i, name in enumerate(rec.columns)}
    np.savez_compressed(path, **safe, meta=np.array(msgpack.packb(rec.meta)))
