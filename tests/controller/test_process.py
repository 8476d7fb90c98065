"""The reference controller in a process of its own (`railrig controller`): over a serial
line a damaged frame gets a repeat request at once (the lockstep rule a board follows,
README "A noisy serial line"), and a stop ends it at once, not at its idle timeout."""

from __future__ import annotations

import asyncio
import fcntl
import os
import time
import tty

import msgpack

from emulator.controller.process import serve_controller
from emulator.link import open_link
from emulator.link.framing import FrameDecoder, encode_frame
from emulator.profiles.reader import PROFILES_DIR, load_trainset
from emulator.protocol.header import CFLAG_REPEAT_REQUEST, H_FLAGS, H_SEQUENCE
from emulator.rig.clock import FakeClock
from emulator.rig.frame_loop import Rig

PROFILE = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def test_a_damaged_frame_gets_a_repeat_request_and_a_stop_ends_the_controller() -> None:
    async def go():
        master, slave = os.openpty()
        tty.setraw(master)
        tty.setraw(slave)
        fcntl.fcntl(master, fcntl.F_SETFL, fcntl.fcntl(master, fcntl.F_GETFL) | os.O_NONBLOCK)
        link = open_link("loop://controller-process-test")
        await link.open()
        rig = Rig(load_trainset(PROFILE), link, mode="lockstep", clock=FakeClock())
        rig.start()  # only for its codec and y_0

        def y(k: int) -> bytes:
            return rig.codec.encode(k, k * rig.period_us, rig.period_us, 0, rig._y)

        stop = asyncio.Event()
        ctl = asyncio.create_task(serve_controller(
            PROFILE, f"serial://{os.ttyname(slave)}?baud=921600", idle_timeout_s=30.0,
            stop=stop))
        decoder = FrameDecoder()

        async def read_for(seconds: float) -> list[bytes]:
            got, end = [], time.monotonic() + seconds
            while time.monotonic() < end and not ctl.done() and not got:
                try:
                    got += decoder.feed(os.read(master, 4096))
                except BlockingIOError:
                    await asyncio.sleep(0.005)
            return got

        try:
            for _ in range(600):  # until the controller is up (it compiles or loads)
                os.write(master, encode_frame(y(0)))
                first = await read_for(0.1)
                if first:
                    break
            assert msgpack.unpackb(first[0])[H_SEQUENCE] == 0
            damaged = bytearray(encode_frame(y(1)))
            damaged[5] ^= 0x01  # one bit error: the CRC fails
            os.write(master, bytes(damaged))
            request = await read_for(2.0)
            assert request and msgpack.unpackb(request[0])[H_FLAGS] & CFLAG_REPEAT_REQUEST
            os.write(master, encode_frame(y(1)))
            answer = await read_for(2.0)
            assert answer and msgpack.unpackb(answer[0])[H_SEQUENCE] == 1
            t0 = time.monotonic()
            stop.set()
            await asyncio.wait_for(ctl, 5.0)
            assert time.monotonic() - t0 < 1.0  # not its 30 s idle timeout
        finally:
            stop.set()
            if not ctl.done():
                ctl.cancel()
            link.close()
            os.close(master)
            os.close(slave)
    asyncio.run(go())
