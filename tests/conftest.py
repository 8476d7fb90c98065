"""Fixtures shared by every test folder."""

from __future__ import annotations

import pytest

from emulator.profiles.reader import PROFILES_DIR, load_trainset


@pytest.fixture(scope="session")
def params():
    """The demo trainset's parameters (25 kV 50 Hz variant)."""
    return load_trainset(PROFILES_DIR / "trainsets" / "tern-25kv.toml")
