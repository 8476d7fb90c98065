"""Real transports with the controller in another process: UDP, a pty serial line, fuzz.

The board (tests/link/board.py) is written from the protocol description alone: it
imports nothing of railrig and reads the signal map that `railrig protocol --json` prints.
"""

from __future__ import annotations

import asyncio
import json
import os
import sys
import tempfile
from pathlib import Path

import msgpack
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from emulator.link import open_link
from emulator.link.base import LinkError
from emulator.link.udp import free_loopback_port, free_loopback_ports
from emulator.protocol.signal_map import build_signal_map
from emulator.rig.clock import FakeClock
from emulator.rig.frame_loop import Rig

BOARD = Path(__file__).with_name("board.py")


def signal_map_file(params, tmp_path: Path) -> Path:
    path = tmp_path / "map.json"
    path.write_text(json.dumps(build_signal_map(params).as_dict()))
    return path


async def _run_with_board(params, link_url: str, board_args: list[str], frames: int,
                          pass_fds=()) -> tuple[Rig, dict]:
    link = open_link(link_url)
    await link.open()
    rig = Rig(params, link, mode="lockstep")
    board = await asyncio.create_subprocess_exec(sys.executable, *board_args,
                                                 stdout=asyncio.subprocess.PIPE,
                                                 pass_fds=pass_fds)
    try:
        await asyncio.wait_for(rig.run(frames=frames), 60)
        out, _ = await asyncio.wait_for(board.communicate(), 30)
    finally:
        link.close()
        if board.returncode is None:
            board.kill()
    return rig, json.loads(out.decode().strip().splitlines()[-1])


def test_loopback_ports_asked_for_together_differ_and_were_free() -> None:
    # each is bound once chosen (so it was free), and none repeats (the kernel may hand a
    # port just let go out again: chosen one by one, two could be the same)
    import socket

    ports = free_loopback_ports(8)
    assert len(set(ports)) == 8
    held = []
    try:
        for port in ports:
            sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
            held.append(sock)
            sock.bind(("127.0.0.1", port))
    finally:
        for sock in held:
            sock.close()


def test_board_drives_the_train_over_udp(params, tmp_path) -> None:
    rig_port, board_port = free_loopback_ports(2)
    url = f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{board_port}"
    args = [str(BOARD), str(signal_map_file(params, tmp_path)), "udp",
            f"127.0.0.1:{rig_port}", f"127.0.0.1:{board_port}", "2500"]
    rig, board = asyncio.run(_run_with_board(params, url, args, 2500))
    assert board["answered"] >= 2500
    assert rig.health.valid >= 2499 and not rig.health.rejected
    assert rig.plant.read("line.breaker_closed") == 1.0  # the board ran the switchgear
    assert rig.plant.read("dc_link.voltage_v").min() > 1000.0
    assert rig.plant.read("train.speed_mps") > 0.1  # the open-loop board moved the train
    # the board's speed from count differences over one frame: resolution one count per
    # frame, 2 pi / (4 x 256 lines) / 1 ms = 6.1 rad/s, averaged over its 8 encoders
    plant_speed = float(rig.plant.read("motor.speed_rad_s").mean())
    assert plant_speed > 0.3
    assert abs(board["speed_rad_s"] - plant_speed) <= 2 * 3.14159 / 1024 / 1e-3


def test_board_over_a_pseudo_terminal_serial_line(params, tmp_path) -> None:
    master, slave = os.openpty()
    try:
        url = f"serial://{os.ttyname(slave)}?baud=921600"
        args = [str(BOARD), str(signal_map_file(params, tmp_path)), "fd", str(master), "400"]
        rig, board = asyncio.run(_run_with_board(params, url, args, 400, pass_fds=(master,)))
    finally:
        os.close(master)
        os.close(slave)
    assert board["answered"] >= 400
    assert rig.health.valid >= 399
    framing = rig.link.stats.framing
    assert framing.frames >= 400 and framing.crc_errors == 0


#: the sender of _rig_receiving: binds a port of its own (0: the system's choice, held
#: from then on), says it, waits for the rig's port, then sends each datagram of the file
_SENDER = """
import socket, sys, time
s = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
s.bind(("127.0.0.1", 0))
print(s.getsockname()[1], flush=True)
rig = int(sys.stdin.readline())
for line in open(sys.argv[1]):
    if line.strip():
        s.sendto(bytes.fromhex(line.strip()), ("127.0.0.1", rig))
        time.sleep(0.0002)
"""


async def _rig_receiving(params, datagrams: list[bytes], from_peer: bool) -> Rig:
    # every port is bound by its holder before anyone is told it (a port found free and
    # let go could be taken by another test process in between: a sender that failed to
    # bind, and another's datagrams counted here, happened once on a fresh clone)
    with tempfile.NamedTemporaryFile("w", suffix=".txt", delete=False) as fh:
        fh.write("\n".join(d.hex() for d in datagrams))
    sender = await asyncio.create_subprocess_exec(
        sys.executable, "-c", _SENDER, fh.name, stdin=asyncio.subprocess.PIPE,
        stdout=asyncio.subprocess.PIPE)
    sender_port = int(await sender.stdout.readline())
    peer_port = sender_port if from_peer else free_loopback_port()  # (nobody sends from the latter)
    link = open_link(f"udp://127.0.0.1:0?peer=127.0.0.1:{peer_port}")
    await link.open()
    rig = Rig(params, link, mode="realtime", clock=FakeClock())
    sender.stdin.write(f"{link.local_address[1]}\n".encode())
    await sender.stdin.drain()
    sender.stdin.close()
    stop = asyncio.Event()

    async def until_all_arrived():
        await sender.wait()
        for _ in range(200):
            if link.stats.received + link.stats.foreign_dropped >= len(datagrams):
                break
            await asyncio.sleep(0.01)
        stop.set()

    waiter = asyncio.create_task(until_all_arrived())
    await rig.run(stop=stop)
    await waiter
    link.close()
    os.unlink(fh.name)
    return rig


HOSTILE_VALUE = st.one_of(st.integers(-2**40, 2**40), st.floats(allow_nan=True),
                         st.text(max_size=4), st.none(), st.booleans())


@settings(max_examples=8, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_fuzzed_datagrams_from_another_process_are_counted(params, data) -> None:
    # telegrams of the protocol's own version and length, with hostile header fields and
    # values, so that the rig's value checks are reached; beside them raw bytes and
    # arrays of any length
    sm = build_signal_map(params)
    n = len(sm.commands)
    digest = st.one_of(st.just(0), st.just(sm.digest()), st.integers(0, 2**32))
    telegram = st.tuples(st.integers(0, 2**32), st.integers(0, 2**32), st.integers(0, 20_000),
                         st.integers(0, 255), digest,
                         st.lists(HOSTILE_VALUE, min_size=n, max_size=n))
    well_formed = telegram.map(lambda t: msgpack.packb([sm.version, *t[:5], *t[5]]))
    other = st.one_of(st.binary(min_size=1, max_size=120),
                      st.lists(HOSTILE_VALUE, max_size=30).map(msgpack.packb))
    tagged = st.one_of(well_formed.map(lambda d: (True, d)), other.map(lambda d: (False, d)))
    drawn = data.draw(st.lists(tagged, min_size=1, max_size=60))
    datagrams = [d for _, d in drawn]
    rig = asyncio.run(_rig_receiving(params, datagrams, from_peer=True))
    h = rig.health
    assert rig.link.stats.received == len(datagrams)
    # every datagram is accounted for exactly once: rejected, a sequence error, or accepted
    assert sum(h.rejected.values()) + sum(h.sequence.values()) + h.accepted == len(datagrams)
    # the well-formed ones got past the version and length checks to the value checks
    others = sum(1 for ok, _ in drawn if not ok)
    assert h.rejected["version"] + h.rejected["length"] + h.rejected["malformed"] <= others


def test_a_well_formed_telegram_with_a_nan_is_rejected_by_its_value(params) -> None:
    sm = build_signal_map(params)
    values = [0] * len(sm.commands)
    values[sm.index("command", "INV-A1.duty_a")] = float("nan")
    good_header = [sm.version, 0, 0, 0, 0, 0]
    rig = asyncio.run(_rig_receiving(params, [msgpack.packb(good_header + values)],
                                     from_peer=True))
    assert dict(rig.health.rejected) == {"non_finite": 1}


def test_oversized_datagrams_are_counted_not_fatal(params) -> None:
    sm = build_signal_map(params)
    huge = msgpack.packb([sm.version, 0, 0, 0, 0, 0, *([0.5] * 4000)])  # ~36 kB, far too long
    rig = asyncio.run(_rig_receiving(params, [huge, b"\x00" * 60_000], from_peer=True))
    assert rig.link.stats.received == 2
    assert sum(rig.health.rejected.values()) == 2 and rig.health.accepted == 0


def test_datagrams_from_a_stranger_are_dropped(params) -> None:
    rig = asyncio.run(_rig_receiving(params, [b"\x95\x01\x00\x00\x00\x00"] * 20,
                                     from_peer=False))
    assert rig.link.stats.foreign_dropped == 20
    assert rig.link.stats.received == 0


async def _rig_with_a_board_that_dies(params, tmp_path, mode: str, answered: int,
                                      wall_s: float) -> tuple[Rig, int]:
    """The board answers ``answered`` measurements over UDP and exits; the rig runs on
    for ``wall_s`` seconds of wall time. Returns the rig and the frame the board left at."""
    from emulator.rig.clock import MonotonicClock

    rig_port, board_port = free_loopback_ports(2)
    link = open_link(f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{board_port}")
    await link.open()
    # 5 ms periods: a busy 2-core machine keeps up, so only the board's death trips
    rig = Rig(params, link, mode=mode, period_s=5e-3, watchdog_frames=10,
              clock=MonotonicClock(spin_ns=0))
    board = await asyncio.create_subprocess_exec(
        sys.executable, str(BOARD), str(signal_map_file(params, tmp_path)), "udp",
        f"127.0.0.1:{rig_port}", f"127.0.0.1:{board_port}", str(answered),
        stdout=asyncio.subprocess.DEVNULL)
    stop = asyncio.Event()
    running = asyncio.create_task(rig.run(stop=stop))
    await asyncio.wait_for(board.wait(), 120)
    if mode == "lockstep":  # the board's last datagram may still be on its way
        settled = -1
        while settled != rig.frame:
            settled = rig.frame
            await asyncio.sleep(0.2)
    left_at = rig.frame
    await asyncio.sleep(wall_s)
    stop.set()
    await asyncio.wait_for(running, 30)  # the rig ends cleanly, no exception
    link.close()
    rig.clock.close()
    return rig, left_at


def test_realtime_watchdog_when_the_udp_peer_dies(params, tmp_path) -> None:
    rig, left_at = asyncio.run(_rig_with_a_board_that_dies(params, tmp_path, "realtime",
                                                           300, 1.0))
    assert rig.frame > left_at + 50  # plant time went on without the board
    # once, and it stays tripped: no valid command comes again
    assert rig.tripped and rig.health.watchdog_trips == 1
    assert not rig.plant.iu[:, 3].any()  # every inverter's gates blocked


def test_lockstep_waits_for_a_udp_peer_that_died(params, tmp_path) -> None:
    # in lockstep the board is the clock: without it plant time stands still, the rig
    # says its last measurement again now and then, and nothing trips
    rig, left_at = asyncio.run(_rig_with_a_board_that_dies(params, tmp_path, "lockstep",
                                                           300, 1.2))
    # the board answered y_0 .. y_299; frame 300 acts on the answer to y_299 (one period
    # of command delay), so it ran while the rig waited for the answer to y_300
    # (emulator/rig/lockstep.py, _run_ahead); no frame after it
    assert rig.frame == left_at == 301
    assert rig.repeats >= 2 and rig.health.watchdog_trips == 0


def test_hostile_bytes_on_the_serial_line_are_counted_and_the_rig_goes_on(params) -> None:
    # noise, a damaged frame, a run with no delimiter longer than the cap, a frame that is
    # not msgpack, then good command telegrams: the rig counts each kind and takes the good
    from emulator.link.framing import encode_frame

    from .conftest import command

    async def go():
        master, slave = os.openpty()
        link = open_link(f"serial://{os.ttyname(slave)}?baud=921600")
        await link.open()
        rig = Rig(params, link, mode="realtime", clock=FakeClock())
        good = encode_frame(command(rig, 0))
        bad_crc = bytearray(good)
        bad_crc[3] ^= 0x40
        # noise without zero bytes, ended by one: one damaged frame, whatever the seed
        noise = bytes(np.random.default_rng(5).integers(1, 256, 300, dtype=np.uint8))
        hostile = [noise + b"\x00", bytes(bad_crc), b"\x07" * 6000 + b"\x00",
                   encode_frame(b"\xc1\xc1 not msgpack"), b"\x00\x00\x00"]
        def write_all(data: bytes) -> None:
            while data:
                data = data[os.write(master, data):]

        try:
            for chunk in hostile:
                write_all(chunk)
                await rig.run(frames=rig.frame + 20)
            for k in range(rig.frame, rig.frame + 50):  # answers to what the rig sends
                write_all(encode_frame(command(rig, k)))
                await rig.run(frames=k + 1)
                await asyncio.sleep(0.002)
        finally:
            link.close()
            os.close(master)
            os.close(slave)
        return rig

    rig = asyncio.run(go())
    f = rig.link.stats.framing
    # each hostile piece counted once, as its kind: the noise is one damaged frame (its
    # COBS or its CRC fails, by the seed), the flipped bit a CRC error, the long run one
    # oversized frame, the frame of non-msgpack one malformed telegram; the delimiters
    # alone are idle line, nothing
    assert f.crc_errors + f.cobs_errors == 2 and f.crc_errors >= 1
    assert f.oversized == 1
    assert rig.health.rejected["malformed"] == 1
    assert sum(rig.health.rejected.values()) == 1
    # the 50 good telegrams: none lost. Each is read at a frame of the rig's and taken,
    # or refused as late if the pseudo-terminal gave it a frame later than written (a busy
    # machine); the last may still be on its way when the run ends
    read = rig.health.accepted + rig.health.sequence["late"]
    assert read in (49, 50), (rig.health.accepted, dict(rig.health.sequence))
    assert rig.health.accepted >= 45


@pytest.mark.parametrize("fec", ["3", "66", "-2", "x", ""])
def test_a_serial_address_with_a_wrong_fec_is_a_clear_error(fec) -> None:
    with pytest.raises(LinkError, match="fec must be 0"):
        open_link(f"serial:///dev/ttyS0?baud=921600&fec={fec}")


def test_a_serial_address_with_fec_frames_with_it() -> None:
    link = open_link("serial:///dev/ttyS0?baud=921600&fec=16")
    assert link.fec == 16 and link._decoder.fec == 16
    assert open_link("serial:///dev/ttyS0?baud=921600").fec == 0
