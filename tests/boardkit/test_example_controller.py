"""The kit's example controller, built by the kit's Makefile, runs the demo trainset
against `railrig serve` in lockstep, as a board developer first tries it: over UDP, and
over a serial line (two pseudo-terminals joined by a relay). Every telegram accepted, no
watchdog trip, the switchgear closed and the train moving: what the README promises.
"""

from __future__ import annotations

import json
import os
import re
import select
import subprocess
import sys
import threading
from pathlib import Path

import msgpack

from emulator.link.framing import encode_frame
from emulator.link.udp import free_loopback_ports
from emulator.profiles.reader import load_trainset
from emulator.protocol.header import PROTOCOL_VERSION
from emulator.protocol.signal_map import build_signal_map
from emulator.recording.recorder import read_recording

FRAMES = 3000
TRAINSET = Path(__file__).parents[2] / "profiles" / "trainsets" / "tern-25kv.toml"


def _serve(link: str, report: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "emulator.cli", "serve", "--link", link, "--mode", "lockstep",
         "--frames", str(FRAMES), "--no-monitor", "--report-json", str(report),
         "--record", str(report.with_suffix(".rec"))],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)


def _check(rig: subprocess.Popen, board: subprocess.CompletedProcess, report: Path) -> None:
    out, _ = rig.communicate(timeout=120)
    assert board.returncode == 0, board.stdout + board.stderr
    assert rig.returncode == 0, out
    counters = json.loads(report.read_text())
    link = counters["link"]
    assert counters["frames"] == FRAMES
    assert link["rejected"] == {} and link["sequence"] == {}
    assert link["watchdog_trips"] == 0 and not counters["watchdog_tripped"]
    assert link["valid"] == FRAMES - 1  # every frame after the first had its command
    assert "state running" in board.stdout  # breaker, precharge, line contactors done
    # the open-loop start moves the train: the rig's own speed sensors at the end (not
    # the board's estimate) show the motors turning
    rec = read_recording(report.with_suffix(".rec"))
    speeds = [i for i, c in enumerate(rec.columns) if c.endswith(".speed_rad_s")
              and c.startswith("y.")]
    assert len(speeds) == 8
    plant_speed = float(rec.data[-1, speeds].mean())
    assert plant_speed > 5.0
    # and the board's speed from its encoder counts agrees within one count per frame,
    # 2 pi / (4 x 256 lines) / 1 ms = 6.1 rad/s
    board_speed = float(board.stdout.split("speed ")[-1].split()[0])
    assert abs(board_speed - plant_speed) <= 2 * 3.14159 / 1024 / 1e-3, board.stdout


def test_example_drives_the_demo_trainset_over_udp(kit_dir, tmp_path) -> None:
    rig_port, board_port = free_loopback_ports(2)
    report = tmp_path / "report.json"
    rig = _serve(f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{board_port}", report)
    board = subprocess.run(
        [str(kit_dir / "example_controller"), "--bind", f"127.0.0.1:{board_port}",
         "--rig", f"127.0.0.1:{rig_port}", "--frames", str(FRAMES), "--quiet"],
        capture_output=True, text=True, timeout=120)
    if board.returncode != 0 and rig.poll() is None:
        rig.kill()
    _check(rig, board, report)


def _relay(a: int, b: int, stop: threading.Event, slip_in: bytes = b"",
           after: int = 0) -> None:
    """Copy bytes both ways between two pseudo-terminal masters (a null-modem cable);
    with ``slip_in``, add those bytes to the board's way after the rig's ``after``-th
    frame (its ``after``-th 0x00)."""
    delimiters = 0
    while not stop.is_set():
        ready, _, _ = select.select([a, b], [], [], 0.05)
        for fd in ready:
            try:
                data = os.read(fd, 4096)
            except OSError:
                continue
            if fd == a and slip_in:
                before, delimiters = delimiters, delimiters + data.count(0)
                if before < after <= delimiters:
                    data += slip_in
            os.write(b if fd == a else a, data)


def _over_a_serial_line(kit_dir, report: Path, slip_in: bytes = b"",
                        after: int = 0) -> subprocess.CompletedProcess:
    """`railrig serve` and the kit's example on two pseudo-terminals joined by _relay;
    checked by _check; the board's finished process."""
    (m_rig, s_rig), (m_board, s_board) = os.openpty(), os.openpty()
    stop = threading.Event()
    relay = threading.Thread(target=_relay, args=(m_rig, m_board, stop, slip_in, after),
                             daemon=True)
    relay.start()
    try:
        rig = _serve(f"serial://{os.ttyname(s_rig)}?baud=921600", report)
        board = subprocess.run(
            [str(kit_dir / "example_controller"), "--serial", os.ttyname(s_board),
             "--baud", "921600", "--frames", str(FRAMES), "--quiet"],
            capture_output=True, text=True, timeout=120)
        if board.returncode != 0 and rig.poll() is None:
            rig.kill()
        _check(rig, board, report)
        return board
    finally:
        stop.set()
        relay.join(timeout=2)
        for fd in (m_rig, s_rig, m_board, s_board):
            os.close(fd)


def test_example_drives_the_demo_trainset_over_a_serial_line(kit_dir, tmp_path) -> None:
    report = tmp_path / "report.json"
    board = _over_a_serial_line(kit_dir, report)
    # the board's receiver prints its counters under --quiet only after errors
    assert "serial:" not in board.stdout, board.stdout
    framing = json.loads(report.read_text())["transport"]["framing"]
    assert framing["crc_errors"] == 0 and framing["cobs_errors"] == 0


def test_example_drops_a_telegram_it_cannot_read_and_goes_on(kit_dir, tmp_path) -> None:
    # A frame that passes COBS and the CRC can still hold no telegram: on a noisy line
    # the CRC-16 lets about one spoiled frame in 65 536 through (its 16 bits), and a run
    # at a BER of 1e-3 spoils thousands. The board must count it and ask for the
    # measurement again, not stop (it did: "cannot read a telegram", and the run froze).
    # The relay slips two such frames to the board after the rig's 500th frame: one
    # that is no telegram, and one of the right length built for another map (a digest
    # of 1): the first is unreadable, the second a mismatch met once.
    n_measurements = len(build_signal_map(load_trainset(TRAINSET)).measurements)
    other_map = [PROTOCOL_VERSION, 600, 0, 1000, 0, 1] + [0] * n_measurements
    junk = encode_frame(b"\xc1 not msgpack") + encode_frame(msgpack.packb(other_map))
    report = tmp_path / "report.json"
    board = _over_a_serial_line(kit_dir, report, slip_in=junk, after=500)
    assert re.search(r"unreadable telegrams 2$", board.stdout, re.M), board.stdout
    # and asked for the measurement again once for each (the kit's rule)
    assert json.loads(report.read_text())["link"]["repeat_requests"] == 2
