"""A controller written from the protocol description alone, as a board developer would.

It imports nothing of railrig: it reads the signal map that ``railrig protocol --json``
prints, speaks msgpack telegrams over UDP (one per datagram) or a serial line (COBS +
CRC-16/CCITT-FALSE trailer + 0x00), and drives the inverters open loop (V/f with a fixed
slip frequency) from the encoder counts, deriving speed from count differences.

Run: python tests/link/board.py MAP.json udp 127.0.0.1:PORT_RIG 127.0.0.1:PORT_BOARD FRAMES
     python tests/link/board.py MAP.json serial /dev/pts/N BAUD FRAMES
     python tests/link/board.py MAP.json fd FD FRAMES   (a pty master handed down)
It prints one JSON line at the end: frames answered, last speed, counters.
"""

from __future__ import annotations

import binascii
import json
import math
import socket
import sys
import time

import msgpack
from cobs import cobs


class OpenLoopBoard:
    """The control law of this example board: V/f from the encoder speed."""

    def __init__(self, signal_map: dict, slip_hz: float = 1.0, volts_per_hz: float = 15.8,
                 pole_pairs: int = 2) -> None:
        self.meas = [s["name"] for s in signal_map["measurements"]]
        self.scale_m = [s["scale"] for s in signal_map["measurements"]]
        self.cmds = [s["name"] for s in signal_map["commands"]]
        self.scale_c = [s["scale"] for s in signal_map["commands"]]
        self.version = signal_map["protocol_version"]
        self.encoders = [i for i, n in enumerate(self.meas) if n.endswith(".encoder_count")]
        self.link_v = next(i for i, n in enumerate(self.meas)
                           if n.endswith(".voltage_v") and not n.startswith("line."))
        self.line_converters = sorted({n.rsplit(".", 1)[0] for n in self.cmds
                                       if n.endswith(".modulation")})
        self.inverters = sorted({n.rsplit(".", 1)[0] for n in self.cmds
                                 if n.endswith(".duty_a")})
        self.slip_hz, self.vpf, self.pp = slip_hz, volts_per_hz, pole_pairs
        self.lines_x4 = 4 * 256
        self.prev_counts: list[int] | None = None
        self.theta = 0.0
        self.speed = 0.0
        self.answered = 0
        self.flags_seen = 0
        self.last: tuple[int, bytes] | None = None  # (sequence, the answer sent for it)

    def answer(self, payload: bytes) -> bytes:
        m = msgpack.unpackb(payload)
        version, seq, _time_us, period_us, flags, _digest = m[:6]
        assert version == self.version
        self.flags_seen |= flags
        if self.last is not None and self.last[0] == seq:  # said again (the rig's repeat
            return self.last[1]  # rule): the same answer, the control not run again
        body = m[6:]
        period = period_us / 1e6
        counts = [body[i] for i in self.encoders]
        if self.prev_counts is not None:  # speed from count differences, wrap-safe
            pairs = zip(counts, self.prev_counts, strict=True)
            diffs = [((c - p + 32768) % 65536) - 32768 for c, p in pairs]
            self.speed = sum(diffs) / len(diffs) / self.lines_x4 * 2 * math.pi / period
        self.prev_counts = counts
        udc = body[self.link_v] * self.scale_m[self.link_v]
        f_s = self.pp * self.speed / (2 * math.pi) + self.slip_hz
        amp = 20.0 + self.vpf * abs(f_s)
        mod = min(amp / (0.5 * udc), 0.95) if udc > 100 else 0.0
        self.theta += 2 * math.pi * f_s * period
        values = {}
        # switchgear: breaker and precharge first, line contactor once charged, the line
        # converters stay blocked (a diode bridge feeds the link in this example)
        t = seq * period
        values["line.breaker_close"] = 1.0
        for lc in self.line_converters:
            values[f"{lc}.precharge_close"] = 1.0 if t < 0.7 else 0.0
            values[f"{lc}.line_contactor_close"] = 1.0 if t >= 0.6 else 0.0
        if udc < 1000.0:
            mod = 0.0
        for inv in self.inverters:
            for x, ph in enumerate("abc"):
                angle = self.theta - x * 2 * math.pi / 3
                values[f"{inv}.duty_{ph}"] = 0.5 + 0.5 * mod * math.cos(angle)
            values[f"{inv}.gates_enabled"] = 1.0 if udc >= 1000.0 else 0.0
        named = zip(self.cmds, self.scale_c, strict=True)
        wire = [round(values.get(n, 0.0) / s) for n, s in named]
        self.answered += 1
        reply = msgpack.packb([self.version, seq, 0, 0, 0, 0, *wire])
        self.last = (seq, reply)
        return reply


def frame(payload: bytes) -> bytes:
    crc = binascii.crc_hqx(payload, 0xFFFF).to_bytes(2, "big")
    return cobs.encode(payload + crc) + b"\x00"


def run_udp(board: OpenLoopBoard, rig: str, me: str, frames: int) -> None:
    host, port = me.rsplit(":", 1)
    rhost, rport = rig.rsplit(":", 1)
    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sock.bind((host, int(port)))
    sock.settimeout(10.0)
    while board.answered < frames:
        data, _ = sock.recvfrom(65536)
        sock.sendto(board.answer(data), (rhost, int(rport)))


def run_serial(board: OpenLoopBoard, device: str, baud: int, frames: int) -> None:
    import serial

    port = serial.Serial(device, baud, timeout=10.0)
    serve_stream(board, lambda: port.read(max(1, port.in_waiting)), port.write, frames)


def run_fd(board: OpenLoopBoard, fd: int, frames: int) -> None:
    """The master side of a pseudo-terminal pair, by file descriptor."""
    import os
    import select

    def read() -> bytes:
        if not select.select([fd], [], [], 10.0)[0]:
            return b""
        return os.read(fd, 4096)

    serve_stream(board, read, lambda data: os.write(fd, data), frames)


def serve_stream(board: OpenLoopBoard, read, write, frames: int) -> None:
    buf = bytearray()
    while board.answered < frames:
        chunk = read()
        if not chunk:
            raise TimeoutError("rig silent")
        buf += chunk
        while b"\x00" in buf:
            raw, _, rest = bytes(buf).partition(b"\x00")
            buf = bytearray(rest)
            decoded = cobs.decode(raw)
            payload, crc = decoded[:-2], int.from_bytes(decoded[-2:], "big")
            if binascii.crc_hqx(payload, 0xFFFF) != crc:
                continue
            write(frame(board.answer(payload)))


def main() -> None:
    with open(sys.argv[1]) as fh:
        signal_map = json.load(fh)
    board = OpenLoopBoard(signal_map)
    t0 = time.monotonic()
    if sys.argv[2] == "udp":
        run_udp(board, sys.argv[3], sys.argv[4], int(sys.argv[5]))
    elif sys.argv[2] == "fd":
        run_fd(board, int(sys.argv[3]), int(sys.argv[4]))
    else:
        run_serial(board, sys.argv[3], int(sys.argv[4]), int(sys.argv[5]))
    print(json.dumps({"answered": board.answered, "speed_rad_s": board.speed,
                      "flags_seen": board.flags_seen, "seconds": time.monotonic() - t0}))


if __name__ == "__main__":
    main()
