"""``railrig controller``: the reference controller as a process of its own.

It opens a link (UDP or serial, the same URLs as the rig), answers every measurement
telegram with a command telegram, and never touches the plant: the wire protocol is all
it knows, as a board would.
"""

from __future__ import annotations

import asyncio
import logging
import os
import subprocess
import sys
import time

from emulator.link import open_link
from emulator.link.udp import free_loopback_ports
from emulator.protocol.signal_map import build_signal_map

from .compiled_tcu import CompiledController
from .config import config_from_profile

log = logging.getLogger(__name__)

POLL_BEFORE_WAIT_NS = 300_000  # poll the link this long before blocking on it
STOP_CHECK_S = 0.05  # a blocked wait looks at the stop event this often


async def serve_controller(profile, link_url: str, *, allow_remote: bool = False,
                           idle_timeout_s: float = 30.0, stop: asyncio.Event | None = None
                           ) -> CompiledController:
    """Answer telegrams until stopped or silent for idle_timeout_s."""
    from emulator.profiles.reader import load_trainset

    signal_map = build_signal_map(load_trainset(profile)).as_dict()
    tcu = CompiledController(config_from_profile(profile), signal_map)
    link = open_link(link_url, allow_remote=allow_remote)
    await link.open()
    try:
        while stop is None or not stop.is_set():
            # poll briefly before blocking, as the rig does in lockstep: a process put to
            # sleep wakes tens of us to ms late on a VM, which would pace the run
            spin_until = time.monotonic_ns() + POLL_BEFORE_WAIT_NS
            while not link.pending() and time.monotonic_ns() < spin_until:
                link.poll()
                os.sched_yield()  # the core to the rig if it waits for one
            if not link.pending() and not await _wait_or_stop(link, idle_timeout_s, stop):
                if stop is None or not stop.is_set():
                    log.info("rig silent for %.0f s: controller stops", idle_timeout_s)
                break
            payloads = link.take()
            for payload in payloads:
                try:
                    link.send(tcu.answer(payload))
                except Exception as exc:  # a telegram we cannot read: count, go on
                    log.warning("unreadable measurement telegram: %s", exc)
            if link.take_damaged() and not payloads:  # a serial frame failed COBS or the
                request = tcu.repeat_request()  # CRC: ask for it again (lockstep rule)
                if request is not None:
                    link.send(request)
    finally:
        link.close()
    return tcu


async def _wait_or_stop(link, timeout_s: float, stop: asyncio.Event | None) -> bool:
    """Wait for a telegram up to timeout_s, looking at stop every STOP_CHECK_S (SIGTERM
    ends a controller at once, not at its idle timeout); True when one is waiting."""
    deadline = time.monotonic() + timeout_s
    while not link.pending():
        left = deadline - time.monotonic()
        if left <= 0 or (stop is not None and stop.is_set()):
            return False
        if await link.wait(min(left, STOP_CHECK_S)):
            return True  # a telegram, or a damaged frame (the caller asks again)
    return True


def stop_controller(child: subprocess.Popen, timeout_s: float = 10.0) -> None:
    """End a controller's process (spawn_controller's, or a board's command line):
    SIGTERM, then kill."""
    if child.poll() is None:
        child.terminate()
    try:
        child.wait(timeout_s)
    except subprocess.TimeoutExpired:
        child.kill()
        child.wait()


def spawn_controller(profile, idle_timeout_s: float = 5.0,
                     quiet: bool = False) -> tuple[str, subprocess.Popen]:
    """Start ``railrig controller`` in a process of its own on loopback UDP; returns the
    link URL the rig opens to reach it, and the process."""
    rig_port, ctl_port = free_loopback_ports(2)
    out = subprocess.DEVNULL if quiet else None
    child = subprocess.Popen(
        [sys.executable, "-m", "emulator.cli", "controller", "--profile", str(profile),
         "--link", f"udp://127.0.0.1:{ctl_port}?peer=127.0.0.1:{rig_port}",
         "--idle-timeout", f"{idle_timeout_s:g}"], stdout=out, stderr=out)
    return f"udp://127.0.0.1:{rig_port}?peer=127.0.0.1:{ctl_port}", child
