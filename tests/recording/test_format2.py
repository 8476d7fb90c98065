"""Recording format 2: every column read back equals what was recorded at its stored
precision (float64 exactly, float32 as numpy rounds it, wire columns as the integer a
telegram carries times its scale), over random channel sets and block boundaries; format
1 files (written here by their documented layout, apart from the recorder) still read;
another format is named; channel sets; the MDF 4 export opened by asammdf with every
channel, unit, event and value."""

from __future__ import annotations

import struct
import zlib

import msgpack
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from emulator.recording.channels import ChannelError, select_channels
from emulator.recording.recorder import Recorder, RecordingError, read_recording

SCALES = {"sent": [1.0, 0.1, 1e-4, 0.01], "wire": [1.0, 0.1, 1e-4, 0.01], "f32": [1.0],
          "f64": [1.0]}


def _sent(x: np.ndarray, scale: float) -> np.ndarray | None:
    """What the telegram codec puts on the wire for these values, times the scale (the
    value the controller received), or None where it could not send them (not finite,
    past int64; the recorder then keeps float64)."""
    from emulator.link.telegram import TelegramCodec

    codec = TelegramCodec(1, np.full(len(x), scale), np.ones(1), np.zeros(1), np.ones(1))
    try:
        wire = msgpack.unpackb(codec.encode(0, 0, 0, 0, x))[6:]
    except ValueError:
        return None
    return np.array(wire, dtype=float) * scale


def _expected(x: np.ndarray, kind: str, scale: float) -> np.ndarray:
    """What a column's block must read back as, from outside blocks.py: the codec's own
    rounding for sent values, numpy's float32 for f32, the values themselves otherwise."""
    if kind == "f64":
        return x
    if kind == "f32":
        if np.any(np.abs(x) > np.finfo(np.float32).max):  # past float32: kept float64
            return x
        return x.astype(np.float32).astype(np.float64)
    sent = _sent(x, scale)
    fits = sent is not None and np.all(np.abs(sent / scale) < 2**31)
    if kind == "sent":
        return sent if fits else x
    return x  # wire: exact either way (wire integers, or float64 where a value is off-grid)


def _column(rng, rows: int, kind: str, scale: float, spread: float, draw) -> np.ndarray:
    """Random values; for sent and wire columns often on the wire grid, with the ties a
    rounding rule decides (k + 0.5 steps)."""
    x = rng.normal(0.0, spread, rows)
    if kind in ("sent", "wire") and draw(st.booleans()):
        x = np.round(x / scale) * scale  # on the grid (a controller sending integers)
        if rows and draw(st.booleans()):
            x[rng.integers(rows)] = (np.round(x[0] / scale) + 0.5) * scale  # a tie
    return x


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_round_trip_at_the_stored_precision(tmp_path_factory, data) -> None:
    n_cols = data.draw(st.integers(1, 12))
    kinds = data.draw(st.lists(st.sampled_from(["f64", "f32", "sent", "wire"]),
                               min_size=n_cols, max_size=n_cols))
    scales = [data.draw(st.sampled_from(SCALES[k])) for k in kinds]
    rows = data.draw(st.integers(0, 700))
    chunk_rows = data.draw(st.integers(1, 300))
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    spread = data.draw(st.sampled_from([1.0, 1e3, 1e6]))
    values = np.column_stack([_column(rng, rows, k, sc, spread, data.draw)
                              for k, sc in zip(kinds, scales, strict=True)])
    if rows and data.draw(st.booleans()):  # a NaN, an infinity, a huge value somewhere
        values[rng.integers(rows), rng.integers(n_cols)] = data.draw(
            st.sampled_from([np.nan, np.inf, -np.inf, 1e300]))
    path = tmp_path_factory.mktemp("rt") / "r.rrec"
    columns = [f"c{j}" for j in range(n_cols)]
    background = data.draw(st.booleans())  # a writer thread, or written at each flush
    with Recorder(path, columns, {"n": rows}, chunk_rows=chunk_rows, kinds=kinds,
                  scales=scales, flush_s=1e9, background=background) as rec:  # by size
        for i in range(rows):
            rec.append(values[i])
    back = read_recording(path)
    assert back.complete and back.columns == columns and back.kinds == kinds
    assert back.data.shape == (rows, n_cols)
    for j, (kind, scale) in enumerate(zip(kinds, scales, strict=True)):
        for b in range(0, rows, chunk_rows):  # block by block (the last one short)
            got, want = back.data[b:b + chunk_rows, j], values[b:b + chunk_rows, j]
            np.testing.assert_array_equal(got, _expected(want, kind, scale))


def _v1_file(path, columns, rows: np.ndarray, marks=()) -> None:
    """A format 1 recording, by the layout recorder.py documents for it."""
    def chunk(obj) -> bytes:
        payload = msgpack.packb(obj, use_bin_type=True)
        return struct.pack("<4sII", b"RRC1", len(payload), zlib.crc32(payload)) + payload
    out = chunk({"meta": {"seed": 3}, "columns": columns})
    out += chunk({"frame0": 0, "rows": len(rows), "data": rows.astype("<f8").tobytes()})
    for m in marks:
        out += chunk({"mark": m})
    path.write_bytes(out)


def test_a_format_1_recording_still_reads(tmp_path) -> None:
    rows = np.arange(12.0).reshape(4, 3) / 7
    _v1_file(tmp_path / "old.rrec", ["time_s", "a", "b"], rows, [{"label": "x", "t": 0.1}])
    back = read_recording(tmp_path / "old.rrec")
    assert back.format == 1 and back.complete and back.meta == {"seed": 3}
    np.testing.assert_array_equal(back.data, rows)
    assert back.marks == [{"label": "x", "t": 0.1}]


def test_another_format_is_named(tmp_path) -> None:
    (tmp_path / "new.rrec").write_bytes(b"RRC7" + bytes(40))
    with pytest.raises(RecordingError, match="format 7"):
        read_recording(tmp_path / "new.rrec")


def test_a_torn_last_block_is_reported_and_the_rest_read(tmp_path) -> None:
    path = tmp_path / "t.rrec"
    with Recorder(path, ["time_s", "x"], {}, chunk_rows=10, kinds=["f64", "f32"]) as rec:
        for i in range(35):
            rec.append(np.array([i * 1e-3, i * 0.5]))
    raw = path.read_bytes()
    path.write_bytes(raw[:-7])  # the last block (5 rows) torn
    back = read_recording(path)
    assert not back.complete and "truncated" in back.note
    np.testing.assert_array_equal(back.column("x"), np.arange(30) * 0.5)


COLUMNS = ["time_s", "y.line.voltage_v", "y.INV-A1.current_a_a", "u.INV-A1.duty_a",
           "p.train.speed_mps", "p.motor.speed_rad_s[0]", "p.motor.torque_nm[0]",
           "p.inverter.phase_current_a_a[0]", "p.line.emf_v"]


@pytest.mark.parametrize(("spec", "kept"), [
    (["all"], COLUMNS),
    (["link"], COLUMNS[:4]),
    (["motors"], ["time_s", "y.INV-A1.current_a_a", "u.INV-A1.duty_a", "p.train.speed_mps",
                  "p.motor.speed_rad_s[0]", "p.motor.torque_nm[0]",
                  "p.inverter.phase_current_a_a[0]"]),
    (["default"], [c for c in COLUMNS if c != "p.inverter.phase_current_a_a[0]"]),
    (["p.motor.*"], ["time_s", "p.motor.speed_rad_s[0]", "p.motor.torque_nm[0]"]),
    (["link", "p.line.*"], [*COLUMNS[:4], "p.line.emf_v"]),
])
def test_channel_sets_and_globs(spec, kept) -> None:
    assert [COLUMNS[i] for i in select_channels(COLUMNS, spec)] == kept


def test_a_channel_that_is_nothing_is_an_error() -> None:
    with pytest.raises(ChannelError, match="neither a set"):
        select_channels(COLUMNS, ["p.nothing.*"])


def test_mdf_export_opens_with_every_channel_unit_event_and_value(tmp_path) -> None:
    asammdf = pytest.importorskip("asammdf")
    from emulator.recording.mdf import export_mdf

    path = tmp_path / "m.rrec"
    kinds = ["f64", "wire", "wire", "wire", "f32", "f32", "f32", "f32", "f32"]
    scales = [1.0, 1.0, 0.1, 1e-4, 1.0, 1.0, 1.0, 1.0, 1.0]
    units = ["s", "V", "A", "1", "m/s", "rad/s", "N m", "A", "V"]
    rng = np.random.default_rng(1)
    with Recorder(path, COLUMNS, {"name": "mdf check", "scenario": {
            "path": "x/case.toml", "text": "[scenario]\nname = 'x'\n"}},
                  chunk_rows=64, kinds=kinds, scales=scales, units=units) as rec:
        for i in range(500):
            rec.append(np.concatenate([[i * 1e-3], rng.normal(0, 100, len(COLUMNS) - 1)]))
            if i == 250:
                rec.mark(label="fault on", what="start", t=0.25)
    back = read_recording(path)
    export_mdf(back, tmp_path / "m.mf4")
    mdf = asammdf.MDF(tmp_path / "m.mf4")
    try:
        for j, name in enumerate(COLUMNS[1:], start=1):
            sig = mdf.get(name)
            assert sig.unit == units[j], name
            np.testing.assert_array_equal(sig.timestamps, back.column("time_s"))
            np.testing.assert_array_equal(np.asarray(sig.samples, dtype=float),
                                          back.data[:, j])
        events = list(mdf.events)
        assert [e.name for e in events] == ["fault on"]
        assert events[0].sync_base * events[0].sync_factor == pytest.approx(0.25)
        data, name, _ = mdf.extract_attachment(0)
        assert bytes(data).decode() == "[scenario]\nname = 'x'\n"
    finally:
        mdf.close()


def _chunk(obj, magic=b"RRC2") -> bytes:
    payload = msgpack.packb(obj, use_bin_type=True)
    return struct.pack("<4sII", magic, len(payload), zlib.crc32(payload)) + payload


HEAD = {"format": 2, "meta": {}, "columns": ["time_s", "x"], "kinds": ["f64", "f64"],
        "scales": [1.0, 1.0], "units": ["s", ""]}


@pytest.mark.parametrize("body", [
    [{"frame0": 0, "rows": 2, "types": "d", "z": b"\x00"}],  # types too short
    [{"frame0": 0, "rows": 2, "types": "ddd", "z": b"\x00"}],  # types too long
    [{"frame0": 0, "rows": "2", "types": "dd", "z": b"\x00"}],  # rows not a number
    [{"frame0": 0, "rows": 2, "types": "dd", "z": b"not zstd"}],
    [{"frame0": 5, "rows": 0, "types": "dd", "z": b""}],  # a block missing before it
    [7], ["text"], [{"mark": 3}],
])
def test_a_hostile_block_behind_a_good_crc_ends_the_reading_with_a_note(tmp_path, body):
    import zstandard

    good = {"frame0": 0, "rows": 1, "types": "dd",
            "z": zstandard.ZstdCompressor().compress(np.array([0.5, 2.0]).tobytes())}
    path = tmp_path / "h.rrec"
    fixed = [{**b, "frame0": b["frame0"] + 1} if isinstance(b, dict) and "frame0" in b
             else b for b in body]
    path.write_bytes(_chunk(HEAD) + _chunk(good) + b"".join(_chunk(b) for b in fixed))
    back = read_recording(path)
    assert not back.complete and "unreadable block" in back.note
    np.testing.assert_array_equal(back.data, [[0.5, 2.0]])  # the good block before it


@pytest.mark.parametrize("head", [7, "x", {"columns": "ab"}, {**HEAD, "kinds": ["f64"]},
                                  {**HEAD, "scales": ["a", "b"]}, {**HEAD, "meta": 3}])
def test_a_damaged_header_is_a_recording_error(tmp_path, head) -> None:
    path = tmp_path / "d.rrec"
    path.write_bytes(_chunk(head))
    with pytest.raises(RecordingError):
        read_recording(path)


def test_rows_buffered_before_a_silence_reach_the_disk(tmp_path) -> None:
    # a rig waiting for a silent controller calls tick(): the buffered rows are
    # written within flush_s though no frame comes
    import time as _time

    path = tmp_path / "s.rrec"
    rec = Recorder(path, ["time_s"], {}, chunk_rows=1000, flush_s=0.05)
    for i in range(50):
        rec.append(np.array([i * 1e-3]))
    _time.sleep(0.06)
    rec.tick()
    deadline = _time.monotonic() + 5
    while len(read_recording(path).data) < 50 and _time.monotonic() < deadline:
        _time.sleep(0.01)
    assert len(read_recording(path).data) == 50
    rec.close()


def test_a_mark_takes_numpy_numbers_and_refuses_what_msgpack_cannot_hold(tmp_path) -> None:
    with Recorder(tmp_path / "m.rrec", ["time_s"], {}) as rec:
        rec.append(np.array([0.0]))
        rec.mark(label="x", t=np.float32(0.5), n=np.int64(3))
        with pytest.raises(TypeError):
            rec.mark(label="y", t=object())
    assert read_recording(tmp_path / "m.rrec").marks == [{"label": "x", "t": 0.5, "n": 3}]


def test_a_format_1_run_compares_at_the_stored_precision_of_the_new_one(tmp_path) -> None:
    # replay of a recording made before format 2: its measurements were kept unrounded;
    # compared with a new run they are rounded as the telegram carried them first, so a
    # value within half a count is the same frame and one a count off is not
    from emulator.commands.replay import compare

    cols = ["time_s", "y.a", "u.b", "p.c"]
    kinds, scales = ["f64", "sent", "wire", "f32"], [1.0, 0.1, 1e-4, 1.0]
    rng = np.random.default_rng(2)
    new_rows = np.column_stack([np.arange(100) * 1e-3, np.round(rng.normal(0, 50, 100)) * 0.1,
                                np.round(rng.uniform(0, 1, 100) * 1e4) * 1e-4,
                                rng.normal(0, 1, 100).astype(np.float32)])
    with Recorder(tmp_path / "new.rrec", cols, {}, kinds=kinds, scales=scales) as rec:
        for row in new_rows:
            rec.append(row)
    new = read_recording(tmp_path / "new.rrec")
    old_rows = new_rows.copy()
    old_rows[:, 1] += rng.uniform(-0.04, 0.04, 100)  # unrounded, within half a count
    _v1_file(tmp_path / "old.rrec", cols, old_rows)
    same, note = compare(read_recording(tmp_path / "old.rrec"), new)
    assert same, note
    old_rows[40, 1] += 0.1  # a count off at frame 40
    _v1_file(tmp_path / "old2.rrec", cols, old_rows)
    same, note = compare(read_recording(tmp_path / "old2.rrec"), new)
    assert not same and "frame 40" in note


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data())
def test_a_decimated_column_holds_every_nth_frame(tmp_path_factory, data) -> None:
    # frame k of a column kept every n frames reads as the value of frame n * (k // n)
    # (zero-order hold), whatever the block boundaries; the other columns in full
    n_cols = data.draw(st.integers(1, 6))
    every = data.draw(st.lists(st.sampled_from([1, 2, 3, 7, 100]), min_size=n_cols,
                               max_size=n_cols))
    kinds = data.draw(st.lists(st.sampled_from(["f64", "wire"]), min_size=n_cols,
                               max_size=n_cols))
    rows = data.draw(st.integers(0, 600))
    chunk_rows = data.draw(st.integers(1, 250))
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    values = np.round(rng.normal(0, 100, (rows, n_cols)))  # on a wire grid of scale 1
    path = tmp_path_factory.mktemp("dec") / "d.rrec"
    with Recorder(path, [f"c{j}" for j in range(n_cols)], {}, chunk_rows=chunk_rows,
                  kinds=kinds, every=every, flush_s=1e9) as rec:
        for i in range(rows):
            rec.append(values[i])
    back = read_recording(path)
    assert back.every == every
    frames = np.arange(rows)
    for j, n in enumerate(every):
        np.testing.assert_array_equal(back.data[:, j], values[n * (frames // n), j])


def _numpy_block_bytes(block, kinds, scales, every, frame0) -> tuple[str, bytes]:
    """The block's bytes before compression as the whole-array numpy encoder of format 2
    wrote them (railrig up to the throughput issue's recorder change), kept here as the
    oracle that the compiled encoder changed no byte of the format."""
    from emulator.recording.blocks import kept_rows

    items = {"d": np.dtype("<f8"), "f": np.dtype("<f4"), "i": np.dtype("<i4")}
    codes, pieces = [], []
    for j, kind in enumerate(kinds):
        x = block[kept_rows(frame0, block.shape[0], int(every[j])), j]
        code, v = "d", x
        if kind in ("sent", "wire"):
            with np.errstate(invalid="ignore", over="ignore"):
                w = np.rint(x * (1.0 / scales[j]))
                if np.all(np.abs(w) <= 2**31 - 1) and (
                        kind == "sent" or np.all(w * scales[j] == x)):
                    code, v = "i", w
        elif kind == "f32" and not np.any(np.abs(x) > np.finfo(np.float32).max):
            code = "f"
        cast = v.astype(items[code])
        codes.append(code)
        pieces.append(cast.view(np.uint8).reshape(-1, items[code].itemsize).T.tobytes())
    return "".join(codes), b"".join(pieces)


@settings(max_examples=80, deadline=None)
@given(data=st.data())
def test_the_compiled_encoder_writes_the_bytes_of_the_numpy_one(data) -> None:
    import zstandard

    from emulator.recording.blocks import encode_block

    n_cols = data.draw(st.integers(1, 10))
    kinds = data.draw(st.lists(st.sampled_from(["f64", "f32", "sent", "wire"]),
                               min_size=n_cols, max_size=n_cols))
    scales = [data.draw(st.sampled_from(SCALES[k])) for k in kinds]
    every = [data.draw(st.sampled_from([1, 1, 2, 3, 10])) for _ in kinds]
    rows = data.draw(st.integers(0, 300))
    frame0 = data.draw(st.integers(0, 50))
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    spread = data.draw(st.sampled_from([1.0, 1e3, 1e6, 1e12]))
    block = np.column_stack([_column(rng, rows, k, sc, spread, data.draw)
                             for k, sc in zip(kinds, scales, strict=True)]).reshape(
                                 rows, n_cols)
    if rows and data.draw(st.booleans()):
        block[rng.integers(rows), rng.integers(n_cols)] = data.draw(
            st.sampled_from([np.nan, np.inf, -np.inf, 1e300, 3.5e38, 2**31 - 0.5]))
    types, z = encode_block(block, kinds, np.array(scales), np.array(every), frame0)
    want_types, want_raw = _numpy_block_bytes(block, kinds, scales, every, frame0)
    assert types == want_types
    assert zstandard.ZstdDecompressor().decompress(z, max_output_size=1 << 24) == want_raw
