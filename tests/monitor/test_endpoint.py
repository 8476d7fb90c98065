"""The monitor endpoint: telemetry rate, operator commands, bad and slow clients.

A real rig (reference controller in this process, afap pacing) and real Unix sockets;
the clients here speak the documented protocol with msgpack directly.
"""

from __future__ import annotations

import asyncio
import os

import numpy as np
import pytest

from emulator.monitor import endpoint as monitor_module
from emulator.monitor.endpoint import MonitorError, parse_address
from emulator.plant import layout as L  # noqa: N812
from emulator.recording.recorder import read_recording
from tests.conftest import wait_until
from tests.tui.conftest import TRAINSET, RawClient, live_rig  # noqa: F401  (fixture)


@pytest.mark.parametrize(("address", "kind"), [
    ("/run/user/1/railrig.sock", "unix"), ("unix:rel.sock", "unix"),
    ("127.0.0.1:7400", "tcp"), ("localhost:7400", "tcp"), ("[::1]:7400", "tcp")])
def test_addresses_are_local(address: str, kind: str) -> None:
    assert parse_address(address)[0] == kind


@pytest.mark.parametrize("address", ["10.1.2.3:7400", "0.0.0.0:7400", "rig.lab:7400",
                                     "127.0.0.1"])
def test_remote_or_malformed_addresses_are_refused(address: str) -> None:
    with pytest.raises(MonitorError):
        parse_address(address)


async def test_hello_then_telemetry_at_about_30_hz(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    hello = await c.next("hello")
    assert hello["motors"] == rig.plant.params.motor_names
    assert {k["name"] for k in hello["catalogue"]} >= {"open-motor-phase", "catenary-dip"}
    assert hello["targets"]["catenary"] == ["catenary"]
    await c.next("telemetry")  # the first comes at once, on connect
    a = await c.next("telemetry")
    b = await c.next("telemetry")
    # one snapshot every round(1 / (30 Hz * 1 ms)) = 33 frames of plant time
    assert monitor.every == 33
    assert b["frame"] - a["frame"] == 33
    assert len(b["motors"]["torque_nm"]) == 8 and len(b["groups"]) == 2


async def test_inject_clear_and_errors_reach_the_rig(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    r = await c.ask("inject", fault="open-motor-phase", target="INV-B1.m2",
                    params={"phase": 1})
    assert r["ok"], r
    await c.next("event", type="fault")
    assert rig.plant.mu[5, L.MU_OPEN_PHASE] == 2.0
    snap = await c.next("telemetry")
    assert snap["faults"][0]["state"] == "active"
    r = await c.ask("clear", fault="open-motor-phase@INV-B1.m2")
    assert r["ok"] and rig.plant.mu[5, L.MU_OPEN_PHASE] == 0.0
    bad = await c.ask("inject", fault="open-motor-phase", target="INV-Z9.m1")
    assert not bad["ok"] and "no motor named 'INV-Z9.m1'" in bad["text"]
    bad = await c.ask("inject", fault="catenary-dip", target="catenary",
                      params={"voltage_pu": float("nan")})
    assert not bad["ok"] and "voltage_pu must be a finite number" in bad["text"]
    bad = await c.ask("warp", speed=9)
    assert not bad["ok"] and "unknown op" in bad["text"]
    bad = await c.ask("demand", effort=3.0)
    assert not bad["ok"] and "-1..1" in bad["text"]


async def test_pause_step_resume(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    await c.ask("pause")
    frame = rig.frame
    await asyncio.sleep(0.3)  # paused: nothing to wait for, the frame must stay
    assert rig.frame == frame
    await c.ask("step", frames=5)
    await wait_until(lambda: rig.frame == frame + 5, what="five single steps")
    await asyncio.sleep(0.3)  # and no more than five
    assert rig.frame == frame + 5
    await c.ask("resume")
    await wait_until(lambda: rig.frame > frame + 100, what="running again")


async def test_operator_demand_record_and_mark(live_rig, tmp_path) -> None:  # noqa: F811
    rig, monitor = live_rig
    c = await RawClient.open(monitor.address)
    await c.next("hello")
    program = rig.program
    assert (await c.ask("demand", effort=-0.5))["ok"]
    assert rig.program is None and rig.driver.effort_demand == -0.5
    assert rig.driver.mode == 4  # brake
    assert (await c.ask("demand", change=-0.2))["ok"]
    assert rig.driver.effort_demand == -0.7
    assert (await c.ask("record", name="op"))["ok"]
    path = monitor.record_dir / "op.rrec"
    start = rig.frame
    await wait_until(lambda: rig.frame > start + 150, what="frames recorded")
    assert (await c.ask("mark", text="before the dip"))["ok"]
    assert (await c.ask("record", stop=True))["ok"]
    assert (await c.ask("demand", release=True))["ok"]
    assert rig.program is program
    rec = read_recording(path)
    # every frame from the start to the stop, none lost at the close: more than the 150
    # waited for, one a period without a gap
    t = rec.column("time_s")
    assert rec.complete and len(rec.data) > 150
    assert np.allclose(np.diff(t), 1e-3, rtol=1e-9, atol=0)
    assert any(m.get("label") == "before the dip" for m in rec.marks)


async def test_garbage_drops_only_that_client(live_rig) -> None:  # noqa: F811
    rig, monitor = live_rig
    good = await RawClient.open(monitor.address)
    await good.next("hello")
    _reader, writer = await asyncio.open_unix_connection(monitor.address)
    writer.write(b"\xc1" * 64)  # 0xc1 is never used in msgpack
    await wait_until(lambda: monitor.counts["bad_messages"] >= 1, what="garbage counted")
    await wait_until(lambda: len(monitor.clients) == 1, what="the garbling client dropped")
    assert monitor.counts["bad_messages"] == 1  # one undecodable stream, counted once
    frame = rig.frame
    await wait_until(lambda: rig.frame > frame, what="frames going on")
    assert (await good.ask("mark", text="still here"))["ok"]
    writer.close()


async def test_a_client_that_does_not_read_is_dropped(live_rig, monkeypatch) -> None:  # noqa: F811
    rig, monitor = live_rig
    monkeypatch.setattr(monitor_module, "MAX_BACKLOG", 4096)
    _reader, writer = await asyncio.open_unix_connection(monitor.address)
    # never read: the socket buffers fill (~45 kB/s of snapshots), then the rig's backlog
    await wait_until(lambda: monitor.counts["clients_dropped"] >= 1, timeout_s=60,
                     what="the non-reading client dropped")
    assert monitor.counts["clients_dropped"] == 1
    assert monitor.clients == []
    frame = rig.frame
    await wait_until(lambda: rig.frame > frame, what="frames going on")  # the loop went on
    writer.close()


async def test_a_scenario_run_sends_its_verdicts_to_a_watching_client(tmp_path) -> None:
    import dataclasses
    import os
    import tempfile

    from emulator.scenario import load_scenario, run_scenario
    from tests.scenario.test_determinism import SCENARIO

    scenario = dataclasses.replace(load_scenario(SCENARIO), duration_s=2.5)
    address = os.path.join(tempfile.mkdtemp(prefix="rr"), "m.sock")
    run = asyncio.create_task(run_scenario(scenario, monitor=address))
    await wait_until(lambda: os.path.exists(address), timeout_s=60, what="the run's monitor")
    c = await RawClient.open(address)
    hello = await c.next("hello")
    assert hello["events"][0]["text"].endswith(": started")
    verdict = await c.next("event", type="scenario", timeout=120.0)
    result = await run
    checks = [m for m in c.seen if m.get("type") == "check"]
    assert len(checks) == len(result.results) > 0
    assert verdict["text"].endswith("passed" if result.passed else "FAILED")
    assert not os.path.exists(address)  # the monitor went with the run


async def test_a_second_rig_does_not_take_a_live_socket(live_rig, tmp_path) -> None:  # noqa: F811
    from emulator.link import open_link
    from emulator.monitor.endpoint import Monitor
    from emulator.rig.frame_loop import Rig

    rig, monitor = live_rig
    link = open_link("loop://second-rig")
    other = Rig(rig.plant.params, link)
    refused = Monitor(other, monitor.address)
    with pytest.raises(MonitorError, match="another rig's monitor listens"):
        await refused.start()
    refused.close()  # as a runner's cleanup does: the live rig's socket must stay
    assert os.path.exists(monitor.address)
    c = await RawClient.open(monitor.address)
    assert (await c.next("hello"))["kind"] == "hello"
    stale = tmp_path / "stale.sock"
    first = Monitor(other, str(stale))
    await first.start()
    first._server.close()  # a rig killed without cleaning up leaves the file behind
    await first._server.wait_closed()
    assert stale.exists()
    second = Monitor(other, str(stale))
    await second.start()  # replaces the stale file
    second.close()


async def test_a_lockstep_rig_faster_than_real_time_sends_at_most_twice_the_rate(
        tmp_path) -> None:
    # Lockstep runs the demo at 10-15x real time on the 2-core machine: every 33rd frame
    # then comes hundreds of times a second of wall time, more than any dashboard draws
    # (and a flood a slow client is dropped for). Snapshots are at most 2 x 30 a second
    # of wall time, and still come.
    import time

    from emulator.monitor.endpoint import RATE_HZ, Monitor
    from emulator.scenario.demo_run import run_reference_demo

    seen: dict = {}

    async def drain(reader) -> None:  # a client that keeps up: never dropped
        while await reader.read(1 << 16):
            pass

    async def attach(rig, _tcu) -> None:
        monitor = Monitor(rig, str(tmp_path / "m.sock"))
        await monitor.start()
        client = await RawClient.open(monitor.address)
        await client.next("hello")
        seen["monitor"], seen["client"] = monitor, client  # (kept: its writer stays open)
        seen["reading"] = asyncio.create_task(drain(client.reader))
        program_update = rig.program.update

        def update(r) -> None:  # the wall clock from the first frame, after the warm-up
            seen.setdefault("start", time.monotonic())
            program_update(r)

        rig.program.update = update

    await run_reference_demo(TRAINSET, in_process=True, max_plant_s=4.0, setup=attach)
    wall = time.monotonic() - seen["start"]
    monitor = seen["monitor"]
    snapshots = monitor.counts["snapshots"]
    assert monitor.counts["clients_dropped"] == 0 and len(monitor.clients) == 1
    monitor.close()
    await asyncio.wait_for(seen["reading"], 10)
    if wall >= 4.0 / 2:  # (10-17x on the 2-core machine)
        pytest.skip(f"the demo ran at {4.0 / wall:.1f}x real time here: the pacing "
                    "shows only above 2x")
    # the one on connect, then no two closer than 1 / (2 x 30 Hz). (A lower bound tried
    # on 2026-12-04, half of 30 a second, failed on a fresh clone's busy run: 13 in
    # 0.97 s at 4x real time; how often the loop lets a snapshot out is not derived here)
    assert 2 <= snapshots <= 2 + wall * 2 * RATE_HZ, (snapshots, wall)
