"""One campaign run, where a worker is: from the texts it was sent to a result.

``execute_run`` is what a Dask worker calls (or this process, for one run): it writes
the run's texts into a folder of its own, starts the controller under test when the
campaign gives a command for it (on two free loopback ports found here, so copies run
side by side), runs the scenario with the timeout, and returns a plain dict that ships
back to the campaign: the verdict, each check's figure, the timings, the recording's
frame digest and, when the campaign keeps it, the recording's bytes. A run never raises:
whatever goes wrong is its verdict (``error`` with the reason, or ``timeout``).
"""

from __future__ import annotations

import asyncio
import contextlib
import os
import shlex
import signal
import socket
import subprocess
import tempfile
import time
from pathlib import Path
from typing import Any

from emulator.link.udp import free_loopback_ports

#: the verdicts a run can get
PASS, FAIL, ERROR, TIMEOUT = "pass", "fail", "error", "timeout"
#: lines of a controller process's output kept for the reason of an error
LOG_TAIL = 20
#: and of characters (a reason is one field of results.csv)
LOG_CHARS = 4000


def execute_run(case: dict[str, Any], timeout_s: float) -> dict[str, Any]:
    """Run one case (``RunCase.as_dict()``) within timeout_s of wall time."""
    t0 = time.perf_counter()
    out = error_result(case, "", worker=f"{socket.gethostname()}:{os.getpid()}")
    with tempfile.TemporaryDirectory(prefix="railrig-run-") as tmp:
        where = Path(tmp)
        record = where / "run.rrec"
        try:
            _run(case, where, record, timeout_s, out)
        except Exception as exc:  # a run's failure is its verdict, never the campaign's
            out["verdict"] = ERROR
            out["reason"] = f"{type(exc).__name__}: {exc}".strip()
        keep = case.get("record", "failed")
        if record.is_file() and record.stat().st_size and (
                keep == "all" or (keep == "failed" and out["verdict"] != PASS)):
            out["recording"] = record.read_bytes()
    out["wall_s"] = time.perf_counter() - t0
    if len(out["reason"]) > 2 * LOG_CHARS:
        out["reason"] = out["reason"][:2 * LOG_CHARS] + "..."
    return out


def error_result(case: dict[str, Any], reason: str, worker: str = "") -> dict[str, Any]:
    """A run's result dict with the verdict error and nothing measured (what a run starts
    from, and what a run the cluster lost ends as)."""
    return {**{key: case[key] for key in ("run", "digest", "label", "scenario", "trainset",
                                          "seed", "values")},
            "verdict": ERROR, "failed_checks": [], "checks": [], "wall_s": 0.0, "sim_s": 0.0,
            "realtime_factor": 0.0, "recording_digest": "", "recording": None,
            "reason": reason, "worker": worker}


def _run(case: dict, where: Path, record: Path, timeout_s: float, out: dict) -> None:
    from emulator.scenario.runner import run_scenario
    from emulator.scenario.spec import load_scenario
    from emulator.scenario.texts import rebuild

    scenario_path, trainset = rebuild(case["texts"], where / "texts")
    scenario = load_scenario(scenario_path, trainset=trainset)
    url, command = case["controller"]["url"], case["controller"]["command"]
    proc = None
    log = where / "controller.log"
    if "{rig}" in url:
        rig, bind = (f"127.0.0.1:{p}" for p in free_loopback_ports(2))
        url = url.replace("{rig}", rig).replace("{bind}", bind)
    else:
        rig = bind = ""
    if command:
        values = {"{rig}": rig, "{bind}": bind, "{trainset}": str(trainset)}
        args = [_fill(a, values) for a in shlex.split(command)]
        with log.open("wb") as fh:
            proc = subprocess.Popen(args, stdout=fh, stderr=subprocess.STDOUT, cwd=where,
                                    stdin=subprocess.DEVNULL, start_new_session=True,
                                    preexec_fn=_death_signal())
    deadline = time.monotonic() + timeout_s

    def progress(*_) -> None:  # called every 250 frames: an in-process run never awaits
        if time.monotonic() > deadline:  # long enough for wait_for to cancel it
            raise TimeoutError

    try:
        result = asyncio.run(_bounded(run_scenario(
            scenario, controller=url, mode=case["mode"], seed=case["seed"], record=record,
            progress=progress), proc, timeout_s))
    except TimeoutError:
        out["verdict"] = TIMEOUT
        out["reason"] = f"not finished within {timeout_s:g} s of wall time"
        return
    except _ControllerExitedError as exc:
        raise RuntimeError(f"{exc}; its output ends:\n{_tail(log)}") from None
    finally:
        if proc is not None:
            _stop(proc)
    rec = result.recording
    out["checks"] = [{"name": r.spec.name, "passed": r.passed, "measured": r.measured,
                      "value": r.value} for r in result.results]
    out["failed_checks"] = [r.spec.name for r in result.results if not r.passed]
    out["verdict"] = PASS if result.passed else FAIL
    out["sim_s"] = float(rec.column("time_s")[-1]) if len(rec.data) else 0.0
    out["realtime_factor"] = out["sim_s"] / result.wall_s if result.wall_s > 0 else 0.0
    out["recording_digest"] = rec.frames_digest()


class _ControllerExitedError(RuntimeError):
    """The controller process of a run ended before the run did."""


async def _bounded(run, proc: subprocess.Popen | None, timeout_s: float):
    """The run, cancelled at timeout_s (TimeoutError) or when its controller process
    ends first (_ControllerExitedError)."""
    task = asyncio.ensure_future(run)
    if proc is None:
        return await asyncio.wait_for(task, timeout_s)
    deadline = time.monotonic() + timeout_s
    while not task.done():
        await asyncio.wait({task}, timeout=0.2)
        if task.done():
            break
        code = proc.poll()
        if code is not None or time.monotonic() > deadline:
            task.cancel()
            with contextlib.suppress(asyncio.CancelledError, Exception):
                await task
            if code is not None:
                raise _ControllerExitedError(f"the controller process exited with code {code}")
            raise TimeoutError
    return task.result()


def _stop(proc: subprocess.Popen) -> None:
    """End a controller process and whatever it started (its own session)."""
    for sig, wait in ((signal.SIGTERM, 5.0), (signal.SIGKILL, 5.0)):
        if proc.poll() is not None:
            return
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(proc.pid, sig)
        with contextlib.suppress(subprocess.TimeoutExpired):
            proc.wait(wait)


def _fill(arg: str, values: dict[str, str]) -> str:
    """A command's argument with its placeholders filled ({{ and }}: literal braces)."""
    out = []
    for part in arg.split("{{"):
        for key, value in values.items():
            part = part.replace(key, value)
        out.append(part.replace("}}", "}"))
    return "{".join(out)


def _death_signal():
    """A function for the controller's process to call before it starts (Linux): end it
    when the worker that started it ends, however that happens (a killed worker runs no
    clean-up of its own). Resolved here, in the worker: the child only calls it (no
    imports or locks between fork and exec). None where prctl is not there."""
    try:
        import ctypes

        prctl = ctypes.CDLL(None, use_errno=True).prctl
    except (OSError, AttributeError):
        return None
    sigkill = int(signal.SIGKILL)
    return lambda: prctl(1, sigkill)  # PR_SET_PDEATHSIG


def _tail(log: Path) -> str:
    try:
        lines = log.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return "(no output)"
    tail = "\n".join(lines[-LOG_TAIL:]) or "(no output)"
    return tail if len(tail) <= LOG_CHARS else "..." + tail[-LOG_CHARS:]
