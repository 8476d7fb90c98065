"""Fixtures shared by every test folder."""

from __future__ import annotations

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
