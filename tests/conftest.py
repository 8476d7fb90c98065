"""Fixtures shared by every test folder."""

from __future__ import annotations

from pathlib import Path

import pytest

from emulator.profiles.reader import PROFILES_DIR, load_trainset


@pytest.fixture(scope="session")
def params():
    """The demo trainset's parameters (25 kV 50 Hz variant)."""
    return load_trainset(PROFILES_DIR / "trainsets" / "tern-25kv.toml")


async def wait_until(predicate, timeout_s: float = 30.0, every_s: float = 0.02,
                     what: str = "the condition") -> None:
    """Wait for ``predicate()`` to hold (a busy 2-core machine may take its time);
    fail with ``what`` if it does not within ``timeout_s``."""
    import asyncio
    import time

    deadline = time.monotonic() + timeout_s
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"{what} did not happen within {timeout_s:g} s")
        await asyncio.sleep(every_s)


# --- numba's cache filled once, before the workers start ------------------------------
# On a fresh clone every test worker would compile the same kernels at once (about a
# minute of CPU each on the 2-core machine). The controller of the workers compiles them
# first instead, the plant's side and the controller's period in two processes side by
# side, so the workers load them from numba's cache (DEVELOPERS.md, "Throughput").
_COMPILE = {
    "the plant and the rig": """
import asyncio, sys, tempfile
from emulator.link import open_link
from emulator.profiles.reader import load_trainset
from emulator.rig.frame_loop import Rig
link = open_link("loop://railrig-test-compile")
asyncio.run(link.open())
rig = Rig(load_trainset(sys.argv[1]), link, mode="lockstep", seed=0)
rig.start()
with tempfile.TemporaryDirectory() as folder:
    rig.start_recording(folder + "/compile.rrec")  # its encoder compiles on opening
    rig._step(rig.period_us)  # a frame with no answer: the recorded row's path
    rig.recorder.close()
""",
    "the reference controller": """
import sys
from emulator.controller.compiled_tcu import CompiledController
from emulator.controller.config import config_from_profile
from emulator.profiles.reader import load_trainset
from emulator.protocol.signal_map import build_signal_map
CompiledController(config_from_profile(sys.argv[1]),
                   build_signal_map(load_trainset(sys.argv[1])).as_dict())
""",
}


def _kernels_cached() -> bool:
    """Whether numba's cache beside the sources holds the two big kernels."""
    import os

    from emulator.controller import period_kernel
    from emulator.rig.warmup import kernel_cached  # (importing emulator refreshes a
    # stale cache: emulator/kernel_cache.py)

    if os.environ.get("NUMBA_CACHE_DIR"):
        return False  # cached elsewhere: let the compile processes look
    cache = Path(period_kernel.__file__).parent / "__pycache__"
    return kernel_cached() and any(cache.glob("period_kernel.period-*.nbi"))


def pytest_configure(config: pytest.Config) -> None:
    if hasattr(config, "workerinput"):  # a worker: the controller has done it
        return
    workers = getattr(config.option, "numprocesses", None)
    if not isinstance(workers, int) or workers < 2 or _kernels_cached():
        return
    import subprocess
    import sys
    import time

    profile = str(PROFILES_DIR / "trainsets" / "tern-25kv.toml")
    t0 = time.monotonic()
    jobs = {what: subprocess.Popen([sys.executable, "-c", code, profile],
                                   stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
            for what, code in _COMPILE.items()}
    for what, job in jobs.items():
        try:
            _, err = job.communicate(timeout=900)
        except subprocess.TimeoutExpired:
            job.kill()
            job.communicate()
            err = b"timed out"
        if job.returncode:  # the tests that need it will fail and say why
            tail = err.decode(errors="replace").strip().splitlines()[-1:] or ["?"]
            print(f"compiling {what} for the test workers failed: {tail[0]}")
    print(f"compiled the kernels for the test workers in {time.monotonic() - t0:.0f} s")

