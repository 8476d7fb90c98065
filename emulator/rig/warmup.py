"""Compile (first start) or load (later starts) the plant kernel and the telegram codec
before the clock starts."""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

from emulator.link.telegram import TelegramCodec
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
    codec = TelegramCodec(2, np.ones(1), np.ones(1), np.zeros(1), np.ones(1))
    codec.decode(codec.encode(0, 0, 1000, 0, np.zeros(1)))
    return time.perf_counter() - t0
