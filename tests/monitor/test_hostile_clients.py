"""Hostile monitor clients: bad operands, failing handlers, paths, and a fuzzer.

Every command a client can send reaches the rig through the monitor; none may end the
frame loop, write outside the rig's recordings folder, or overwrite a file.
"""

from __future__ import annotations

import asyncio
import json
import math
import re
import shutil
import socket
import tempfile
import time
from pathlib import Path

import msgpack
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from emulator.commands.demo_live import START_TIMEOUT_S, start_rig, stop_rig, wait_for_socket
from emulator.recording.recorder import read_recording
from tests.conftest import wait_until
from tests.tui.conftest import TRAINSET, RawClient, live_rig  # noqa: F401  (fixture)

OPS = ["inject", "clear", "pause", "resume", "step", "demand", "record", "mark", "auth"]


async def test_step_with_infinite_frames_is_refused_and_the_rig_runs_on(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    r = await c.ask("step", frames=math.inf)
    assert not r["ok"] and "frames" in r["text"]
    assert not monitor.paused  # refused before it touched anything
    frame = rig.frame
    await wait_until(lambda: rig.frame > frame + 50, what="frames after the bad step")


@pytest.mark.parametrize(("message", "says"), [
    ({"op": "step", "frames": math.nan}, "frames must"),
    ({"op": "step", "frames": 2**64 - 1}, "frames must"),
    ({"op": "step", "frames": "10"}, "frames must"), ({"op": "step", "frames": -1}, "frames must"),
    ({"op": "demand", "effort": math.inf}, "effort must"),
    ({"op": "demand", "effort": math.nan}, "effort must"),
    ({"op": "demand", "change": -(2**63)}, "change must"),
    ({"op": "demand", "effort": "full"}, "effort must"),
    ({"op": "demand", "release": "yes"}, "release must"),
    ({"op": "inject", "fault": "catenary-dip", "target": "catenary",
      "params": {"depth": math.nan}}, "depth must"),
    ({"op": "inject", "fault": "catenary-dip", "target": "catenary",
      "params": {"depth": 2**64 - 1}}, "depth must"),
    ({"op": "inject", "fault": "catenary-dip", "target": "catenary", "params": [1, 2]},
     "params must"),
    ({"op": "inject", "fault": ["x"], "target": "catenary"}, "fault must"),
    ({"op": "inject", "fault": "catenary-dip", "target": "catenary", "until_s": math.inf},
     "until_s must"),
    ({"op": "inject"}, "fault is missing"), ({"op": "clear"}, "fault is missing"),
    ({"op": "clear", "fault": 12}, "fault must"), ({"op": "mark", "text": 3}, "text must"),
    ({"op": "mark", "text": "x" * 20_000}, "text is longer"),
    ({"op": "record", "name": "../escaped"}, "name must be a bare file name"),
    ({"op": "record", "path": "/tmp/evil.rrec"}, "bare 'name'"),
    ({"op": "record", "stop": 1}, "stop must"),
    ({"op": "__init__"}, "unknown op"), ({"op": "_apply"}, "unknown op"),
    ({"op": "x" * 1000}, "unknown op"), ({"op": "no such op"}, "unknown op"),
])
async def test_hostile_operands_get_an_error_reply(live_rig, message, says) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    r = await c.ask(**message)
    assert r["ok"] is False and says in r["text"], r["text"]
    assert monitor.counts["handler_errors"] == 0  # every refusal was a checked one
    outside = monitor.record_dir.parent
    assert sorted(p.name for p in outside.iterdir()) == ["monitor.sock"] + (
        ["recordings"] if monitor.record_dir.exists() else [])  # nothing written beside
    frame = rig.frame
    await wait_until(lambda: rig.frame > frame + 20, what="frames after the refusal")


async def test_a_handler_that_fails_anyway_is_contained(live_rig, monkeypatch) -> None:  # noqa: F811
    rig, monitor = live_rig

    def broken(m):
        raise RuntimeError("a defect in a handler")

    monkeypatch.setattr(monitor, "_op_mark", broken)
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    r = await c.ask("mark", text="x")
    assert not r["ok"] and "internal error" in r["text"]
    assert monitor.counts["handler_errors"] == 1
    frame = rig.frame
    await wait_until(lambda: rig.frame > frame + 20, what="frames after the failure")
    assert (await c.ask("pause"))["ok"]  # the same client goes on


async def test_recordings_go_into_the_rig_folder_and_never_overwrite(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    folder = monitor.record_dir
    folder.mkdir(parents=True, exist_ok=True)
    keep = folder / "keep.rrec"
    keep.write_bytes(b"a recording someone wants")
    r = await c.ask("record", name="keep")
    assert not r["ok"] and "exists" in r["text"]
    assert keep.read_bytes() == b"a recording someone wants"
    r = await c.ask("record", path=str(folder.parent / "elsewhere.rrec"))
    assert not r["ok"] and "bare" in r["text"]
    assert not (folder.parent / "elsewhere.rrec").exists()
    r = await c.ask("record")  # the rig names it
    assert r["ok"], r
    assert rig.recorder.path.parent == folder and rig.recorder.path.name.startswith("railrig-")
    assert (await c.ask("record", stop=True))["ok"]
    assert sorted(p.name for p in folder.iterdir()) == sorted(
        ["keep.rrec", rig_named := next(p.name for p in folder.iterdir() if p != keep)])
    assert read_recording(folder / rig_named).complete


# --- the fuzzer, against `railrig serve` in its own process ---------------------------

scalars = st.one_of(st.none(), st.booleans(), st.integers(-(2**63), 2**64 - 1),
                    st.integers(min_value=2**63,
                    max_value=2**64 - 1), st.floats(), st.text(max_size=40),
                    st.text(min_size=5000, max_size=20000), st.binary(max_size=64))
values = st.recursive(scalars, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(st.text(max_size=8), inner, max_size=4), max_leaves=8)
commands = st.fixed_dictionaries({"op": st.sampled_from(OPS)},
                                 optional={k: values for k in (
                                     "frames", "effort", "change", "release", "fault",
                                     "target", "params", "until_s", "name", "path", "stop",
                                     "text", "token", "id")})
messages = st.one_of(
    commands.map(msgpack.packb),
    values.map(lambda v: msgpack.packb(v)),  # not a map, or a map without an op
    st.dictionaries(st.integers(-(2**63), 2**63), values, max_size=3).map(msgpack.packb),
    st.binary(min_size=1, max_size=256),  # raw bytes, mostly not msgpack
)


def _serve(record: bool):
    """``railrig serve`` (demo, real time), its monitor on a socket; recording from the
    start if ``record``. Yields (process, address, recording, report, folder)."""
    where = Path(tempfile.mkdtemp(prefix="rr"))
    recording, report = where / "run.rrec", where / "report.json"
    extra = ("--spin-us", "0", "--record-dir", str(where / "recs"), "--report-json",
             str(report)) + (("--record", str(recording)) if record else ())
    rig, address = start_rig(TRAINSET, where, 60.0, 3000.0, where / "rig.log", extra=extra)
    try:
        if not wait_for_socket(rig, address, START_TIMEOUT_S):
            raise RuntimeError(f"railrig serve did not start: {(where / 'rig.log').read_text()}")
        yield rig, address, recording, report, where
    finally:
        stop_rig(rig)
        shutil.rmtree(where, ignore_errors=True)


@pytest.fixture(scope="module")
def served_rig():
    """A rig recording from its start: the fuzz must leave that recording whole."""
    yield from _serve(record=True)


@pytest.fixture(scope="module")
def unrecorded_rig():
    """A rig not recording: the fuzz reaches the monitor's own recordings."""
    yield from _serve(record=False)


def _send(address: str, payload: bytes) -> None:
    with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as s:
        s.settimeout(5)
        s.connect(address)
        s.sendall(payload)
        s.shutdown(socket.SHUT_WR)
        deadline = time.monotonic() + 0.5  # read what the rig answers, then hang up
        try:
            while time.monotonic() < deadline and s.recv(65536):
                pass
        except OSError:
            pass


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture,
                                 HealthCheck.too_slow, HealthCheck.data_too_large])
@given(payload=messages)
@pytest.mark.long
def test_fuzzed_monitor_messages_never_stop_the_rig(served_rig, payload: bytes) -> None:
    rig, address, _, _, _ = served_rig
    _send(address, payload)
    assert rig.poll() is None, "the rig process ended"


@pytest.mark.long  # (it follows the fuzz above, which is long)
def test_after_the_fuzz_the_rig_runs_and_its_recording_is_whole(served_rig) -> None:
    rig, address, recording, report, _ = served_rig

    async def frames() -> tuple[int, int, dict]:
        c = await RawClient.open(address)
        await c.next("hello")
        await c.ask("resume")  # the fuzz may have paused it
        a = (await c.next("telemetry"))["frame"]
        b, counts = a, {}
        while b <= a + 100:
            snap = await c.next("telemetry")
            b, counts = snap["frame"], snap["monitor"]
        c.writer.close()
        return a, b, counts

    a, b, counts = asyncio.run(frames())
    assert b > a + 100
    # every fuzzed message was refused by a check of its own, none by a handler that
    # failed and was contained (the rig would run on either way: the process alone
    # being alive shows less); and the fuzz did reach the monitor
    assert counts["handler_errors"] == 0, counts
    assert counts["commands"] + counts["bad_messages"] > 0, counts
    assert rig.poll() is None
    assert stop_rig(rig) == 0
    counters = json.loads(report.read_text())
    rec = read_recording(recording)
    assert rec.complete
    assert len(rec.data) == counters["frames"]  # every frame the rig ran is in it


record_commands = st.fixed_dictionaries({"op": st.just("record")}, optional={
    "name": st.one_of(st.text(max_size=80), values), "path": values,
    "stop": st.one_of(st.booleans(), values)})


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(command=record_commands)
def test_fuzzed_record_commands_write_only_bare_names_in_the_folder(unrecorded_rig,
                                                                    command) -> None:
    rig, address, _, _, where = unrecorded_rig
    _send(address, msgpack.packb(command))
    _send(address, msgpack.packb({"op": "record", "stop": True}))
    assert rig.poll() is None
    assert {p.name for p in where.iterdir()} <= {"monitor.sock", "rig.log", "recs",
                                                  "report.json"}
    recs = where / "recs"
    for p in recs.iterdir() if recs.exists() else ():
        assert p.is_file() and re.fullmatch(r"[A-Za-z0-9][A-Za-z0-9._-]*\.rrec", p.name)


def test_after_the_record_fuzz_a_plain_record_command_still_makes_a_whole_recording(
        unrecorded_rig) -> None:
    # the fuzz above may never have made a recording (a loop over none passes): a bare
    # name, started and stopped, gives a complete file in the folder, readable, with
    # frames one period apart
    rig, address, _, _, where = unrecorded_rig
    _send(address, msgpack.packb({"op": "record", "name": "plain-after-fuzz"}))
    time.sleep(0.3)
    _send(address, msgpack.packb({"op": "record", "stop": True}))
    path = where / "recs" / "plain-after-fuzz.rrec"
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline and not (path.exists() and read_recording(path).complete):
        time.sleep(0.1)
    rec = read_recording(path)
    assert rec.complete and len(rec.data) > 10
    t = rec.column("time_s")
    np.testing.assert_allclose(np.diff(t), 1e-3, rtol=1e-9)
    assert rig.poll() is None
