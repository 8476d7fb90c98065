"""The serial link's Reed-Solomon code against the ``reedsolo`` package from PyPI (a
pure-Python codec of the same conventions: GF(2^8) with 0x11D, alpha = 2, first root 0,
systematic, message first; ``RSCodec(n_parity)``), and against what the textbooks say an
errors-only decoder must do: mend every pattern of up to n_parity / 2 wrong bytes
(Blahut 2003, ch. 7; Lin & Costello 2004, sec. 7.4) and never claim to have mended more.
"""

from __future__ import annotations

import numpy as np
import pytest
import reedsolo
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.link import reed_solomon as rs
from emulator.link.framing import FEC_CHOICES

PARITY = st.sampled_from([2, 4, 8, 16, 32, 64])


def message_of(n_parity: int):
    """A message of any length a codeword allows, short and long alike (hypothesis's own
    binary strategy stays short: the link's blocks are 100-239 bytes)."""
    return st.integers(1, 255 - n_parity).flatmap(
        lambda n: st.binary(min_size=n, max_size=n))


def test_the_field_is_the_one_named() -> None:
    # 0x11D is primitive: alpha = 2 runs through all 255 non-zero elements once
    assert sorted(rs.EXP[:255]) == list(range(1, 256))
    assert rs.EXP[8] == 0x1D  # alpha^8 = x^4 + x^3 + x^2 + 1


@pytest.mark.parametrize("n_parity", FEC_CHOICES)
def test_generator_is_reedsolos_with_no_zero_coefficient(n_parity) -> None:
    gen = rs.generator(n_parity)
    assert list(gen) == list(reedsolo.RSCodec(n_parity).gen[n_parity])
    assert (gen != 0).all()  # the fast LFSR of rs.parity relies on it


@settings(max_examples=200, deadline=None)
@given(n_parity=PARITY, data=st.data())
def test_parity_is_reedsolos(n_parity, data) -> None:
    message = data.draw(message_of(n_parity))
    out = np.zeros(n_parity, dtype=np.uint8)
    rs.parity(np.frombuffer(message, dtype=np.uint8), rs.generator(n_parity), out)
    assert out.tobytes() == bytes(reedsolo.RSCodec(n_parity).encode(message))[len(message):]


@settings(max_examples=300, deadline=None)
@given(n_parity=PARITY, data=st.data())
def test_up_to_half_the_parity_in_wrong_bytes_is_mended(n_parity, data) -> None:
    message = data.draw(message_of(n_parity))
    word = np.frombuffer(bytes(reedsolo.RSCodec(n_parity).encode(message)),
                         dtype=np.uint8).copy()
    n_wrong = data.draw(st.integers(1, n_parity // 2))
    where = data.draw(st.lists(st.integers(0, len(word) - 1), min_size=n_wrong,
                               max_size=n_wrong, unique=True))
    spoiled = word.copy()
    for i in where:
        spoiled[i] ^= data.draw(st.integers(1, 255))
    assert rs.correct(spoiled, n_parity) == n_wrong
    assert spoiled.tobytes() == word.tobytes()


@settings(max_examples=300, deadline=None)
@given(n_parity=st.sampled_from([2, 4, 8, 16]), data=st.data())
def test_more_wrong_bytes_are_refused_or_land_on_a_codeword_as_reedsolo_does(
        n_parity, data) -> None:
    # beyond n_parity / 2 an errors-only decoder either detects the damage or mends the
    # word into another codeword within n_parity / 2 bytes of what it received (the
    # reason the link keeps its CRC under the code); reedsolo must agree on which
    message = data.draw(message_of(n_parity))
    codec = reedsolo.RSCodec(n_parity)
    word = np.frombuffer(bytes(codec.encode(message)), dtype=np.uint8).copy()
    n_wrong = data.draw(st.integers(n_parity // 2 + 1, min(len(word), n_parity + 4)))
    where = data.draw(st.lists(st.integers(0, len(word) - 1), min_size=n_wrong,
                               max_size=n_wrong, unique=True))
    for i in where:
        word[i] ^= data.draw(st.integers(1, 255))
    received = word.copy()
    got = rs.correct(word, n_parity)
    try:
        theirs = bytes(codec.decode(received.tobytes())[1])
    except reedsolo.ReedSolomonError:
        theirs = None
    if got < 0:
        assert word.tobytes() == received.tobytes()  # left as it was
        assert theirs is None
    else:
        assert got <= n_parity // 2
        assert int((word != received).sum()) == got
        assert theirs == word.tobytes()
