"""The compiled msgpack array codec (emulator/link/msgpack_array.py) against the msgpack
package (the reference implementation of the msgpack specification on PyPI): the same
bytes for every integer telegram, the same numbers read back, and every other input
handed back to the long path."""

from __future__ import annotations

import msgpack
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.link import msgpack_array as ma

INT64 = st.integers(-(2**63), 2**63 - 1)
# the edges of each of the specification's integer forms, and everything between
EDGES = st.sampled_from([0, 127, 128, 255, 256, 65535, 65536, 2**32 - 1, 2**32, -1, -32,
                         -33, -128, -129, -32768, -32769, -(2**31), -(2**31) - 1,
                         2**63 - 1, -(2**63)])
NUMBERS = st.one_of(EDGES, INT64)
# values come as floats (physical x inverse scale): integers a float holds exactly
WIRE_VALUES = st.one_of(EDGES.filter(lambda v: abs(v) <= 2**53), st.integers(-(2**53), 2**53))


def _pack(header: list[int], values: list[int]) -> bytes:
    buf = np.zeros(ma.buffer_size(len(values)), dtype=np.uint8)
    n = ma.pack(np.array(header, dtype=np.int64), np.array(values, dtype=float),
                np.ones(len(values)), buf)
    return buf[:n].tobytes()


@settings(max_examples=300, deadline=None)
@given(header=st.lists(NUMBERS, min_size=5, max_size=5),
       values=st.lists(WIRE_VALUES, max_size=40))
def test_packed_bytes_are_msgpacks(header, values) -> None:
    assert _pack(header, values) == msgpack.packb([*header, *values])


def test_long_telegrams_take_the_array_16_and_32_headers() -> None:
    for n in (10, 11, 70000):  # fixarray up to 15 elements, array 16, array 32
        values = list(range(n))
        assert _pack([2, 0, 0, 1000, 0], values) == msgpack.packb([2, 0, 0, 1000, 0, *values])


def test_values_round_half_to_even_into_wire_units() -> None:
    buf = np.zeros(ma.buffer_size(4), dtype=np.uint8)
    n = ma.pack(np.zeros(5, dtype=np.int64), np.array([0.25, 0.75, -0.25, 1.0]),
                np.full(4, 10.0), buf)
    assert msgpack.unpackb(buf[:n].tobytes())[5:] == [2, 8, -2, 10]  # 2.5, 7.5, -2.5, 10


def _unpack(payload: bytes, n_values: int):
    header, values = np.zeros(5, dtype=np.int64), np.zeros(n_values)
    status = ma.unpack(np.frombuffer(payload, dtype=np.uint8), header, values,
                       np.zeros(1, dtype=np.uint64))
    return status, header.tolist(), values.tolist()


@settings(max_examples=300, deadline=None)
@given(header=st.lists(NUMBERS, min_size=5, max_size=5), single=st.booleans(),
       data=st.data())
def test_unpacked_numbers_are_msgpacks(header, single, data) -> None:
    floats = st.floats(allow_nan=False, allow_infinity=False, width=32 if single else 64)
    values = data.draw(st.lists(st.one_of(NUMBERS, floats), max_size=40))
    payload = msgpack.packb([*header, *values], use_single_float=single)
    status, got_header, got = _unpack(payload, len(values))
    assert status == 0
    assert got_header == header
    expected = np.array(msgpack.unpackb(payload)[5:], dtype=float).tolist()
    assert got == expected


def test_anything_else_goes_the_long_way() -> None:
    cases = [
        b"", b"\xc1", msgpack.packb({"a": 1}), msgpack.packb([2, 0, 0, 1000, 0]),  # short
        msgpack.packb([2, 0, 0, 1000, 0, 1, 2]),  # long
        msgpack.packb([2, 0, 0, 1000, 0, 1]) + b"\x00",  # bytes left over
        msgpack.packb([2, 0, 0, 1000, 0, True]), msgpack.packb([2, 0, 0, 1000, 0, None]),
        msgpack.packb([2, 0, 0, 1000, 0, "1"]), msgpack.packb([2.0, 0, 0, 1000, 0, 1]),
        msgpack.packb([2, 0, 0, 1000, 0, 2**64 - 1]),  # uint 64 past int64
        msgpack.packb([2, 0, 0, 1000, 0, float("nan")]),  # not finite: the long path
        msgpack.packb([2, 0, 0, 1000, 0, float("-inf")], use_single_float=True),
        msgpack.packb([2, 0, 0, 1000, 0, 1])[:-1] + b"\xcd\x01",  # cut short
    ]
    for payload in cases:
        assert _unpack(payload, 1)[0] == -1, payload


def test_a_value_no_integer_telegram_carries_is_refused() -> None:
    """NaN, infinities and wire values past int64 are named by their index, never sent
    as some integer (the telegram codec raises on it)."""
    buf = np.zeros(ma.buffer_size(3), dtype=np.uint8)
    header = np.zeros(5, dtype=np.int64)
    for bad in (float("nan"), float("inf"), -float("inf"), 1e19, -1e19):
        n = ma.pack(header, np.array([0.0, 1.0, bad]), np.ones(3), buf)
        assert n == -1 - 2, bad
    assert ma.pack(header, np.array([0.0, 1.0, 9.2e18]), np.ones(3), buf) > 0
