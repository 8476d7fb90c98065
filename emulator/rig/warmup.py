"""Compile (first start) or load (later starts) the plant kernel before the clock starts."""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path

from emulator.plant import Plant
from emulator.plant import kernel as _kernel
from emulator.plant.params import TrainsetParams


def kernel_cached() -> bool:
    """Whether numba's on-disk cache already holds the compiled frame kernel."""
    cache = Path(_kernel.__file__).parent / "__pycache__"
    return any(cache.glob("kernel.advance_frame-*.nbi"))


def warm_up(params: TrainsetParams, say: Callable[[str], None] = print) -> float:
    """Run one frame on a throwaway plant so that the real one starts compiled; seconds."""
    if not kernel_cached():
        say("Compiling the plant kernel (first start only; later starts load it from the "
            "cache)...")
    t0 = time.perf_counter()
    Plant(params).advance(None)
    return time.perf_counter() - t0
