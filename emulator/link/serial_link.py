"""Serial transport through pyserial: COBS + CRC-16 frames, 0x00 delimited, with optional
Reed-Solomon forward error correction (framing.py).

The port is read from the event loop (``add_reader``) and written without blocking; a
full output buffer counts a transmit error instead of stalling the frame loop.
"""

from __future__ import annotations

import asyncio
import contextlib
from urllib.parse import SplitResult

import serial

from .base import Link, LinkError
from .framing import FrameDecoder, check_fec, encode_frame


class SerialLink(Link):
    """``serial:///dev/ttyUSB0?baud=2000000`` (8N1); ``&fec=16`` adds forward error
    correction, 16 Reed-Solomon parity bytes per block of a frame (framing.py; the board
    must be built or started with the same number)."""

    def __init__(self, parts: SplitResult, query: dict[str, str], *,
                 allow_remote: bool = False) -> None:
        super().__init__()
        url = parts.geturl()
        self.device = parts.path
        if not self.device:
            raise LinkError(f"{url}: give the device, e.g. serial:///dev/ttyUSB0?baud=921600")
        baud = query.pop("baud", "921600")
        if not baud.isdigit() or int(baud) <= 0:
            raise LinkError(f"{url}: baud must be a positive integer, got {baud!r}")
        self.baud = int(baud)
        fec = query.pop("fec", "0")
        try:
            self.fec = check_fec(int(fec) if fec.isdigit() else -1)
        except ValueError as exc:
            raise LinkError(f"{url}: {exc}") from None
        if query:
            raise LinkError(f"{url}: unknown option {sorted(query)[0]!r}")
        self._port: serial.Serial | None = None
        self._decoder = FrameDecoder(fec=self.fec)
        self.stats.framing = self._decoder.stats

    async def open(self) -> None:
        await super().open()
        try:
            self._port = serial.Serial(self.device, self.baud, timeout=0, write_timeout=0)
        except (serial.SerialException, ValueError) as exc:
            raise LinkError(f"{self.url}: cannot open {self.device}: {exc}") from None
        asyncio.get_running_loop().add_reader(self._port.fileno(), self._on_readable)

    def poll(self) -> None:
        if self._port is not None:
            self._on_readable()

    def _on_readable(self) -> None:
        assert self._port is not None
        try:
            data = self._port.read(max(1, self._port.in_waiting))
        except (serial.SerialException, OSError):
            self.stats.tx_errors += 1
            return
        dropped = self._decoder.stats.dropped
        for payload in self._decoder.feed(data):
            self._deliver(payload)
        self._note_damage(self._decoder.stats.dropped - dropped)

    def send(self, payload: bytes) -> None:
        if self._port is None:
            self.stats.tx_errors += 1
            return
        try:
            self._port.write(encode_frame(payload, self.fec))
            self.stats.sent += 1
        except (serial.SerialException, OSError):
            self.stats.tx_errors += 1  # includes a full output buffer (write_timeout=0)

    def close(self) -> None:
        if self._port is not None:
            with contextlib.suppress(RuntimeError):
                asyncio.get_running_loop().remove_reader(self._port.fileno())
            self._port.close()
            self._port = None
