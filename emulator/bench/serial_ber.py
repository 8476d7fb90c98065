"""The serial link under bit errors: the rig and a controller in its own process, joined
by the noisy cable (noisy_serial.py), once clean and once at each bit error rate asked
for, in the same run; figures printed, nothing asserted.

Lockstep: the real-time factor at each rate against the clean cable's, what the line
spoiled (its own log), what the rig caught and how it recovered (measurements said again
by cause). Real time: frames held against the share of command frames the line spoiled,
and watchdog trips. In both, telegrams accepted by the rig against the frames that
crossed the line untouched: more accepted than untouched would be a spoiled telegram let
through (the CRC's job to prevent).

The controller is the reference controller (``railrig controller``) by default, or a
board's command with ``{device}`` for its serial device and ``{fec}`` for the parity
bytes of forward error correction (the board kit's example: ``kit/example_controller
--serial {device} --baud 921600 --fec {fec} --frames 100000000 --quiet``). With ``fec``
the whole sweep is run with forward error correction at both ends (framing.py); the
figures are then set against the clean cable with it and, when fec 0 is in the same
run, without it.
Pseudo-terminals do not limit the baud rate: a real UART adds its bytes' time.
"""

from __future__ import annotations

import asyncio
import json
import shlex
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

from emulator.controller.process import stop_controller
from emulator.link import open_link
from emulator.link.framing import FramingStats
from emulator.plant.params import TrainsetParams
from emulator.rig.clock import MonotonicClock
from emulator.rig.frame_loop import Rig

BAUD = 921_600


class NoisyCable:
    """The relay process: ``with NoisyCable(ber, seed) as cable:`` gives cable.rig and
    cable.board (device paths); cable.log after the block."""

    def __init__(self, ber: float, seed: int = 1, drop: float = 0.0,
                 insert: float = 0.0) -> None:
        self.args = ["--ber", repr(ber), "--seed", str(seed), "--drop", repr(drop),
                     "--insert", repr(insert)]
        self.log: dict[str, Any] = {}

    def __enter__(self) -> NoisyCable:
        self._dir = tempfile.TemporaryDirectory(prefix="railrig-cable-")
        self._report = Path(self._dir.name) / "line.json"
        self._child = subprocess.Popen(
            [sys.executable, "-m", "emulator.bench.noisy_serial", *self.args,
             "--report", str(self._report)], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
            text=True)
        assert self._child.stdout is not None
        first = self._child.stdout.readline().split()
        names = dict(item.split("=", 1) for item in first)
        if set(names) != {"rig", "board"}:
            self._child.kill()
            raise RuntimeError(f"the noisy cable did not start: {first!r}")
        self.rig, self.board = names["rig"], names["board"]
        return self

    def __exit__(self, *exc) -> None:
        assert self._child.stdin is not None
        self._child.stdin.close()  # the relay's signal to write its log and end
        try:
            self._child.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self._child.kill()
        if self._report.exists():
            self.log = json.loads(self._report.read_text())
        self._dir.cleanup()


def serial_url(device: str, fec: int = 0) -> str:
    """The serial link's address on the cable, with forward error correction if fec."""
    return f"serial://{device}?baud={BAUD}" + (f"&fec={fec}" if fec else "")


def start_controller(profile: Path, device: str, board: str | None,
                     fec: int = 0) -> subprocess.Popen:
    """The controller on the board's end: ``board`` with {device} and {fec}, or the
    reference."""
    if board:
        argv = shlex.split(board.format(device=device, fec=fec))
    else:
        argv = [sys.executable, "-m", "emulator.cli", "controller", "--profile",
                str(profile), "--link", serial_url(device, fec), "--idle-timeout", "5"]
    return subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


async def run_over_cable(params: TrainsetParams, device: str, mode: str,
                         seconds: float | None = None,
                         frames: int | None = None, setup=None,
                         fec: int = 0) -> dict[str, Any]:
    """The rig on ``device`` for ``seconds`` of wall time or ``frames`` frames (after
    the controller's first answer, in lockstep); its report and the timing.
    ``setup(rig)`` is called before the first frame (tests record through it); a
    recording started there is closed at the end. ``fec``: forward error correction's
    parity bytes (0: none; the board must use the same)."""
    link = open_link(serial_url(device, fec))
    await link.open()
    rig = Rig(params, link, mode=mode, clock=MonotonicClock())
    if setup is not None:
        setup(rig)
    try:
        if mode == "lockstep":  # the controller's first answer (its start-up) untimed
            await rig.run(frames=1)
        frame0, t0 = rig.frame, time.perf_counter()
        held0 = rig.health.missing
        stop = asyncio.Event()
        if seconds is not None:
            asyncio.get_running_loop().call_later(seconds, stop.set)
        await rig.run(frames=None if frames is None else frame0 + frames, stop=stop)
        wall = time.perf_counter() - t0
        await _read_what_is_in_flight(link)
    finally:
        link.close()
        rig.clock.close()
        if rig.recorder is not None:
            rig.recorder.close()
    report = rig.report()
    frames = rig.frame - frame0
    return {"frames": frames, "wall_s": wall,
            "realtime_factor": frames * rig.period_us * 1e-6 / wall,
            "held": rig.health.missing - held0, "report": report}


async def _read_what_is_in_flight(link, quiet_s: float = 0.2, longest_s: float = 3.0) -> None:
    """Go on reading after the run until the line has been quiet for ``quiet_s`` (at
    most ``longest_s``), so that the rig's framing counters hold every frame the cable
    delivered: the answers in flight at the stop, and in real time a busy board's
    backlog (it answers measurements it had queued after the rig stopped sending). The
    frames read are counted, not used."""
    stats = link.stats.framing
    loop = asyncio.get_running_loop()
    deadline = loop.time() + longest_s
    seen = (-1, -1)
    while loop.time() < deadline:
        now = (stats.frames + stats.dropped, stats.discarded_bytes)
        if now == seen:
            return
        seen = now
        await asyncio.sleep(quiet_s)


def serial_ber_benchmark(params: TrainsetParams, profile: Path, bers: list[float],
                         mode: str = "lockstep", seconds: float = 10.0, seed: int = 1,
                         board: str | None = None,
                         fecs: tuple[int, ...] = (0,)) -> dict[str, Any]:
    """Figures of each bit error rate, the clean cable first, for each forward error
    correction in fecs (see the module docstring)."""
    rows = []
    for fec in fecs:
        for ber in [0.0, *[b for b in bers if b > 0]]:
            rows.append(_one_rate(params, profile, ber, fec, mode, seconds, seed, board))
    clean = {row["fec"]: row["realtime_factor"] or float("nan")
             for row in rows if row["ber"] == 0.0}
    for row in rows:
        row["factor_vs_clean"] = round(row["realtime_factor"] / clean[row["fec"]], 3)
        if 0 in clean:
            row["factor_vs_plain_clean"] = round(row["realtime_factor"] / clean[0], 3)
    return {"mode": mode, "seconds_each": seconds, "controller": board or "reference",
            "rows": rows}


def _one_rate(params: TrainsetParams, profile: Path, ber: float, fec: int, mode: str,
              seconds: float, seed: int, board: str | None) -> dict[str, Any]:
    with NoisyCable(ber, seed) as cable:
        child = start_controller(profile, cable.board, board, fec)
        try:
            if mode == "realtime":  # let the controller come up before the clock runs
                time.sleep(3.0 if board else 8.0)
            run = asyncio.run(run_over_cable(params, cable.rig, mode, seconds, fec=fec))
        finally:
            stop_controller(child)
    rep = run["report"]
    link = rep["link"]
    framing = rep["transport"]["framing"]
    to_rig, to_board = cable.log["to_rig"], cable.log["to_board"]
    mended = framing["fec_mended_frames"]
    return {
        "ber": ber, "fec": fec, "frames": run["frames"], "wall_s": round(run["wall_s"], 2),
        "realtime_factor": round(run["realtime_factor"], 2),
        "spoiled_to_rig": to_rig["spoiled"], "spoiled_to_board": to_board["spoiled"],
        "frames_to_rig": to_rig["frames"], "clean_to_rig": to_rig["clean"],
        "rig_good_frames": framing["frames"], "fec_mended_to_rig": mended,
        "rig_framing_errors": FramingStats(**framing).dropped,
        "rejected": link["rejected"], "accepted": link["accepted"],
        "held": run["held"], "watchdog_trips": link["watchdog_trips"],
        "repeats": rep["lockstep_repeat_causes"],
        "repeat_requests": link["repeat_requests"],
        # frames the rig decoded beyond those that crossed untouched or were mended by
        # the code: a spoiled frame let through (the CRC's job to prevent). With FEC a
        # frame mended wrongly and let through counts as mended, so this cannot show it
        # (tests/boardkit/test_noisy_line.py compares the recorded run instead)
        "accepted_beyond_clean": max(framing["frames"] - to_rig["clean"] - mended, 0),
    }
