"""Same scenario, seed and controller in lockstep: the same recording, bit for bit
(DESIGN.md, "State and numbers"); a different seed changes the sensor noise."""

from __future__ import annotations

import asyncio
import dataclasses
from pathlib import Path

import numpy as np

from emulator.scenario import load_scenario, run_scenario

SCENARIO = Path(__file__).parents[2] / "profiles" / "scenarios" / "speed-sensor-loss.toml"


def _run(seed: int) -> np.ndarray:
    scenario = dataclasses.replace(load_scenario(SCENARIO), duration_s=2.5)
    return asyncio.run(run_scenario(scenario, seed=seed)).recording


def test_same_seed_gives_an_identical_recording() -> None:
    a, b = _run(7), _run(7)
    assert a.columns == b.columns
    assert a.data.shape == b.data.shape == (2500, len(a.columns))
    assert a.data.tobytes() == b.data.tobytes()
    assert a.marks == b.marks


def test_another_seed_changes_the_noise() -> None:
    a, b = _run(7), _run(8)
    assert a.data.tobytes() != b.data.tobytes()
