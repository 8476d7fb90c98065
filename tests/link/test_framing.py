"""Serial framing: CRC, COBS vectors and a table of hostile byte streams.

Sources: RevEng CRC catalogue (CRC-16/CCITT-FALSE, a.k.a. CRC-16/IBM-3740, check 0x29B1);
Cheshire & Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM Trans. Networking 7(2),
1999, and public conformance vectors (REFERENCES.md). Test layout after pymodbus
test/framer/test_framer.py: whole, split in two, byte by byte, and a hostile table.
Forward error correction: the layout of framing.py's text rebuilt with the reedsolo
package's Reed-Solomon parity, and the mending a code of n parity bytes promises.
"""

from __future__ import annotations

import pytest
import reedsolo
from cobs import cobs
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.link.framing import FrameDecoder, crc16, encode_frame


def test_crc_check_value_of_the_catalogue() -> None:
    assert crc16(b"123456789") == 0x29B1


def test_crc_is_not_the_kermit_alias() -> None:
    # "CRC-16/CCITT" in the catalogue is KERMIT, check 0x2189: a different parameter set
    assert crc16(b"123456789") != 0x2189


def crc16_by_the_catalogue(data: bytes) -> int:
    """CRC-16/CCITT-FALSE bit by bit from its published parameter set (RevEng catalogue:
    width 16, poly 0x1021, init 0xFFFF, refin/refout false, xorout 0), written apart from
    the code under test, which calls binascii.crc_hqx."""
    crc = 0xFFFF
    for byte in data:
        crc ^= byte << 8
        for _ in range(8):
            crc = ((crc << 1) ^ 0x1021) if crc & 0x8000 else (crc << 1)
            crc &= 0xFFFF
    return crc


def test_the_reference_meets_the_catalogue_check_value() -> None:
    assert crc16_by_the_catalogue(b"123456789") == 0x29B1


@given(st.binary(max_size=300))
def test_crc_agrees_with_the_catalogue_parameter_set(data: bytes) -> None:
    assert crc16(data) == crc16_by_the_catalogue(data)


def test_every_single_bit_error_in_a_frame_is_caught() -> None:
    # a CRC with a polynomial of more than one term detects every single-bit error
    # (any coding text, e.g. Peterson & Brown, Proc. IRE 49 (1961), from memory)
    frame = encode_frame(b"\x95\x02\x10\x20\x30 a telegram")
    for bit in range(8 * (len(frame) - 1)):  # every bit but the delimiter's
        spoiled = bytearray(frame)
        spoiled[bit // 8] ^= 1 << (bit % 8)
        dec = FrameDecoder()
        assert dec.feed(bytes(spoiled)) == [], bit


@pytest.mark.parametrize(("raw", "encoded"), [
    (b"", b"\x01"),
    (b"\x00", b"\x01\x01"),
    (b"\x00\x00", b"\x01\x01\x01"),
    (b"\x11\x22\x00\x33", b"\x03\x11\x22\x02\x33"),
    (b"\x11\x22\x33\x44", b"\x05\x11\x22\x33\x44"),
    (b"\x11\x00\x00\x00", b"\x02\x11\x01\x01\x01"),
])
def test_cobs_vectors(raw: bytes, encoded: bytes) -> None:
    assert cobs.encode(raw) == encoded
    assert cobs.decode(encoded) == raw


def test_cobs_254_nonzero_bytes() -> None:
    # REFERENCES.md lists FF 01..FE 01; encoders differ on the final 01 after a full
    # 254-byte block (the paper's form omits it at the end of the data). Both must decode.
    raw = bytes(range(1, 255))
    long_form = b"\xff" + raw + b"\x01"
    short_form = b"\xff" + raw
    assert cobs.encode(raw) in (long_form, short_form)
    assert cobs.decode(long_form) == raw
    assert cobs.decode(short_form) == raw
    assert FrameDecoder().feed(encode_frame(raw)) == [raw]


@given(st.binary(max_size=300))
def test_a_plain_frame_is_cobs_of_the_payload_and_its_crc_then_a_zero(payload: bytes) -> None:
    # the layout framing.py's text gives, built here from the cobs package and the
    # catalogue's CRC written apart from the code: COBS(payload + CRC-16 big-endian) 00
    crc = crc16_by_the_catalogue(payload).to_bytes(2, "big")
    assert encode_frame(payload) == cobs.encode(payload + crc) + b"\x00"


PAYLOADS = [b"\x95\x01\x02\x03\x04\x05", bytes(200), b"\x00\xff" * 40, b"x"]


def _feed_all(chunks: list[bytes]) -> tuple[list[bytes], FrameDecoder]:
    dec = FrameDecoder()
    out: list[bytes] = []
    for c in chunks:
        out += dec.feed(c)
    return out, dec


@pytest.mark.parametrize("payload", PAYLOADS)
def test_whole_split_and_byte_by_byte(payload: bytes) -> None:
    frame = encode_frame(payload)
    assert 0 not in frame[:-1] and frame[-1] == 0
    for chunks in ([frame], [frame[:3], frame[3:]],
                   [frame[:len(frame) // 2], frame[len(frame) // 2:]],
                   [frame[i:i + 1] for i in range(len(frame))]):
        out, dec = _feed_all(chunks)
        assert out == [payload]
        assert dec.stats.frames == 1


#: the decoder's counters a hostile table row accounts for (discarded_bytes aside)
COUNTERS = ("frames", "crc_errors", "cobs_errors", "runts", "oversized", "fec_failures",
            "fec_mended_frames", "fec_mended_bytes")


def test_hostile_table() -> None:
    # Each row's counts follow from the COBS paper's decoding (a code byte counts the
    # bytes up to the next zero; one pointing past the frame's end is an error) and the
    # framing text (framing.py: a CRC over the payload; a frame too short to hold the CRC
    # is a runt; empty frames between delimiters are idle line; a run past the cap is one
    # oversized frame, skipped to the next delimiter). Every counter is checked, so a
    # counter that moves where it should not fails too. "either": one damaged frame that
    # may fail COBS or the CRC, whichever the bytes make it.
    good = encode_frame(b"hello")
    bad_crc = bytearray(good)
    bad_crc[2] ^= 0x01
    truncated = good[:-3] + b"\x00"
    oversized = b"\x07" * 5000 + b"\x00"
    cases = [
        # (stream, payloads expected, counts expected)
        # junk before a frame (no delimiter): merged with it, which is dropped, not misread
        (b"\x13\x37junk" + good, [], {"either": 1}),
        # junk ended by a delimiter: 'j' (0x6a) points 105 bytes on, past its frame's end
        (b"junk\x00" + good, [b"hello"], {"cobs_errors": 1, "frames": 1}),
        (good + b"trailing", [b"hello"], {"frames": 1}),  # junk after: waits for a zero
        (bytes(bad_crc), [], {"crc_errors": 1}),  # a data byte flipped
        (truncated, [], {"either": 1}),
        (good + good + good, [b"hello"] * 3, {"frames": 3}),  # back to back
        (oversized + good, [b"hello"], {"oversized": 1, "frames": 1}),
        (b"\x00\x00\x00" + good, [b"hello"], {"frames": 1}),  # empty frames: idle line
        (b"\x01\x00" + good, [b"hello"], {"runts": 1, "frames": 1}),  # decodes to nothing
    ]
    for stream, expected, counts in cases:
        out, dec = _feed_all([stream])
        assert out == expected, stream[:20]
        got = {name: getattr(dec.stats, name) for name in COUNTERS}
        either = counts.get("either", 0)
        if either:
            assert got["crc_errors"] + got["cobs_errors"] == either, (stream[:20], got)
            got["crc_errors"] = got["cobs_errors"] = 0
        want = {name: counts.get(name, 0) for name in COUNTERS}
        assert got == want, stream[:20]


def test_resynchronises_after_damage() -> None:
    good = encode_frame(b"\x91\x01")
    out, dec = _feed_all([b"\xff\xfe\xfd", good, b"noise\x00", good])
    assert out == [b"\x91\x01"]  # the first good frame was glued to noise, the second is
    assert dec.stats.frames == 1


def test_buffer_stays_bounded() -> None:
    dec = FrameDecoder(max_frame=256)
    for _ in range(100):
        dec.feed(b"\x05" * 1000)  # never a delimiter
    assert len(dec._buf) <= 256
    assert dec.stats.oversized == 1 and dec.stats.discarded_bytes == 100_000
    # the skip ends at the next delimiter: the frame that brings it is lost with the run
    assert dec.feed(encode_frame(b"ok")) == []
    assert dec.feed(encode_frame(b"ok")) == [b"ok"]


@given(st.lists(st.binary(max_size=50), max_size=20), st.binary(max_size=200))
def test_fuzz_never_raises_and_good_frames_survive(payloads: list[bytes], noise: bytes) -> None:
    stream = noise + b"\x00" + b"".join(encode_frame(p) for p in payloads)
    out, _dec = _feed_all([stream[i:i + 7] for i in range(0, len(stream), 7)])
    assert out == payloads


# ---- forward error correction (framing.py's module text gives the layout) ----

def fec_frame_by_the_text(payload: bytes, fec: int) -> bytes:
    """The FEC layout built apart from the code under test: reedsolo's parity of each
    block of 255 - fec COBS bytes, the parity's bits seven to a byte, top bit set."""
    coded = cobs.encode(payload + crc16_by_the_catalogue(payload).to_bytes(2, "big"))
    k = 255 - fec
    codec = reedsolo.RSCodec(fec)
    parity = b"".join(bytes(codec.encode(coded[i:i + k]))[-fec:]
                      for i in range(0, len(coded), k))
    bits = "".join(f"{b:08b}" for b in parity)
    bits += "0" * (-len(bits) % 7)
    groups = bytes(0x80 | int(bits[i:i + 7], 2) for i in range(0, len(bits), 7))
    return coded + groups + b"\x00"


def payload_up_to(most: int):
    """A payload of any length up to most, long ones as often as short (hypothesis's own
    binary strategy stays short: the demo's telegrams are 100-230 bytes)."""
    return st.integers(0, most).flatmap(lambda n: st.binary(min_size=n, max_size=n))


@settings(max_examples=150, deadline=None)
@given(payload=payload_up_to(1200), fec=st.sampled_from([2, 8, 16, 64]))
def test_fec_frame_is_the_layout_of_the_text_and_decodes(payload, fec) -> None:
    frame = encode_frame(payload, fec)
    assert frame == fec_frame_by_the_text(payload, fec)
    assert b"\x00" not in frame[:-1]
    dec = FrameDecoder(fec=fec)
    assert dec.feed(frame) == [payload]
    assert dec.stats.fec_mended_frames == 0


@settings(max_examples=300, deadline=None)
@given(payload=payload_up_to(700), fec=st.sampled_from([4, 16]), data=st.data())
def test_fec_mends_up_to_half_its_parity_in_wrong_bytes_a_block(payload, fec, data) -> None:
    frame = bytearray(encode_frame(payload, fec))
    n_coded = len(cobs.encode(payload + crc16(payload).to_bytes(2, "big")))  # COBS bytes
    k = 255 - fec
    # exactly fec / 2 wrong bytes among one block's COBS bytes (the most it mends), or
    # up to fec / 4 wrong bytes anywhere, parity groups included (a wrong group byte
    # spoils at most two parity bytes, of at most two blocks); and up to fec / 2 among
    # each other block's COBS bytes
    blocks = [range(b, min(b + k, n_coded)) for b in range(0, n_coded, k)]
    where: list[int] = []
    if data.draw(st.booleans()):
        where = data.draw(st.lists(st.integers(0, len(frame) - 2), min_size=1,
                                   max_size=fec // 4, unique=True))
    else:
        for inside in blocks:
            most = min(fec // 2, len(inside))
            where += data.draw(st.lists(st.sampled_from(inside), min_size=most,
                                        max_size=most, unique=True))
    for i in where:
        frame[i] ^= data.draw(st.integers(1, 255))
    if 0 in frame[:-1]:
        return  # a new delimiter splits the frame: lost, as without FEC (tested below)
    dec = FrameDecoder(fec=fec)
    assert dec.feed(bytes(frame)) == [payload]
    assert dec.stats.fec_mended_frames == 1 and dec.stats.dropped == 0


def test_a_flip_of_a_spare_bit_alone_is_counted_as_mended() -> None:
    frame = bytearray(encode_frame(b"\x96\x02\x10 a telegram", 16))
    frame[-2] ^= 0x80  # the last parity group's top bit
    dec = FrameDecoder(fec=16)
    assert dec.feed(bytes(frame)) == [b"\x96\x02\x10 a telegram"]
    assert dec.stats.fec_mended_frames == 1


def test_fec_frame_past_mending_is_counted_and_the_next_one_taken() -> None:
    good = encode_frame(b"\x93\x01\x02\x03", 2)
    bad = bytearray(good)
    bad[1] ^= 0x01  # 0x93 -> 0x92
    bad[3] ^= 0x01  # 0x02 -> 0x03: two wrong bytes in a block of a code that mends one
    assert bad[1:5] == b"\x92\x01\x03\x03"
    dec = FrameDecoder(fec=2)
    got = dec.feed(bytes(bad) + good)
    assert got == [b"\x93\x01\x02\x03"]
    assert dec.stats.dropped == 1 and dec.stats.frames == 1


def test_a_plain_frame_to_a_fec_receiver_is_refused_not_misread() -> None:
    dec = FrameDecoder(fec=16)
    assert dec.feed(encode_frame(b"\x91\x01" * 40)) == []
    assert dec.stats.dropped == 1


@pytest.mark.parametrize("fec", [-2, 1, 3, 66, 255])
def test_fec_outside_the_choices_is_a_clear_error(fec) -> None:
    with pytest.raises(ValueError, match="fec must be"):
        FrameDecoder(fec=fec)
