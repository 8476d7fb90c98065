"""The board kit's C codec against the references a board developer would trust: the
msgpack package (the bytes of msgpack.packb, the values of msgpack.unpackb), the cobs
package (Cheshire & Baker's COBS), binascii.crc_hqx and the CRC catalogue's check value
of CRC-16/CCITT-FALSE (0x29B1 over "123456789"); and the rig's own framing, since the
board must speak to it. Hostile bytes into every decoder, through the harness built
with AddressSanitizer and UBSan where the compiler has them: an overread or undefined
behaviour ends the harness, and the fixture fails on its report.
"""

from __future__ import annotations

import binascii

import msgpack
from cobs import cobs
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from emulator.link.framing import FrameDecoder, encode_frame

INT64 = st.integers(-(2**63), 2**63 - 1)
#: integers that sit at each msgpack form's edges, and anything between
EDGES = st.sampled_from([0, 1, 127, 128, 255, 256, 65535, 65536, 2**32 - 1, 2**32,
                         2**63 - 1, -1, -32, -33, -128, -129, -32768, -32769, -(2**31),
                         -(2**31) - 1, -(2**63)])
NUMBER = st.one_of(EDGES, INT64, st.integers(-1000, 1000))
FAST = settings(max_examples=300, deadline=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture])


def _hex(data: bytes) -> str:
    return data.hex() or "-"


def _bytes(text: str) -> bytes:
    return b"" if text == "-" else bytes.fromhex(text)


def test_crc_check_value_of_the_catalogue(harness) -> None:
    # CRC catalogue (reveng), CRC-16/IBM-3740 alias CRC-16/CCITT-FALSE: check = 0x29B1
    ok, value = harness.ask("crc", _hex(b"123456789"))
    assert ok and int(value) == 0x29B1


@FAST
@given(data=st.binary(max_size=600))
def test_crc_is_binascii_crc_hqx(harness, data) -> None:
    ok, value = harness.ask("crc", _hex(data))
    assert ok and int(value) == binascii.crc_hqx(data, 0xFFFF)


@FAST
@given(values=st.lists(NUMBER, min_size=6, max_size=140))
def test_encoded_telegram_is_msgpack_packb(harness, values) -> None:
    ok, text = harness.ask("enc", *map(str, values))
    assert ok, text
    assert _bytes(text) == msgpack.packb(values)


@FAST
@given(values=st.lists(NUMBER, min_size=6, max_size=140))
def test_decoded_telegram_is_msgpack_unpackb(harness, values) -> None:
    ok, text = harness.ask("dec", str(len(values) - 6), _hex(msgpack.packb(values)))
    assert ok, text
    assert [int(x) for x in text.split()] == values


def test_decoder_refuses_what_is_not_the_fixed_layout(harness) -> None:
    cases = {
        msgpack.packb([3, 1, 2, 3, 4, 5, 6]): -3,  # one value more than asked for (0)
        msgpack.packb([3, 1, 2, 3, 4]): -3,  # too few
        msgpack.packb([3, 1, 2, 3, 4, 5]) + b"\x00": -5,  # a byte after the array
        msgpack.packb([3, 1, 2, 3, 4, 5.5]): -2,  # a float
        msgpack.packb([3, 1, 2, 3, 4, "x"]): -2,  # a string
        msgpack.packb([3, 1, 2, 3, 4, True]): -2,  # a boolean
        msgpack.packb({"a": 1}): -2,  # not an array
        msgpack.packb([3, 1, 2, 3, 4, 2**64 - 1]): -4,  # past int64
        msgpack.packb([3, 1, 2, 3, 4, 70000])[:-1]: -1,  # cut inside an element
    }
    for payload, code in cases.items():
        assert harness.ask("dec", "0", _hex(payload)) == (False, str(code)), payload.hex()


@FAST
@given(data=st.binary(max_size=800))
def test_cobs_is_the_cobs_package(harness, data) -> None:
    ok, text = harness.ask("cobs", _hex(data))
    assert ok and _bytes(text) == cobs.encode(data)
    ok, text = harness.ask("uncobs", _hex(cobs.encode(data)))
    assert ok and _bytes(text) == data


@FAST
@given(payload=st.binary(min_size=1, max_size=600))
def test_frames_are_the_rigs(harness, payload) -> None:
    ok, text = harness.ask("frame", _hex(payload))
    assert ok and _bytes(text) == encode_frame(payload)  # the rig's framing (link/framing.py)
    ok, text = harness.ask("unframe", _hex(encode_frame(payload)[:-1]))
    assert ok and _bytes(text) == payload


@FAST
@given(data=st.binary(max_size=3000), n=st.integers(0, 200))
def test_hostile_bytes_never_crash_the_decoders(harness, data, n) -> None:
    for request in (("dec", str(n), _hex(data)), ("uncobs", _hex(data)),
                    ("unframe", _hex(data))):
        ok, text = harness.ask(*request)  # an answer at all: the harness survived
        if not ok:
            assert int(text) < 0
    # both ways against the references: the kit's COBS decoder accepts what the cobs
    # package decodes, and gives the same bytes; it refuses what the package refuses.
    # And a frame (no zero in it) the kit unframes is what the rig's decoder takes from
    # it; one it refuses, the rig's drops
    ok, text = harness.ask("uncobs", _hex(data))
    try:
        reference = cobs.decode(data)
    except cobs.DecodeError:
        reference = None
    assert (_bytes(text) if ok else None) == reference
    if 0 not in data:
        ok, text = harness.ask("unframe", _hex(data))
        taken = FrameDecoder().feed(data + b"\x00")
        assert ([_bytes(text)] if ok else []) == taken


@FAST
@given(chunks=st.lists(st.one_of(st.binary(min_size=1, max_size=300).map(encode_frame),
                                 st.binary(max_size=200)), max_size=12))
def test_serial_receiver_agrees_with_the_rigs_decoder(harness, chunks) -> None:
    # the same byte stream (good frames and noise) through the kit's receiver and the
    # rig's FrameDecoder: the same payloads come out (their caps differ: keep under both)
    stream = b"\x00" + b"".join(chunks) + b"\x00"
    ok, text = harness.ask("rx", _hex(stream))
    assert ok
    got = [] if text.split()[0] == "-" else [_bytes(x) for x in text.split()[0].split(",")]
    assert got == FrameDecoder().feed(stream)


@FAST
@given(data=st.binary(max_size=1200), values=st.lists(NUMBER, min_size=6, max_size=40))
def test_outputs_fit_exactly_their_capacity_and_not_one_byte_less(harness, data,
                                                                   values) -> None:
    # each output buffer is a heap block of exactly the capacity given (the harness),
    # so a write past it is an ASan report; one byte short must be refused, not overrun
    for request, expected in ((("cobs", _hex(data)), cobs.encode(data)),
                              (("frame", _hex(data)), encode_frame(data)),
                              (("enc", *map(str, values)), msgpack.packb(values))):
        assert harness.ask("cap", str(len(expected)), *request) == (True, _hex(expected))
        assert harness.ask("cap", str(len(expected) - 1), *request) == (False, "-6")
    if data:
        encoded = cobs.encode(data)
        assert harness.ask("cap", str(len(data)), "uncobs", _hex(encoded)) == (True, _hex(data))
        assert harness.ask("cap", str(len(data) - 1), "uncobs", _hex(encoded)) == (False, "-6")


def test_longest_payload_is_framed_and_received_and_one_more_is_refused(harness) -> None:
    payload = bytes(range(1, 256)) * 8 + bytes(range(1, 9))  # 2048 bytes, RR_PAYLOAD_CAP
    framed = encode_frame(payload)
    assert harness.ask("frame", _hex(payload)) == (True, _hex(framed))
    ok, text = harness.ask("rx", _hex(b"\x00" + framed))
    assert ok and text.split()[0] == _hex(payload)
    assert harness.ask("frame", _hex(payload + b"\x01"))[0] is False


# ---- forward error correction (railrig_fec.c) against the rig's framing and reedsolo ----

FEC = st.sampled_from([2, 8, 16, 64])


def _spoil(frame: bytes, data, most: int) -> bytes:
    """frame (delimiter included) with up to ``most`` bytes changed, none to 0x00."""
    out = bytearray(frame)
    for i in data.draw(st.lists(st.integers(0, len(frame) - 2), max_size=most, unique=True)):
        out[i] = data.draw(st.integers(1, 255).filter(lambda b, old=out[i]: b != old))
    return bytes(out)


@FAST
@given(payload=st.binary(max_size=2048), fec=FEC)
def test_fec_frames_are_the_rigs(harness, payload, fec) -> None:
    framed = encode_frame(payload, fec)
    assert harness.ask("fec", str(fec), "frame", _hex(payload)) == (True, _hex(framed))
    assert harness.ask("cap", str(len(framed)), "fec", str(fec), "frame",
                       _hex(payload)) == (True, _hex(framed))
    assert harness.ask("cap", str(len(framed) - 1), "fec", str(fec), "frame",
                       _hex(payload)) == (False, "-6")


@FAST
@given(payload=st.binary(max_size=700), fec=FEC, data=st.data())
def test_spoiled_fec_frames_are_mended_or_refused_as_the_rig_does(harness, payload, fec,
                                                                  data) -> None:
    frame = _spoil(encode_frame(payload, fec), data, fec)
    ok, text = harness.ask("fec", str(fec), "unframe", _hex(frame[:-1]))
    dec = FrameDecoder(fec=fec)
    theirs = dec.feed(frame)
    if theirs:
        assert ok, text
        got, mended = text.split()
        assert _bytes(got) == theirs[0] == payload
        assert int(mended) == dec.stats.fec_mended_bytes
    else:
        assert not ok and int(text) in (-7, -8, -9), text  # COBS, CRC or past mending


@FAST
@given(fec=FEC, data=st.data())
def test_fec_receiver_agrees_with_the_rigs_decoder(harness, fec, data) -> None:
    # (payloads of a byte or more: the harness writes none and an empty one alike)
    frames = data.draw(st.lists(st.one_of(
        st.binary(min_size=1, max_size=400).map(lambda p: encode_frame(p, fec)),
        st.binary(min_size=1, max_size=400).map(lambda p: encode_frame(p, fec)).flatmap(
            lambda f: st.just(f).map(lambda g: _spoil(g, data, fec))),
        st.binary(max_size=100)), max_size=8))
    stream = b"\x00" + b"".join(frames) + b"\x00"
    ok, text = harness.ask("fec", str(fec), "rx", _hex(stream))
    harness.ask("rx", "-")  # the receiver back to plain frames for the other tests
    dec = FrameDecoder(fec=fec)
    theirs = dec.feed(stream)
    assert ok
    words = text.split()
    got = [] if words[0] == "-" else [_bytes(x) for x in words[0].split(",")]
    assert got == theirs


@FAST
@given(data=st.binary(max_size=3000), fec=st.integers(0, 70))
def test_hostile_bytes_never_crash_the_fec_decoders(harness, data, fec) -> None:
    ok, text = harness.ask("fec", str(fec), "unframe", _hex(data))
    assert ok or int(text) < 0
    if len(data) <= 255 and fec <= 64 and len(data) >= fec:
        ok, text = harness.ask("rs", str(fec), _hex(data))
        assert ok or text == "-9"


@FAST
@given(n_parity=st.sampled_from([2, 4, 16, 32, 64]), data=st.data())
def test_c_reed_solomon_is_reedsolos(harness, n_parity, data) -> None:
    import numpy as np
    import reedsolo

    message = data.draw(st.binary(min_size=1, max_size=255 - n_parity))
    codec = reedsolo.RSCodec(n_parity)
    word = bytes(codec.encode(message))
    assert harness.ask("parity", str(n_parity), _hex(message)) == (True, _hex(word[-n_parity:]))
    spoiled = np.frombuffer(word, dtype=np.uint8).copy()
    for i in data.draw(st.lists(st.integers(0, len(word) - 1), max_size=n_parity // 2,
                                unique=True)):
        spoiled[i] ^= data.draw(st.integers(1, 255))
    n_wrong = int((spoiled != np.frombuffer(word, dtype=np.uint8)).sum())
    assert harness.ask("rs", str(n_parity), _hex(spoiled.tobytes())) == (
        True, f"{_hex(word)} {n_wrong}")


def test_longest_fec_frame_fits_the_receiver_exactly(harness) -> None:
    # the longest payload without a zero at the most parity: the longest FEC frame the
    # kit's buffers must hold (RR_RX_CAP bytes and its delimiter)
    payload = bytes(range(1, 256)) * 8 + bytes(range(1, 9))  # 2048 bytes, RR_PAYLOAD_CAP
    framed = encode_frame(payload, 64)
    assert harness.ask("fec", "64", "frame", _hex(payload)) == (True, _hex(framed))
    ok, text = harness.ask("fec", "64", "rx", _hex(b"\x00" + framed))
    harness.ask("rx", "-")
    assert ok and text.split()[0] == _hex(payload)
    assert harness.ask("fec", "64", "frame", _hex(payload + b"\x01"))[0] is False
