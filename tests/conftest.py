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
#
# Each of the two then runs FRESH_DIGEST's scenario once the other has written its
# kernels: one run with the plant's and the rig's kernels compiled in its own process
# (the controller's loaded), one the other way round. Their digests reach the workers in
# FRESH_DIGESTS_ENV, and tests/scenario/test_determinism.py compares them with a run that
# loads everything from the cache, instead of compiling everything once more.

#: a 4 s wet start from the scenario library, seed 3: the sha256 of its recording, then
#: how often the plant's frame and the controller's answer (its period between the
#: telegrams) were loaded from numba's cache and how often compiled, in this process
#: ("digest hits misses")
FRESH_DIGEST = """
import asyncio, dataclasses, hashlib, sys
from emulator.scenario import load_scenario, run_scenario
scenario = dataclasses.replace(load_scenario(sys.argv[1]), duration_s=4.0)
run = asyncio.run(run_scenario(scenario, seed=3))
from emulator.controller.compiled_tcu import _answer_plain
from emulator.plant.kernel import advance_frame
kernels = (advance_frame.stats, _answer_plain.stats)
print(hashlib.sha256(run.recording.data.tobytes()).hexdigest(),
      sum(sum(k.cache_hits.values()) for k in kernels),
      sum(sum(k.cache_misses.values()) for k in kernels))
"""
FRESH_DIGEST_SCENARIO = PROFILES_DIR / "scenarios" / "wet-gradient-start.toml"
FRESH_DIGESTS_ENV = "RAILRIG_TEST_FRESH_DIGESTS"

#: the kernels the compile processes compiled fresh, and any of them without numba's
#: runtime that returns an array (emulator.kernel_cache.returned_arrays), as JSON
FRESH_RETURNS_ENV = "RAILRIG_TEST_FRESH_RETURNS"

# a compile process says "compiled" with what returned_arrays found in it (JSON), waits
# for a line on its input, then (if the line is "digest") prints the digest of
# FRESH_DIGEST's run
_THEN_DIGEST = """
import json
from emulator.kernel_cache import returned_arrays
_seen, _bad = returned_arrays()
print("compiled", json.dumps({"seen": sorted(_seen), "bad": _bad}), flush=True)
if sys.stdin.readline().strip() == "digest":
    sys.argv[1:] = [sys.argv[2]]
""" + FRESH_DIGEST

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
# the serial link's forward error correction, which several test folders use (about 6 s
# of compiling): this process ends about 14 s before the plant's, so it costs no time
from emulator.link.framing import encode_frame, mend_frame
mend_frame(encode_frame(bytes(40), fec=8)[:-1], 8)
""",
}


def _kernels_cached() -> bool:
    """Whether numba's cache beside the sources holds the two big kernels (the plant's
    frame, the controller's answer)."""
    import os

    from emulator.controller import compiled_tcu
    from emulator.rig.warmup import kernel_cached  # (importing emulator refreshes a
    # stale cache: emulator/kernel_cache.py)

    if os.environ.get("NUMBA_CACHE_DIR"):
        return False  # cached elsewhere: let the compile processes look
    cache = Path(compiled_tcu.__file__).parent / "__pycache__"
    return kernel_cached() and any(cache.glob("compiled_tcu._answer_plain-*.nbi"))


def pytest_configure(config: pytest.Config) -> None:
    if hasattr(config, "workerinput"):  # a worker: the controller has done it
        return
    workers = getattr(config.option, "numprocesses", None)
    if not isinstance(workers, int) or workers < 2 or _kernels_cached():
        return
    import contextlib
    import os
    import subprocess
    import sys
    import tempfile
    import time

    from emulator.kernel_cache import COMPILED_PACKAGES, PACKAGE_DIR

    if not os.environ.get("NUMBA_CACHE_DIR"):
        # a cache that holds some kernels and not others (a run of one test folder) would
        # let a compile process load what it should compile: its run would not be fresh
        for package in COMPILED_PACKAGES:
            for path in (PACKAGE_DIR / package / "__pycache__").glob("*.nb[ic]"):
                path.unlink(missing_ok=True)
    profile = str(PROFILES_DIR / "trainsets" / "tern-25kv.toml")
    t0 = time.monotonic()
    digests = {}
    with contextlib.ExitStack() as stack:
        logs = {what: stack.enter_context(tempfile.TemporaryFile("w+"))  # (a pipe could
                for what in _COMPILE}                                      # fill up)
        jobs = {what: subprocess.Popen([sys.executable, "-c", code + _THEN_DIGEST, profile,
                                        str(FRESH_DIGEST_SCENARIO)],
                                       stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                       stderr=logs[what], text=True)
                for what, code in _COMPILE.items()}
        # both compiled (or failed) before either runs its digest: each run then has the
        # other side's kernels in the cache
        said = {what: job.stdout.readline().strip().split(" ", 1)
                for what, job in jobs.items()}
        compiled = {what: words[0] == "compiled" for what, words in said.items()}
        order = "digest\n" if all(compiled.values()) else "stop\n"
        for job in jobs.values():  # the two runs side by side
            with contextlib.suppress(OSError):  # (one that died has no reader)
                job.stdin.write(order)
                job.stdin.flush()
        for what, job in jobs.items():
            try:
                out, _ = job.communicate(timeout=900)
                logs[what].seek(0)
                err = logs[what].read()
            except subprocess.TimeoutExpired:
                job.kill()
                out, _ = job.communicate()
                err = "timed out"
            if job.returncode:  # the tests that need it will fail and say why
                tail = err.strip().splitlines()[-1:] or ["?"]
                print(f"compiling {what} for the test workers failed: {tail[0]}")
            elif out.strip():
                digest, _hits, misses = out.split()
                if int(misses) >= 1:  # it compiled its side (else no fresh run to offer)
                    digests[what] = digest
    import json

    if len(digests) == len(jobs):  # the workers inherit the environment
        os.environ[FRESH_DIGESTS_ENV] = ",".join(digests.values())
    if all(compiled.values()):
        found = [json.loads(words[1]) for words in said.values()]
        os.environ[FRESH_RETURNS_ENV] = json.dumps(
            {"seen": sorted({n for f in found for n in f["seen"]}),
             "bad": sorted({b for f in found for b in f["bad"]})})
    print(f"compiled the kernels for the test workers in {time.monotonic() - t0:.0f} s")
