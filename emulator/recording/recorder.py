"""Append-only recordings: chunks with a CRC each, readable up to the last whole chunk.

File layout (our own; all integers little-endian)::

    chunk := magic (4 bytes) | length (uint32) | crc32 of the payload (uint32) | payload

Format 2 (magic ``RRC2``, written now):

    first chunk: msgpack {"format": 2, "meta": {...}, "columns": [...], "kinds": [...],
                 "scales": [...], "units": [...]}  (kinds and the block encoding:
                 blocks.py; a scale is used by "wire" columns only)
    then:        msgpack {"frame0": int, "rows": int, "types": str, "z": bytes}: a block
                 of frames, column by column, compressed (blocks.py)
              or {"mark": {...}}: something that happened (a fault began, a driver step
                 started), written after the rows before it

Format 1 (magic ``RRC1``, read only): the same envelope; rows as float64 bytes row by row
(``{"frame0", "rows", "data"}``) after a first chunk ``{"meta", "columns"}``.

CRC-32 is zlib's (the IEEE polynomial; check value 0xCBF43926 over "123456789"). Rows are
buffered and written as a block at least every ``flush_s`` of wall time (and whenever
the buffer is full), compressed and handed to the operating system. In real time a
writer thread does that, so the frame loop never compresses; without deadlines (lockstep,
as fast as possible) the frame loop writes its blocks itself (``background=False``): the
thread would take the interpreter's lock back from the frame loop a few times a block,
and on a shared virtual machine a hand-over can cost milliseconds (measured: about
40 us a frame on the full-braking scenario, against 4.6 us a frame for writing inline).
A run killed with SIGKILL leaves a file whose chunks up to the last complete one read
back intact (losing at most ``flush_s`` and the block being compressed). The reader
stops at the first truncated or corrupt chunk and says so; it never raises on a damaged
tail.
"""

from __future__ import annotations

import atexit
import contextlib
import hashlib
import queue
import struct
import threading
import time
import weakref
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import msgpack
import numpy as np

from .blocks import KINDS, decode_block, encode_block

MAGIC = b"RRC2"
MAGIC_V1 = b"RRC1"
FORMAT = 2
_HEAD = struct.Struct("<4sII")


#: blocks waiting for the writer at most (about 25 s of frames in real time)
QUEUE_BLOCKS = 256
_OPEN: weakref.WeakSet = weakref.WeakSet()


@atexit.register
def _close_open_recorders() -> None:
    """A recording not closed when the interpreter exits (an exception past the
    caller, Ctrl-C) still gets its buffered rows written."""
    for recorder in list(_OPEN):
        with contextlib.suppress(Exception):
            recorder.close()


def _plain(value: Any) -> Any:
    """numpy scalars and arrays as Python numbers and lists, for msgpack."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"a mark cannot hold {type(value).__name__} values")


class RecordingError(ValueError):
    """A file that is not a recording at all (its first chunk is unreadable), or one of
    a format this version cannot read."""


class Recorder:
    """Writes rows of floats (one per frame) with a header of metadata and column names.

    Args:
        kinds: per column, how it is stored ("f64", "f32", "wire"; blocks.py); float64
            for every column by default.
        scales: per column, the wire scale of "wire" columns (physical = wire x scale).
        units: per column, its unit (for readers and the MDF export).
        every: per column, keep every n-th frame only (1, the default: every frame); a
            reader holds each kept sample until the next (slow signals: temperatures).
        chunk_rows: frames in a block at most.
        flush_s: a block is written at least this often (wall time).
        exclusive: create the file or raise FileExistsError, never overwrite one.
        background: compress and write in a thread of its own (runs with deadlines);
            False: in the caller's thread at each flush (lockstep: see the module's
            docstring).
    """

    def __init__(self, path: str | Path, columns: list[str], meta: dict[str, Any],
                 chunk_rows: int = 1024, flush_s: float = 0.1, exclusive: bool = False,
                 kinds: list[str] | None = None, scales: list[float] | None = None,
                 units: list[str] | None = None, every: list[int] | None = None,
                 background: bool = True) -> None:
        self.path = Path(path)
        self.columns = list(columns)
        n = len(self.columns)
        self.kinds = list(kinds) if kinds is not None else ["f64"] * n
        self.scales = np.array(scales if scales is not None else [1.0] * n, dtype=float)
        self.units = list(units) if units is not None else [""] * n
        self.every = np.array(every if every is not None else [1] * n, dtype=np.int64)
        if not len(self.kinds) == len(self.scales) == len(self.units) == len(self.every) == n:
            raise ValueError("kinds, scales, units and every need one entry per column")
        if np.any(self.every < 1):
            raise ValueError("a column keeps every n-th frame, n >= 1")
        if set(self.kinds) - set(KINDS):
            raise ValueError(f"storage kinds are {', '.join(KINDS)}")
        wire = np.array([k in ("wire", "sent") for k in self.kinds], dtype=bool)
        if np.any(self.scales[wire] <= 0):
            raise ValueError("a wire column needs a positive scale")
        self._fh = self.path.open("xb" if exclusive else "wb")
        self._buf = np.zeros((chunk_rows, n))
        self._n = 0
        self._frame0 = 0
        self._flush_s = flush_s
        self._last_flush = time.monotonic()
        self._write({"format": FORMAT, "meta": meta, "columns": self.columns,
                     "kinds": self.kinds, "scales": self.scales.tolist(),
                     "units": self.units, "every": self.every.tolist()})
        # bounded: a writer that falls behind (a stalled disk) holds the frame loop
        # rather than letting the unwritten backlog grow without end
        self._queue: queue.Queue = queue.Queue(maxsize=QUEUE_BLOCKS)
        self._spare: list[np.ndarray] = []
        self.error: BaseException | None = None
        # compile or load the block encoder now, not at the first flush (in real time a
        # first flush compiling with an empty numba cache made hundreds of frames late)
        encode_block(np.zeros((1, n)), self.kinds, self.scales, self.every)
        self._writer = None
        if background:
            self._writer = threading.Thread(target=self._write_blocks,
                                            name="railrig-recorder", daemon=True)
            self._writer.start()
        _OPEN.add(self)  # closed at interpreter exit if nobody did (atexit below)

    def _write(self, obj: dict[str, Any]) -> None:
        payload = msgpack.packb(obj, use_bin_type=True)
        self._fh.write(_HEAD.pack(MAGIC, len(payload), zlib.crc32(payload)) + payload)
        self._fh.flush()  # to the OS: survives a killed process

    def _write_blocks(self) -> None:
        """The writer thread: compress and write what the frame loop handed over."""
        while True:
            item = self._queue.get()
            if item is None:
                return
            self._write_item(item)

    def _write_item(self, item) -> None:
        """Write a mark or a block (frame0, buffer, rows); the buffer goes back to the
        spares."""
        try:
            if isinstance(item, dict):
                self._write({"mark": item})
                return
            frame0, buf, rows = item
            types, z = encode_block(buf[:rows], self.kinds, self.scales, self.every,
                                    frame0)
            self._write({"frame0": frame0, "rows": rows, "types": types, "z": z})
            self._spare.append(buf)  # back to the frame loop (list ops are atomic)
        except Exception as exc:  # a full disk: kept, reported at the next flush
            self.error = self.error or exc

    def _hand_over(self, item) -> None:
        if self._writer is None:
            self._write_item(item)
        else:
            self._queue.put(item)

    def append(self, row: np.ndarray) -> None:
        """Add one frame's values (as many as there are columns)."""
        self._buf[self._n] = row
        self._n += 1
        if self._n == len(self._buf) or time.monotonic() - self._last_flush >= self._flush_s:
            self.flush()

    def tick(self) -> None:
        """Hand over buffered rows that are due (call while no frames come: a silent
        controller in lockstep, a paused run), so that they reach the disk in time."""
        if self._n and time.monotonic() - self._last_flush >= self._flush_s:
            self.flush()

    def flush(self) -> None:
        """Hand the buffered rows to the writer as one block."""
        if self.error is not None:
            raise OSError(f"{self.path}: the recording could not be written: "
                          f"{self.error}") from self.error
        self._last_flush = time.monotonic()
        if self._n:
            # the block leaves the buffer before it is written: a write interrupted
            # (Ctrl-C inline) never leaves its rows to be written a second time
            block = (self._frame0, self._buf, self._n)
            self._frame0 += self._n
            self._n = 0
            self._buf = self._spare.pop() if self._spare else np.zeros_like(self._buf)
            self._hand_over(block)
            if self._writer is None and self.error is not None:  # written here: say so now
                raise OSError(f"{self.path}: the recording could not be written: "
                              f"{self.error}") from self.error

    def mark(self, **what: Any) -> None:
        """Note a moment (e.g. ``label=..., t=...``) in order with the rows; a value
        msgpack cannot hold raises TypeError here (numpy scalars are taken as numbers)."""
        if not self._fh.closed:
            plain = msgpack.unpackb(msgpack.packb(what, default=_plain, use_bin_type=True),
                                    raw=False)
            self.flush()
            self._hand_over(plain)

    def close(self) -> None:
        """Flush, let the writer finish, and close."""
        if not self._fh.closed:
            with contextlib.suppress(OSError):  # said below, once the writer has stopped
                self.flush()
            if self._writer is not None:
                self._queue.put(None)
                self._writer.join()
            self._fh.close()
            _OPEN.discard(self)
            if self.error is not None:
                raise OSError(f"{self.path}: the recording could not be written: "
                              f"{self.error}") from self.error

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
    kinds: list[str] | None = None  # how each column was stored (blocks.py)
    units: list[str] | None = None
    format: int = FORMAT
    scales: list[float] | None = None  # the wire scale of sent and wire columns
    every: list[int] | None = None  # each column kept every n-th frame (held between)

    def select(self, patterns: list[str] | None = None, from_s: float | None = None,
               to_s: float | None = None) -> Recording:
        """The columns a channel spec keeps (set names and globs, channels.py; time_s
        always kept; ChannelError for an item that is nothing) within a time span."""
        from .channels import select_channels

        keep = select_channels(self.columns, patterns) if patterns else list(
            range(len(self.columns)))
        rows = np.ones(len(self.data), dtype=bool)
        if "time_s" in self.columns:
            t = self.column("time_s")
            if from_s is not None:
                rows &= t >= from_s
            if to_s is not None:
                rows &= t <= to_s

        def pick(xs: list | None) -> list | None:
            return None if xs is None else [xs[i] for i in keep]
        return Recording(self.meta, pick(self.columns), self.data[np.ix_(rows, keep)],
                         self.complete, self.note,
                         [m for m in (self.marks or []) if _within(m, from_s, to_s)],
                         pick(self.kinds), pick(self.units), self.format, pick(self.scales),
                         pick(self.every))

    def column(self, name: str) -> np.ndarray:
        """One column by name."""
        return self.data[:, self.columns.index(name)]

    def frames_digest(self) -> str:
        """SHA-256 of the column names and the frames as read back (float64, row by
        row): two runs with the same digest recorded the same values bit for bit, whatever
        their file names, paths and metadata."""
        h = hashlib.sha256("\n".join(self.columns).encode())
        h.update(np.ascontiguousarray(self.data, dtype="<f8").tobytes())
        return h.hexdigest()


def read_recording(path: str | Path) -> Recording:
    """Read every intact chunk of a recording of format 1 or 2; stop at the first
    damaged one (and say so in ``note``)."""
    raw = Path(path).read_bytes()
    magic = raw[:4]
    if magic not in (MAGIC, MAGIC_V1):
        if raw[:3] == b"RRC" and raw[3:4].isdigit():
            raise RecordingError(f"{path}: a railrig recording of format {raw[3:4].decode()}, "
                                 f"which this version (reads 1 and {FORMAT}) cannot read")
        raise RecordingError(f"{path}: not a railrig recording")
    chunks, pos, note = [], 0, ""
    while pos < len(raw):
        if len(raw) - pos < _HEAD.size:
            note = f"truncated chunk header at byte {pos}"
            break
        found, length, crc = _HEAD.unpack_from(raw, pos)
        payload = raw[pos + _HEAD.size:pos + _HEAD.size + length]
        if found != magic:
            note = f"no chunk marker at byte {pos}"
            break
        if len(payload) < length:
            note = f"truncated chunk at byte {pos}"
            break
        if zlib.crc32(payload) != crc:
            note = f"CRC mismatch in the chunk at byte {pos}"
            break
        try:
            chunks.append(msgpack.unpackb(payload, raw=False))
        except Exception:  # a CRC-valid chunk that is not msgpack: written by no railrig
            note = f"unreadable chunk at byte {pos}"
            break
        pos += _HEAD.size + length
    head = _header(path, chunks, magic, note)
    columns, n = head["columns"], len(head["columns"])
    scales = np.array(head["scales"], dtype=float)
    every = np.array(head["every"], dtype=np.int64)
    marks: list[dict[str, Any]] = []
    blocks: list[np.ndarray] = []
    frames = 0
    for c in chunks[1:]:
        try:
            if not isinstance(c, dict):
                raise ValueError("a chunk that is not a table")
            if "mark" in c:
                if not isinstance(c["mark"], dict):
                    raise ValueError("a mark that is not a table")
                marks.append(c["mark"])
                continue
            if c.get("frame0") != frames:
                raise ValueError(f"a block of frame {c.get('frame0')!r} after {frames} "
                                 "frames (one is missing)")
            if magic == MAGIC_V1:
                rows = c["rows"]
                data = np.frombuffer(c["data"], dtype="<f8")
                if type(rows) is not int or data.size != rows * n:
                    raise ValueError("a block whose data is not rows x columns")
                block = data.reshape(rows, n)
            else:
                block = decode_block(c["types"], c["z"], c["rows"], scales, every, frames,
                                     blocks[-1][-1] if blocks and len(blocks[-1]) else None)
        except Exception as exc:  # anything a CRC-valid chunk can hold that we did not write
            note = f"unreadable block after frame {frames}: {exc}"
            break
        blocks.append(block)
        frames += len(block)
    data = np.concatenate(blocks) if blocks else np.zeros((0, n))
    return Recording(head["meta"], columns, data, complete=not note, note=note,
                     marks=marks, kinds=head["kinds"], units=head["units"],
                     format=1 if magic == MAGIC_V1 else FORMAT, scales=scales.tolist(),
                     every=every.tolist())


def _header(path, chunks: list, magic: bytes, note: str) -> dict[str, Any]:
    """The first chunk, checked: what a reader relies on, or RecordingError."""
    head = chunks[0] if chunks else None
    if not isinstance(head, dict) or not isinstance(head.get("columns"), list):
        raise RecordingError(f"{path}: not a railrig recording ({note or 'no header'})")
    columns = head["columns"]
    n = len(columns)
    meta = head.get("meta", {})
    kinds = head.get("kinds", ["f64"] * n)
    scales = head.get("scales", [1.0] * n)
    units = head.get("units", [""] * n)
    every = head.get("every", [1] * n)
    ok = (isinstance(meta, dict) and all(isinstance(c, str) for c in columns)
          and isinstance(kinds, list) and len(kinds) == n and not set(kinds) - set(KINDS)
          and isinstance(scales, list) and len(scales) == n
          and all(type(x) in (int, float) for x in scales)
          and isinstance(units, list) and len(units) == n
          and isinstance(every, list) and len(every) == n
          and all(type(k) is int and k >= 1 for k in every))
    if not ok:
        raise RecordingError(f"{path}: a railrig recording whose header is damaged")
    return {"meta": meta, "columns": columns, "kinds": kinds, "scales": scales,
            "units": units, "every": every}


def at_stored_precision(rec: Recording, kinds: list[str], scales: list[float],
                        rows: int = 4096) -> Recording:
    """rec's frames as a recording of these storage kinds would hold them (a format 1
    recording compared with a run recorded now: blocks.py's rounding, applied to it)."""
    scale = np.asarray(scales, dtype=float)
    parts = [decode_block(*encode_block(rec.data[i:i + rows], kinds, scale),
                          len(rec.data[i:i + rows]), scale)
             for i in range(0, len(rec.data), rows)]
    data = np.concatenate(parts) if parts else rec.data.copy()
    return Recording(rec.meta, rec.columns, data, rec.complete, rec.note, rec.marks,
                     list(kinds), rec.units, FORMAT, list(scales))


def _within(mark: dict[str, Any], from_s: float | None, to_s: float | None) -> bool:
    t = mark.get("t")
    if not isinstance(t, (int, float)):
        return True
    return (from_s is None or t >= from_s) and (to_s is None or t <= to_s)


def export_csv(rec: Recording, path: str | Path) -> None:
    """Write the recording as CSV with a header line of column names."""
    np.savetxt(path, rec.data, delimiter=",", header=",".join(rec.columns), comments="",
               fmt="%.9g")


def export_npz(rec: Recording, path: str | Path) -> None:
    """Write the recording as a numpy archive: one array per column, plus the metadata."""
    safe = {name.replace(".", "__"): rec.data[:, i] for i, name in enumerate(rec.columns)}
    np.savez_compressed(path, **safe, meta=np.array(msgpack.packb(rec.meta)))
