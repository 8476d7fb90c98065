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
WHOLE = np.array([False, False, True, False])  # the third is a flag
DIGEST = 0x1234ABCD
CODEC = TelegramCodec(1, SCALES, SCALES, LO, HI, map_digest=DIGEST, recv_whole=WHOLE)


def test_round_trip_in_wire_units() -> None:
    values = np.array([0.25, 0.7501, 1.0, -12.3])
    tg = CODEC.decode(CODEC.encode(42, 1000, 1000, 3, values))
    assert (tg.sequence, tg.time_us, tg.period_us, tg.flags) == (42, 1000, 1000, 3)
    assert tg.map_digest == DIGEST
    assert tg.values == pytest.approx(values, abs=1e-12)


def test_a_value_that_is_not_finite_is_not_sent() -> None:
    with pytest.raises(ValueError, match="value 3"):
        CODEC.encode(1, 0, 1000, 0, np.array([0.25, 0.5, 1.0, np.nan]))


def test_floats_and_ints_are_both_wire_units() -> None:
    tg = CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, 0, 5000, 5000.0, 1, -123]))
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
        CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, 0, True, 0, 0, 0]))
    assert err.value.kind == "type"


@pytest.mark.parametrize("digest", [0, DIGEST])
def test_a_map_digest_of_zero_or_our_own_is_accepted(digest: int) -> None:
    tg = CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, digest, 0, 0, 1, 0]))
    assert tg.map_digest == digest


@pytest.mark.parametrize("digest", [1, DIGEST + 1, 2**32 - 1, -DIGEST])
def test_another_map_digest_is_rejected(digest: int) -> None:
    with pytest.raises(TelegramError, match="another signal map") as err:
        CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, digest, 0, 0, 1, 0]))
    assert err.value.kind == "map"


@pytest.mark.parametrize("flag", [0.5, 0.999, 1e-9])
def test_a_fractional_flag_is_rejected(flag: float) -> None:
    # the rig's map marks flags, enums and counts whole: 0.5 "closed" means nothing
    with pytest.raises(TelegramError, match="whole numbers only") as err:
        CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, 0, 0, 0, flag, 0]))
    assert err.value.kind == "fractional"


def test_a_whole_flag_sent_as_a_float_is_accepted() -> None:
    assert CODEC.decode(msgpack.packb([1, 0, 0, 0, 0, 0, 0, 0, 1.0, 0])).values[2] == 1.0


@pytest.mark.parametrize("header", [[1, 0, 0, -1000, 0, 0], [1, 0, 0, 0, -1, 0]])
def test_a_negative_period_or_flags_is_rejected(header) -> None:
    # both are unsigned (protocol/header.py); -1 would otherwise read as every flag set
    with pytest.raises(TelegramError, match="negative") as err:
        CODEC.decode(msgpack.packb([*header, 0, 0, 1, 0]))
    assert err.value.kind == "range"


VALID = [1, 7, 0, 1000, 0, 0, 2500, 5000, 1, -123]  # version 1, seq 7, values in range


@pytest.mark.parametrize(("index", "value", "kind"), [
    (0, 2, "version"), (0, 1.0, "type"), (0, True, "type"),
    (1, 1.5, "type"), (1, "7", "type"), (1, None, "type"),
    (3, -1, "range"), (3, 1000.5, "type"), (4, -1, "range"), (5, 7, "map"),
    (6, 15000, "range"), (6, -1, "range"), (6, float("nan"), "non_finite"),
    (6, float("inf"), "non_finite"), (6, "x", "type"), (6, None, "type"),
    (6, True, "type"), (6, b"\x01", "type"), (8, 0.5, "fractional"), (8, 2, "range"),
    (9, 10001, "range"), (9, -10001, "range"),
])
def test_one_hostile_field_in_a_valid_telegram_gets_its_kind(index, value, kind) -> None:
    # a telegram valid but for one field is refused with the kind header.py's REJECTS
    # names for that fault (a random array almost never comes near the valid case, so it
    # cannot show that each rule is there); the valid one is accepted
    assert CODEC.decode(msgpack.packb(VALID)).sequence == 7
    hostile = list(VALID)
    hostile[index] = value
    with pytest.raises(TelegramError) as err:
        CODEC.decode(msgpack.packb(hostile))
    assert err.value.kind == kind, err.value


@pytest.mark.parametrize(("payload", "kind"), [
    (msgpack.packb(VALID[:-1]), "length"), (msgpack.packb([*VALID, 0]), "length"),
    (msgpack.packb({"a": 1}), "malformed"), (msgpack.packb(7), "malformed"),
    (b"\xc1", "malformed"), (msgpack.packb(VALID) + b"\x00", "malformed"),
])
def test_a_telegram_of_the_wrong_shape_gets_its_kind(payload, kind) -> None:
    with pytest.raises(TelegramError) as err:
        CODEC.decode(payload)
    assert err.value.kind == kind, err.value


def test_a_payload_in_any_buffer_reads_as_its_bytes() -> None:
    """The compiled reader is bound to bytes (kernel_cache.entry_point): a bytearray, a
    memoryview or an array, contiguous or not, of bytes or of wider items, flat or not,
    is read as the bytes it holds (handed on as they are, an array of 16-bit items or of
    two rows was not read as its bytes), and what is no buffer is refused as before,
    with a TypeError, never read."""
    payload = msgpack.packb(VALID)
    expected = CODEC.decode(payload)
    spread = np.zeros(2 * len(payload), dtype=np.uint8)
    spread[::2] = np.frombuffer(payload, np.uint8)  # every other byte: not contiguous
    assert len(payload) % 2 == 0  # (so that it fills an array of 16-bit items too)
    for held in (bytearray(payload), memoryview(payload), np.frombuffer(payload, np.uint8),
                 spread[::2], memoryview(spread)[::2], np.frombuffer(payload, np.int16),
                 np.frombuffer(payload, np.uint8).reshape(2, -1)):
        got = CODEC.decode(held)
        assert got[:6] == expected[:6]
        assert got.values.tobytes() == expected.values.tobytes()
    for not_a_buffer in ("text", 5, None, [1, 2]):
        with pytest.raises(TypeError):
            CODEC.decode(not_a_buffer)
