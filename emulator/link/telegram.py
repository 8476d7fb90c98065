"""Telegram codec: msgpack arrays in the fixed order of the signal map.

A telegram is ``[protocol_version, sequence, time_us, period_us, flags, map_digest, v0,
v1, ...]`` (emulator/protocol/header.py); values in wire units (physical = wire x
scale). Decoding validates everything and raises :class:`TelegramError` with a kind
that the link counts; it never lets a non-finite or out-of-range value through.
"""

from __future__ import annotations

import contextlib
import math
from typing import NamedTuple

import msgpack
import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME, entry_point

from . import msgpack_array

#: header fields (emulator/protocol/header.py names them; the link knows only the count)
HEADER_LEN = 6

#: the kinds of rejection the codec tells, counted per kind by the rig
REJECT_KINDS = ("malformed", "version", "map", "length", "type", "non_finite", "range",
                "fractional")


class TelegramError(ValueError):
    """A telegram that cannot be used; ``kind`` is one of REJECT_KINDS."""

    def __init__(self, kind: str, message: str) -> None:
        super().__init__(message)
        self.kind = kind


class Telegram(NamedTuple):
    """A decoded telegram: header fields and physical values."""

    version: int
    sequence: int
    time_us: int
    period_us: int
    flags: int
    map_digest: int
    values: np.ndarray


class TelegramCodec:
    """Encodes one direction and decodes the other, for a given signal layout.

    Args:
        version: protocol version expected and sent.
        send_scales: scale of each value sent (physical = wire x scale).
        recv_scales, recv_lo, recv_hi: scale and accepted physical range of each value
            received.
        map_digest: the layout's digest, sent in every telegram; a received one must be
            0 (not checked by the sender) or equal to it.
        recv_whole: per value received, whether it must be a whole number (flags, enums,
            counts); none by default.
    """

    def __init__(self, version: int, send_scales: np.ndarray, recv_scales: np.ndarray,
                 recv_lo: np.ndarray, recv_hi: np.ndarray, *, map_digest: int = 0,
                 recv_whole: np.ndarray | None = None) -> None:
        self.version = version
        self.map_digest = map_digest
        self._inv_send = 1.0 / np.asarray(send_scales, dtype=float)
        self._recv_scales = np.asarray(recv_scales, dtype=float)
        self._lo = np.asarray(recv_lo, dtype=float)
        self._hi = np.asarray(recv_hi, dtype=float)
        self._n_recv = len(self._recv_scales)
        self._whole = (np.zeros(self._n_recv, dtype=np.bool_) if recv_whole is None
                       else np.asarray(recv_whole, dtype=np.bool_))
        # the compiled codec's buffers (msgpack_array.py): one telegram each way
        self._out = np.zeros(msgpack_array.buffer_size(len(self._inv_send)), dtype=np.uint8)
        self._out_bytes = memoryview(self._out)  # (its slice's bytes: half numpy's cost)
        self._header = np.zeros(HEADER_LEN, dtype=np.int64)
        self._got_header = np.zeros(HEADER_LEN, dtype=np.int64)
        self._scratch = np.zeros(1, dtype=np.uint64)
        self._read_plain = None  # _read_plain, bound at the first telegram read

    def encode(self, sequence: int, time_us: int, period_us: int, flags: int,
               values: np.ndarray) -> bytes:
        """Pack physical values as integers in wire units (rounded half to even) after
        the header: the bytes msgpack.packb gives for that list."""
        n = _pack_telegram(self.version, sequence, time_us, period_us, flags,
                           self.map_digest, self._header, values, self._inv_send, self._out)
        if n < 0:
            raise ValueError(f"value {-1 - n} = {values[-1 - n]!r} cannot be sent (not "
                             "finite, or past int64 in wire units)")
        return self._out_bytes[:n].tobytes()

    def warm_up(self) -> None:
        """Compile or load the compiled codec now (a rig calls this before its clock
        starts): an empty telegram read (refused) and the range check on scratch."""
        with contextlib.suppress(TelegramError):
            self.decode(b"")
        _first_bad(np.zeros(1), np.zeros(1), np.ones(1), np.ones(1, dtype=np.bool_))

    def decode(self, payload: bytes) -> Telegram:
        """Unpack and validate a received telegram; raise TelegramError on any fault."""
        values = np.empty(self._n_recv)
        head = self._got_header
        if type(payload) is not bytes:  # (numba reads bytes as they are: one build of the
            payload = memoryview(payload).tobytes()  # reader, half the cost of frombuffer)
        args = (payload, head, values, self._scratch, self._recv_scales, self._lo,
                self._hi, self._whole, self.version, self.map_digest)
        read_plain = self._read_plain
        if read_plain is None:  # for these arrays (kernel_cache.entry_point)
            read_plain = self._read_plain = entry_point(_read_plain, *args)
        if read_plain(*args):
            # the plain case, compiled: its header valid, its values in range
            return _new_tuple(Telegram, (*head.tolist(), values))
        return self._decode_checked(payload)

    def _decode_checked(self, payload: bytes) -> Telegram:
        """The long way, through the msgpack package: every fault named."""
        try:
            items = msgpack.unpackb(payload, raw=False, strict_map_key=True,
                                    max_array_len=HEADER_LEN + self._n_recv + 64,
                                    max_map_len=0, max_str_len=64, max_bin_len=64,
                                    max_ext_len=0)
        except Exception as exc:  # msgpack raises many types on hostile input
            raise TelegramError("malformed", f"not a msgpack telegram: {exc}") from None
        if type(items) is not list:
            raise TelegramError("malformed", "a telegram is a msgpack array")
        if len(items) < HEADER_LEN:
            raise TelegramError("length", f"{len(items)} elements, header needs {HEADER_LEN}")
        header = items[:HEADER_LEN]
        if any(type(field) is not int for field in header):
            raise TelegramError("type", "header elements must be integers")
        version, sequence, time_us, period_us, flags, digest = header
        if version != self.version:
            raise TelegramError("version", f"protocol version {version}, expected "
                                f"{self.version}")
        if period_us < 0 or flags < 0:
            raise TelegramError("range", f"period_us {period_us} or flags {flags} is "
                                "negative (both are unsigned)")
        if digest not in (0, self.map_digest):
            raise TelegramError("map", f"map digest 0x{digest % 2**64:08X}, the rig's is "
                                f"0x{self.map_digest:08X} (0: not checked): the controller "
                                "was built for another signal map")
        body = items[HEADER_LEN:]
        if len(body) != self._n_recv:
            raise TelegramError("length", f"{len(body)} values, expected {self._n_recv}")
        for value in body:
            if type(value) not in _NUMBERS:
                raise TelegramError("type", f"value {value!r} is not a number")
        try:
            values = np.array(body, dtype=float)
        except OverflowError:
            raise TelegramError("range", "integer out of range") from None
        values *= self._recv_scales
        bad = _first_bad(values, self._lo, self._hi, self._whole)
        if bad >= 0:
            if not math.isfinite(values[bad]):
                raise TelegramError("non_finite", f"value {bad} is NaN or infinite")
            if not self._lo[bad] <= values[bad] <= self._hi[bad]:
                raise TelegramError("range", f"value {bad} = {values[bad]:g} outside "
                                    f"{self._lo[bad]:g}..{self._hi[bad]:g}")
            raise TelegramError("fractional", f"value {bad} = {values[bad]:g} is a flag, "
                                "enum or count: whole numbers only")
        return Telegram(version, sequence, time_us, period_us, flags, digest, values)


_NUMBERS = (int, float)
_new_tuple = tuple.__new__  # _new_tuple(Telegram, fields): a Telegram without the call of
# its generated __new__ (half the cost; what Telegram._make does, less its length check)


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _pack_telegram(version, sequence, time_us, period_us, flags, map_digest, header, values,
                   inv_scales, buf) -> int:
    """The header's fields into header, then msgpack_array.pack of header and values
    into buf (its length, or -1 - i for a value i that cannot be sent)."""
    header[0], header[1], header[2] = version, sequence, time_us
    header[3], header[4], header[5] = period_us, flags, map_digest
    return msgpack_array.pack(header, values, inv_scales, buf)


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _read_plain(data: bytes, header: np.ndarray, values: np.ndarray,
                scratch: np.ndarray, scales: np.ndarray, lo: np.ndarray, hi: np.ndarray,
                whole: np.ndarray, version: int, map_digest: int) -> bool:
    """The plain telegram (msgpack_array.unpack) into header and values, the values
    scaled to physical units and all in range (_first_bad), the header of this version
    and map digest (0: not checked), its period and flags not negative: whether it was
    that."""
    if msgpack_array.unpack_scaled(data, header, values, scratch, scales) != 0:
        return False
    if header[0] != version or (header[5] != 0 and header[5] != map_digest) or (
            header[3] < 0 or header[4] < 0):
        return False
    return _first_bad(values, lo, hi, whole) < 0


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _first_bad(values: np.ndarray, lo: np.ndarray, hi: np.ndarray,
               whole: np.ndarray) -> int:
    """Index of the first value outside [lo, hi], not finite, or not whole where it
    must be (whole[i]), or -1."""
    for i in range(values.shape[0]):
        v = values[i]
        if not (lo[i] <= v <= hi[i]):  # NaN compares false: caught here too
            return i
        if whole[i] and v != math.floor(v):
            return i
    return -1
