"""Telegram codec: round trip and hostile input (only TelegramError ever comes out)."""

from __future__ import annotations

import msgpack
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from emulator.link.telegram import REJECT_KINDS, TelegramCodec, TelegramError

SCALES = np.array([1e-4, 1e-4, 1.0, 0.1])
LO = np.array([0.0, 0.0, 0.0, -1000.0])
HI = np.array([1.0, 1.0, 1.0, 1000.0])
CODEC = TelegramCodec(1, SCALES, SCALES, LO, HI)


def test_round_trip_in_wire_units() -> None:
    values = np.array([0.25, 0.7501, 1.0, -12.3])
    tg = CODEC.decode(CODEC.encode(42, 1000, 1000, 3, values))
    assert (tg.sequence, tg.time_us, tg.period_us, tg.flags) == (42, 1000, 1000, 3)
    assert tg.values == pytest.approx(values, abs=1e-12)


def test_a_value_that_is_not_finite_is_not_sent() -> None:
    with pytest.raises(ValueError, match="value 3"):
        CODEC.encode(1, 0, 1000, 0, np.array([0.25, 0.5, 1.0, np.nan]))


def test_floats_and_ints_are_both_wire_units() -> None:
    tg = CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, 5000, 5000.0, 1, -123]))
    assert tg.values == pytest.approx([0.5, 0.5, 1.0, -12.3])


@given(st.binary(max_size=200))
def test_random_bytes_never_escape_as_another_exception(data: bytes) -> None:
    try:
        CODEC.decode(data)
    except TelegramError as exc:
        assert exc.kind in REJECT_KINDS


@given(st.lists(st.one_of(st.integers(-2**63, 2**64 - 1), st.floats(), st.text(max_size=3),
                          st.none(), st.booleans(), st.binary(max_size=3),
                          st.lists(st.integers(-5, 5), max_size=2)), max_size=12))
def test_random_arrays_are_accepted_only_when_valid(items) -> None:
    payload = msgpack.packb(items)
    try:
        tg = CODEC.decode(payload)
    except TelegramError as exc:
        assert exc.kind in REJECT_KINDS
        return
    assert np.all(np.isfinite(tg.values))
    assert np.all(tg.values >= LO) and np.all(tg.values <= HI)


def test_booleans_are_not_numbers() -> None:
    with pytest.raises(TelegramError) as err:
        CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, True, 0, 0, 0]))
    assert err.value.kind == "type"
