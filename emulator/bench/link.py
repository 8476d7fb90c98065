"""Link and pacing benchmark: figures printed, never asserted.

One process pair on loopback: the rig in this process, an echo controller in a child
process answering every measurement at once with a valid command (gates blocked).
Measured in the same run: UDP round trip; the rig in realtime mode for a while, and the
same rig paced by a naive ``asyncio.sleep`` loop for as long (the ratio of their p99
lateness); the rig in lockstep mode, frames per second.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import socket
import subprocess
import sys
import time
from typing import Any

import msgpack
import numpy as np

from emulator.link import open_link
from emulator.link.udp import free_loopback_ports
from emulator.plant.params import TrainsetParams
from emulator.rig.clock import MonotonicClock
from emulator.rig.frame_loop import Rig


class NaiveSleepClock:
    """The obvious pacing: asyncio.sleep until the deadline (the selector's ms rounding)."""

    method = "asyncio.sleep"

    @staticmethod
    def now_ns() -> int:
        return time.monotonic_ns()

    async def sleep_until(self, deadline_ns: int) -> None:
        await asyncio.sleep(max(deadline_ns - time.monotonic_ns(), 0) / 1e9)

    def close(self) -> None:
        pass


def echo_main(argv: list[str]) -> None:
    """Child process: answer each datagram from the peer with the template, seq patched."""
    bind, peer, n_values = int(argv[0]), int(argv[1]), int(argv[2])
    values = json.loads(argv[3]) if len(argv) > 3 else [0] * n_values
    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sock.bind(("127.0.0.1", bind))
    sock.setblocking(False)
    while True:
        # a fast board answers at once: poll for 1 ms before blocking (wake-up latency)
        data = None
        spin_until = time.monotonic_ns() + 1_000_000
        while data is None and time.monotonic_ns() < spin_until:
            with contextlib.suppress(BlockingIOError):
                data = sock.recv(65536)
        if data is None:
            sock.settimeout(30.0)
            try:
                data = sock.recv(65536)
            except TimeoutError:
                return
            finally:
                sock.setblocking(False)
        if data == b"stop":
            return
        if data[:4] == b"ping":
            sock.sendto(data, ("127.0.0.1", peer))
            continue
        version, seq = msgpack.unpackb(data)[:2]  # the rig's version, its sequence
        sock.sendto(msgpack.packb([version, seq, 0, 0, 0, 0, *values]), ("127.0.0.1", peer))


def _start_echo(rig_port: int, echo_port: int, values: list[int]) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "emulator.bench.link", str(echo_port),
                             str(rig_port), str(len(values)), json.dumps(values)])


async def _rtt(rig_port: int, echo_port: int, count: int = 2000) -> np.ndarray:
    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sock.bind(("127.0.0.1", rig_port))
    sock.settimeout(5.0)
    samples = np.empty(count)
    payload = b"ping" + bytes(60)
    try:
        for _ in range(50):  # wait for the child to come up
            sock.sendto(payload, ("127.0.0.1", echo_port))
            try:
                sock.recv(100)
                break
            except TimeoutError:
                continue
        for i in range(count):
            t0 = time.perf_counter_ns()
            sock.sendto(payload, ("127.0.0.1", echo_port))
            sock.recv(100)
            samples[i] = (time.perf_counter_ns() - t0) / 1e3
    finally:
        sock.close()
    return samples


async def _rig_run(params: TrainsetParams, rig_port: int, echo_port: int, mode: str,
                   frames: int, clock=None) -> dict[str, Any]:
    link = open_link(f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{echo_port}")
    await link.open()
    rig = Rig(params, link, mode=mode, clock=clock)
    t0 = time.perf_counter()
    try:
        await rig.run(frames=frames)
    finally:
        link.close()
        rig.clock.close()
    report = rig.report()
    report["wall_s"] = time.perf_counter() - t0
    return report


def link_benchmark(params: TrainsetParams, seconds: float = 10.0) -> dict[str, Any]:
    """Figures of the rig's pacing and link (see the module docstring)."""
    rig_port, echo_port = free_loopback_ports(2)
    from emulator.protocol.signal_map import build_signal_map

    sm = build_signal_map(params)  # the echo answers duties 0.5, gates blocked, zeros
    values = [round((0.5 if s.name.endswith(("duty_a", "duty_b", "duty_c")) else 0.0) / s.scale)
              for s in sm.commands]
    child = _start_echo(rig_port, echo_port, values)
    try:
        rtt = asyncio.run(_rtt(rig_port, echo_port))
        frames = round(seconds * 1000)
        real = asyncio.run(_rig_run(params, rig_port, echo_port, "realtime", frames))
        spin = asyncio.run(_rig_run(params, rig_port, echo_port, "realtime", frames,
                                    clock=MonotonicClock(spin_ns=1_000_000)))
        naive = asyncio.run(_rig_run(params, rig_port, echo_port, "realtime", frames,
                                     clock=NaiveSleepClock()))
        lock = asyncio.run(_rig_run(params, rig_port, echo_port, "lockstep", frames))
    finally:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
            s.sendto(b"stop", ("127.0.0.1", echo_port))
        child.wait(5)
    t, n, f = real["timing"], naive["timing"], spin["timing"]
    return {
        "profile": params.name,
        "seconds": seconds,
        "clock": "timerfd+spin" if sys.platform.startswith("linux") else "sleep+spin",
        "lateness_us_median": round(t["lateness_us_median"], 2),
        "lateness_us_p99": round(t["lateness_us_p99"], 2),
        "lateness_us_max": round(t["lateness_us_max"], 1),
        "late_frame_share": round(t["late_frame_share"], 5),
        "cpu_share": round(t["cpu_share"], 3),
        "compute_us_median": round(t["compute_us_median"], 1),
        "compute_us_p99": round(t["compute_us_p99"], 1),
        "full_spin_lateness_us_median": round(f["lateness_us_median"], 2),
        "full_spin_lateness_us_p99": round(f["lateness_us_p99"], 2),
        "full_spin_late_frame_share": round(f["late_frame_share"], 5),
        "full_spin_cpu_share": round(f["cpu_share"], 3),
        "full_spin_compute_us_median": round(f["compute_us_median"], 1),
        "naive_lateness_us_median": round(n["lateness_us_median"], 1),
        "naive_lateness_us_p99": round(n["lateness_us_p99"], 1),
        "naive_p99_ratio": round(n["lateness_us_p99"] / max(t["lateness_us_p99"], 1e-3), 1),
        "naive_p99_ratio_full_spin": round(n["lateness_us_p99"]
                                           / max(f["lateness_us_p99"], 1e-3), 1),
        "udp_rtt_us_median": round(float(np.median(rtt)), 1),
        "udp_rtt_us_p99": round(float(np.percentile(rtt, 99)), 1),
        "lockstep_frames_per_s": round(lock["frames"] / lock["wall_s"], 1),
        "lockstep_realtime_factor": round(lock["plant_time_s"] / lock["wall_s"], 2),
        "link_valid_share": round(real["link"]["valid"] / max(real["frames"], 1), 4),
    }


if __name__ == "__main__":
    echo_main(sys.argv[1:])
