"""Serial framing: COBS-encoded telegram with a CRC-16 trailer, 0x00 delimited.

Byte layout on the line, one frame per telegram::

    +----------------------------------------------+------+
    | COBS( payload || CRC16 big-endian (2 bytes) ) | 0x00 |
    +----------------------------------------------+------+

CRC: CRC-16/CCITT-FALSE, also catalogued as CRC-16/IBM-3740 (polynomial 0x1021,
initial value 0xFFFF, not reflected, final XOR 0x0000; check value 0x29B1 over ASCII
"123456789"), computed over the payload only. This is ``binascii.crc_hqx(payload,
0xFFFF)``. COBS: Cheshire & Baker, IEEE/ACM Trans. Networking 7(2), 1999, by the ``cobs``
package; it removes every zero byte, so 0x00 marks frame ends and a receiver
resynchronises at the next zero after any damage.

How a bad line shows up (and what the decoder does): noise before a frame or a lost
delimiter merges garbage with the next frame, which then fails COBS decoding or the CRC
and is dropped; a truncated frame fails the CRC; a run of bytes without a delimiter
longer than the size cap is discarded up to the next delimiter. Nothing raises: every
kind is counted.
"""

from __future__ import annotations

import binascii
from dataclasses import dataclass

from cobs import cobs

CRC_INIT = 0xFFFF
DELIMITER = b"\x00"
#: default cap of one encoded frame (payload + CRC + COBS overhead), bytes
MAX_FRAME = 4096


def crc16(data: bytes) -> int:
    """CRC-16/CCITT-FALSE of data (poly 0x1021, init 0xFFFF, no reflection, xorout 0)."""
    return binascii.crc_hqx(data, CRC_INIT)


def encode_frame(payload: bytes) -> bytes:
    """One frame for the line: COBS(payload + CRC16 big-endian) + 0x00."""
    return cobs.encode(payload + crc16(payload).to_bytes(2, "big")) + DELIMITER


@dataclass
class FramingStats:
    """Counters of the frame decoder."""

    frames: int = 0
    crc_errors: int = 0
    cobs_errors: int = 0
    runts: int = 0  # frames too short to hold a CRC
    oversized: int = 0
    discarded_bytes: int = 0

    @property
    def dropped(self) -> int:
        """Frames dropped for damage: COBS, CRC, too short, too long."""
        return self.cobs_errors + self.crc_errors + self.runts + self.oversized


class FrameDecoder:
    """Incremental, bounded decoder of the serial framing. Never raises on bad input.

    ``feed(data)`` returns the payloads completed by data, in order; partial frames are
    kept until their delimiter arrives. The buffer never exceeds ``max_frame`` bytes.
    """

    def __init__(self, max_frame: int = MAX_FRAME) -> None:
        self.max_frame = max_frame
        self.stats = FramingStats()
        self._buf = bytearray()
        self._skipping = False  # inside an oversized run: drop until the next delimiter

    def feed(self, data: bytes) -> list[bytes]:
        """Add received bytes; return the good payloads completed by them."""
        out: list[bytes] = []
        start = 0
        while True:
            end = data.find(DELIMITER, start)
            chunk = data[start:] if end < 0 else data[start:end]
            if self._skipping:
                self.stats.discarded_bytes += len(chunk)
            else:
                self._buf += chunk
                if len(self._buf) > self.max_frame:
                    self.stats.oversized += 1
                    self.stats.discarded_bytes += len(self._buf)
                    self._buf.clear()
                    self._skipping = True
            if end < 0:
                return out
            if self._skipping:
                self._skipping = False
            elif self._buf:
                payload = self._decode(bytes(self._buf))
                if payload is not None:
                    out.append(payload)
            self._buf.clear()
            start = end + 1

    def _decode(self, encoded: bytes) -> bytes | None:
        try:
            raw = cobs.decode(encoded)
        except cobs.DecodeError:
            self.stats.cobs_errors += 1
            self.stats.discarded_bytes += len(encoded)
            return None
        if len(raw) < 2:
            self.stats.runts += 1
            self.stats.discarded_bytes += len(encoded)
            return None
        payload, crc = raw[:-2], int.from_bytes(raw[-2:], "big")
        if crc16(payload) != crc:
            self.stats.crc_errors += 1
            self.stats.discarded_bytes += len(encoded)
            return None
        self.stats.frames += 1
        return payload
