"""Recordings: round trip, damaged tails, a killed writer, exports.

The chunks' CRC-32 is checked against the catalogue's parameter set (RevEng: CRC-32,
poly 0x04C11DB7 reflected as 0xEDB88320, init and xorout 0xFFFFFFFF, check value
0xCBF43926 over "123456789"; REFERENCES.md), written bit by bit here, apart from the
recorder, which uses zlib.
"""

from __future__ import annotations

import os
import signal
import struct
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from emulator.recording.recorder import (
    Recorder,
    RecordingError,
    export_csv,
    export_npz,
    read_recording,
)


def crc32_by_the_catalogue(data: bytes) -> int:
    crc = 0xFFFFFFFF
    for byte in data:
        crc ^= byte
        for _ in range(8):
            crc = (crc >> 1) ^ 0xEDB88320 if crc & 1 else crc >> 1
    return crc ^ 0xFFFFFFFF


def chunks_of(raw: bytes) -> list[tuple[int, bytes]]:
    """(stored CRC, payload) of each chunk, by the layout the module documents."""
    out, at = [], 0
    while at < len(raw):
        magic, length, crc = struct.unpack_from("<4sII", raw, at)
        assert magic == b"RRC2"
        out.append((crc, raw[at + 12:at + 12 + length]))
        at += 12 + length
    return out


def test_the_reference_meets_the_catalogue_check_value() -> None:
    assert crc32_by_the_catalogue(b"123456789") == 0xCBF43926


def test_every_chunk_carries_the_crc32_of_its_payload(tmp_path) -> None:
    with Recorder(tmp_path / "r.rrec", ["t", "x"], {"seed": 1}, chunk_rows=16) as rec:
        for i in range(100):
            rec.append(np.array([i * 1e-3, np.sin(i)]))
        rec.mark(label="m", t=0.05)
    chunks = chunks_of((tmp_path / "r.rrec").read_bytes())
    assert len(chunks) == 1 + 7 + 1  # header, ceil(100 / 16) row chunks, the mark
    for crc, payload in chunks:
        assert crc == crc32_by_the_catalogue(payload)


def test_round_trip(tmp_path) -> None:
    rows = np.random.default_rng(0).normal(size=(1000, 3))
    with Recorder(tmp_path / "r.rrec", ["t", "a.b", "c"], {"seed": 7}, chunk_rows=64) as rec:
        for row in rows:
            rec.append(row)
    back = read_recording(tmp_path / "r.rrec")
    assert back.complete and back.meta == {"seed": 7}
    assert np.array_equal(back.data, rows)
    assert np.array_equal(back.column("a.b"), rows[:, 1])


def test_damaged_tail_reads_up_to_the_last_good_chunk(tmp_path) -> None:
    path = tmp_path / "r.rrec"
    with Recorder(path, ["x"], {}, chunk_rows=10) as rec:
        for i in range(100):
            rec.append(np.array([i]))
    raw = bytearray(path.read_bytes())
    truncated = tmp_path / "cut.rrec"
    truncated.write_bytes(raw[:-7])
    back = read_recording(truncated)
    assert not back.complete and "truncated" in back.note
    assert list(back.column("x")) == list(range(90))
    raw[-3] ^= 0xFF  # corrupt the last chunk's payload
    corrupt = tmp_path / "bad.rrec"
    corrupt.write_bytes(raw)
    back = read_recording(corrupt)
    assert not back.complete and "CRC" in back.note and len(back.data) == 90


def test_not_a_recording(tmp_path) -> None:
    path = tmp_path / "x.rrec"
    path.write_bytes(b"hello world, not ours")
    with pytest.raises(RecordingError):
        read_recording(path)


def test_a_killed_writer_leaves_a_readable_file(tmp_path) -> None:
    path = tmp_path / "k.rrec"
    script = (
        "import sys, time, numpy as np\n"
        "from emulator.recording.recorder import Recorder\n"
        "rec = Recorder(sys.argv[1], ['i'], {'run': 'killed'}, chunk_rows=100000, flush_s=0.1)\n"
        "i = 0\n"
        "while True:\n"
        "    rec.append(np.array([i])); i += 1; time.sleep(0.0005)\n")
    proc = subprocess.Popen([sys.executable, "-c", script, str(path)])
    _wait_for_chunks(path, 5)  # the header and four chunks flushed by time
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    back = read_recording(path)
    assert back.meta == {"run": "killed"}
    assert len(back.data) > 100  # flushed by time, not by a full buffer
    assert np.array_equal(back.column("i"), np.arange(len(back.data)))


def _wait_for_chunks(path, n: int, timeout_s: float = 120.0) -> int:
    """Wait until the file holds n whole chunks (a busy machine may take its time)."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if path.exists():
            raw = path.read_bytes()
            whole, at = 0, 0
            while at + 12 <= len(raw):
                _, length, _ = struct.unpack_from("<4sII", raw, at)
                if at + 12 + length > len(raw):
                    break
                at += 12 + length
                whole += 1
            if whole >= n:
                return whole
        time.sleep(0.05)
    raise AssertionError(f"{path} did not reach {n} chunks within {timeout_s:g} s")


@pytest.mark.parametrize("command", [
    ["serve", "--controller", "reference", "--program", "demo", "--mode", "realtime",
     "--no-monitor", "--spin-us", "0"],
    ["run", "profiles/scenarios/four-modes.toml"],
])
def test_sigkill_of_a_recording_rig_leaves_what_it_flushed(tmp_path, command) -> None:
    # railrig serve --record and railrig run --record, killed: readable up to the last
    # flushed chunk, every frame before it there once and in order
    root = Path(__file__).parents[2]
    path = tmp_path / "killed.rrec"
    proc = subprocess.Popen([sys.executable, "-m", "emulator.cli", *command, "--record",
                             str(path)], cwd=root, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    try:
        _wait_for_chunks(path, 12)
        seen = read_recording(path)  # what had been flushed just before the kill
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
    back = read_recording(path)
    assert len(back.data) >= len(seen.data) > 0  # nothing flushed is lost
    # and it is what was flushed, row for row, from the run's first frame (a recording
    # that lost its leading blocks, or rewrote one, would not be)
    assert np.array_equal(back.data[:len(seen.data)], seen.data, equal_nan=True)
    assert back.meta["period_us"] == 1000
    t = back.column("time_s")
    assert t[0] == pytest.approx(1e-3, abs=1e-12)  # the state after frame 0, at t_1
    np.testing.assert_allclose(np.diff(t), 1e-3, rtol=1e-9)  # contiguous frames


def test_exports(tmp_path) -> None:
    with Recorder(tmp_path / "r.rrec", ["t", "v.mps"], {"seed": 1}) as rec:
        for i in range(10):
            rec.append(np.array([i * 1e-3, 2.0 * i]))
    back = read_recording(tmp_path / "r.rrec")
    export_csv(back, tmp_path / "r.csv")
    lines = (tmp_path / "r.csv").read_text().splitlines()
    assert lines[0] == "t,v.mps" and lines[3] == "0.002,4"
    export_npz(back, tmp_path / "r.npz")
    z = np.load(tmp_path / "r.npz")
    assert np.array_equal(z["v__mps"], back.column("v.mps"))


def test_rig_records_frames_and_export_command(tmp_path, params) -> None:
    import asyncio

    from emulator.cli import main
    from tests.link.conftest import command, make_rig

    async def go():
        rig, _ = await make_rig(params, lambda r, m: command(r, m[1]), ideal_dc_links=True)
        rig.recorder = Recorder(tmp_path / "run.rrec", rig.record_columns(), {"seed": 0})
        await rig.run(frames=300)
        rig.recorder.close()
        return rig
    rig = asyncio.run(go())
    back = read_recording(tmp_path / "run.rrec")
    assert back.complete and len(back.data) == 300
    assert back.column("time_s")[-1] == pytest.approx(0.3)
    assert np.all(back.column("y.DC-A.voltage_v")[1:] > 1700)
    assert np.all(back.column("u.INV-A1.duty_a")[1:] == pytest.approx(0.5))
    assert main(["export", str(tmp_path / "run.rrec"), "--csv"]) == 0
    assert (tmp_path / "run.csv").read_text().startswith("time_s,y.")
    assert rig.frame == 300


def test_rig_recording_with_a_channel_set_and_the_mdf_export_command(tmp_path, params) -> None:
    # the rig keeps the measurements and commands as wire integers (what the telegrams
    # carried) and the chosen set only; railrig export --mdf cuts channels and time
    import asyncio

    from asammdf import MDF

    from emulator.cli import main
    from tests.link.conftest import command, make_rig

    async def go():
        rig, ctl = await make_rig(params, lambda r, m: command(r, m[1]), ideal_dc_links=True)
        rig.start_recording(str(tmp_path / "run.rrec"), channels=["link"],
                            states=["train.speed_mps"])
        await rig.run(frames=300)
        rig.recorder.close()
        return rig, ctl
    rig, ctl = asyncio.run(go())
    back = read_recording(tmp_path / "run.rrec")
    assert back.columns[0] == "time_s" and not any(c.startswith("p.") for c in back.columns)
    assert {k for c, k in zip(back.columns, back.kinds, strict=True)
            if c.startswith("y.")} == {"sent"}
    assert {k for c, k in zip(back.columns, back.kinds, strict=True)
            if c.startswith("u.")} == {"wire"}
    # y_k as recorded is y_k as the controller received it: wire value x scale
    sm = rig.signal_map
    i = sm.index("measurement", "DC-A.voltage_v")
    sent = [msgpack_unpack(p)[6 + i] * sm.measurements[i].scale for p in ctl.received[:300]]
    np.testing.assert_array_equal(back.column("y.DC-A.voltage_v"), sent)
    assert main(["export", str(tmp_path / "run.rrec"), "--mdf", str(tmp_path / "cut.mf4"),
                 "--channels", "y.DC-*", "--from-s", "0.1", "--to-s", "0.2"]) == 0
    mdf = MDF(tmp_path / "cut.mf4")
    try:
        names = sorted(n for n in mdf.channels_db if n != "time")
        assert names == sorted(c for c in back.columns if c.startswith("y.DC-"))
        t = mdf.get(names[0]).timestamps
        assert t[0] == pytest.approx(0.1) and t[-1] == pytest.approx(0.2)
    finally:
        mdf.close()
    assert main(["export", str(tmp_path / "run.rrec"), "--mdf", str(tmp_path / "x.mf4"),
                 "--channels", "p.nothing*"]) == 2


def msgpack_unpack(payload: bytes) -> list:
    import msgpack

    return msgpack.unpackb(payload)


def test_a_command_sent_as_a_float_is_recorded_as_applied(tmp_path, params) -> None:
    # a controller may send floats in wire units (the README): 1234.56 at scale 1e-4 acts
    # as a duty of 0.123456, and the recording says 0.123456, not the nearest count
    import asyncio

    import msgpack

    from tests.link.conftest import command, make_rig

    def answer(rig, m):
        items = msgpack.unpackb(command(rig, m[1]))
        items[6 + rig.signal_map.index("command", "INV-A1.duty_a")] = 1234.56
        return msgpack.packb(items)

    async def go():
        rig, _ = await make_rig(params, answer, ideal_dc_links=True)
        rig.start_recording(str(tmp_path / "f.rrec"), channels=["link"])
        await rig.run(frames=50)
        rig.recorder.close()
    asyncio.run(go())
    duty = read_recording(tmp_path / "f.rrec").column("u.INV-A1.duty_a")[1:]
    np.testing.assert_array_equal(duty, 1234.56 * 1e-4)  # the codec's wire x scale


def test_the_states_a_scenario_judges_are_recorded_at_float64(tmp_path) -> None:
    # a verdict must not depend on float32 rounding of the value it judges
    import asyncio
    import dataclasses

    from emulator.profiles.reader import PROFILES_DIR
    from emulator.scenario.checks import signal_columns
    from emulator.scenario.runner import run_scenario
    from emulator.scenario.spec import load_scenario

    scenario = dataclasses.replace(
        load_scenario(PROFILES_DIR / "scenarios" / "four-modes.toml"), duration_s=0.5)
    asyncio.run(run_scenario(scenario, record=tmp_path / "s.rrec"))
    rec = read_recording(tmp_path / "s.rrec")
    judged = {j for c in scenario.checks if c.signal is not None
              for j in signal_columns(rec.columns, c.signal)[0]}
    plant = [j for j in judged if rec.columns[j].startswith("p.")]
    assert plant  # the scenario judges plant states
    assert all(rec.kinds[j] == "f64" for j in plant), [rec.columns[j] for j in plant]
    others = [k for j, (c, k) in enumerate(zip(rec.columns, rec.kinds, strict=True))
              if c.startswith("p.") and j not in judged]
    assert "f32" in others  # the rest stays compact


@pytest.mark.parametrize("background", [True, False])
def test_a_disk_that_fills_up_is_said_and_what_was_written_stays(tmp_path, background) -> None:
    # a full disk: ENOSPC from the file (as /dev/full gives), after two whole blocks
    import errno

    path = tmp_path / "full.rrec"
    rec = Recorder(path, ["i"], {}, chunk_rows=10, flush_s=1e9, background=background)
    for i in range(20):
        rec.append(np.array([float(i)]))
    rec.flush()
    real = rec._fh

    class Full:
        closed = False

        def write(self, data):
            raise OSError(errno.ENOSPC, "No space left on device")

        def flush(self):
            real.flush()

        def close(self):
            real.close()
            self.closed = True

    if background:  # let the thread write the two blocks before the disk fills
        _wait_for_chunks(path, 3)
    rec._fh = Full()
    with pytest.raises(OSError, match=r"could not be written: .*No space left"):
        for i in range(20, 60):
            rec.append(np.array([float(i)]))
        rec.flush()
        if background:
            rec.close()
    if not background:  # said at the flush, and again when it is closed
        with pytest.raises(OSError, match="could not be written"):
            rec.close()
    back = read_recording(path)
    np.testing.assert_array_equal(back.column("i"), np.arange(20.0))


def test_ctrl_c_while_a_block_is_written_inline_writes_it_once(tmp_path) -> None:
    # a KeyboardInterrupt after the block reached the file, before the flush returned
    path = tmp_path / "ctrl-c.rrec"
    rec = Recorder(path, ["i"], {}, chunk_rows=10, flush_s=1e9, background=False)
    write, calls = rec._write, []

    def write_then_interrupted(obj):
        write(obj)
        calls.append(obj)
        if len(calls) == 1:
            raise KeyboardInterrupt

    rec._write = write_then_interrupted
    with pytest.raises(KeyboardInterrupt):
        for i in range(10):
            rec.append(np.array([float(i)]))
    for i in range(10, 15):
        rec.append(np.array([float(i)]))
    rec.close()
    back = read_recording(path)
    assert back.complete, back.note
    np.testing.assert_array_equal(back.column("i"), np.arange(15.0))
