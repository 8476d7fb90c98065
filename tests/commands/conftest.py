"""Helpers of the command tests."""

from __future__ import annotations

import asyncio

import pytest


@pytest.fixture
def run():
    return asyncio.run
