"""The dashboard driven by keys against a real rig over its real monitor socket.

The rig is ``railrig serve`` running the demo in real time in its own process; a second
monitor client (``RawClient``) reads the rig's own state to check what the keys did,
then the test reads the dashboard's view of it.
"""

from __future__ import annotations

import re
import subprocess
import sys

import pytest
from textual.widgets import Input, OptionList

from tui.app import RigDashboard
from tui.panels import TrainPanel

from .conftest import RawClient, rig_process  # noqa: F401  (fixture)

NOMINAL_KV = 25.0  # the demo trainset's line (profiles/trainsets/tern-25kv.toml)


async def wait_for(pilot, condition, seconds: float = 30.0) -> bool:
    for _ in range(int(seconds / 0.05)):
        if condition():
            return True
        await pilot.pause(0.05)
    return condition()


async def attached(app, pilot) -> None:
    assert await wait_for(pilot, lambda: app.snap is not None), "no telemetry reached the view"


async def highlight(pilot, app, menu_id: str, option_id: str) -> None:
    menu = app.query_one(menu_id, OptionList)
    for _ in range(menu.option_count):
        option = menu.highlighted_option
        if option is not None and option.id == option_id:
            return
        await pilot.press("down")
    raise AssertionError(f"{option_id} not found in {menu_id}")


def line_kv(app) -> float:
    """The line voltage the train panel shows, kV."""
    text = str(app.query_one(TrainPanel).render())
    return float(re.search(r"line\s+([\d.]+) kV", text).group(1))


async def rig_state(address: str) -> dict:
    """The rig's state now, read by a client of our own (the rig sends a snapshot at
    once to a client that attaches; a client kept open would read a backlog)."""
    probe = await RawClient.open(address)
    try:
        await probe.next("hello")
        return await probe.next("telemetry")
    finally:
        probe.writer.close()


@pytest.mark.long
async def test_inject_a_catenary_dip_by_keys_see_it_then_clear_it(rig_process) -> None:  # noqa: F811
    app = RigDashboard(rig_process, retry=False)
    async with app.run_test(size=(100, 32)) as pilot:
        await attached(app, pilot)
        # once the line-side window is full, dip the line to 0.6 pu: type it over the
        # default (0.7) in the parameter field, Enter injects
        assert await wait_for(pilot, lambda: app.snap["line"]["voltage_kv_rms"] > 23.0)
        await pilot.press("f")
        await highlight(pilot, app, "#catalogue", "catenary-dip")
        field = app.query_one("#fault-params Input", Input)
        field.focus()
        await pilot.press("end", *["backspace"] * 6, "0", ".", "6", "enter")
        # the rig has it active with 0.6 pu, and its pantograph voltage fell to about that
        for _ in range(100):
            snap = await rig_state(rig_process)
            if snap["line"]["voltage_kv_rms"] < 0.65 * NOMINAL_KV:
                break
            await pilot.pause(0.05)
        assert [(f["name"], f["params"]) for f in snap["faults"] if f["state"] == "active"] == [
            ("catenary-dip@catenary", {"voltage_pu": 0.6})]
        assert snap["line"]["voltage_kv_rms"] < 0.65 * NOMINAL_KV
        # the view: the fault listed as active, the line near 15 kV in the train panel
        panel = app.query_one("#active-faults", OptionList)
        assert await wait_for(pilot, lambda: "active  catenary-dip@catenary" in str(
            panel.get_option_at_index(0).prompt))
        await pilot.press("d")
        assert await wait_for(pilot, lambda: line_kv(app) < 0.65 * NOMINAL_KV)
        # clear it: the faults view, the run's list, x
        await pilot.press("f")
        panel.focus()
        await pilot.press("x")
        for _ in range(100):
            snap = await rig_state(rig_process)
            if snap["line"]["voltage_kv_rms"] > 0.9 * NOMINAL_KV:
                break
            await pilot.pause(0.05)
        assert [f["state"] for f in snap["faults"]] == ["cleared"]
        assert snap["line"]["voltage_kv_rms"] > 0.9 * NOMINAL_KV
        assert await wait_for(pilot, lambda: "cleared  catenary-dip@catenary" in str(
            panel.get_option_at_index(0).prompt))
        await pilot.press("d")
        assert await wait_for(pilot, lambda: line_kv(app) > 0.9 * NOMINAL_KV)
        assert app.malformed == 0  # the real rig's telemetry drew whole throughout


async def test_pause_step_and_demand_keys(rig_process) -> None:  # noqa: F811
    app = RigDashboard(rig_process, retry=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await attached(app, pilot)
        await pilot.press("space")
        assert await wait_for(pilot, lambda: app.snap["paused"])
        a = await rig_state(rig_process)
        await pilot.pause(0.3)
        assert a["paused"] and (await rig_state(rig_process))["frame"] == a["frame"]
        await pilot.press("s")
        assert await wait_for(pilot, lambda: app.snap["frame"] == a["frame"] + 1)
        assert (await rig_state(rig_process))["frame"] == a["frame"] + 1
        await pilot.press("0")  # the operator takes the demand: coast
        assert await wait_for(pilot, lambda: app.snap["train"]["program"] == "operator")
        await pilot.press("minus", "minus")
        assert await wait_for(pilot, lambda: app.snap["train"]["demand"] == -0.2)
        assert (await rig_state(rig_process))["train"]["driver_mode"] == "brake"
        await pilot.press("h")  # hand the demand back to the driver program
        assert await wait_for(pilot, lambda: app.snap["train"]["program"] != "operator")
        await pilot.press("space")
        assert await wait_for(pilot, lambda: app.snap["frame"] > a["frame"] + 300)
        assert app.malformed == 0


async def test_attach_detach_attach_while_the_rig_runs(rig_process) -> None:  # noqa: F811
    first = RigDashboard(rig_process, retry=False)
    async with first.run_test(size=(80, 24)) as pilot:
        await attached(first, pilot)
        frame = first.snap["frame"]
        await pilot.press("q")
    second = RigDashboard(rig_process, retry=False)
    async with second.run_test(size=(80, 24)) as pilot:
        await attached(second, pilot)
        assert await wait_for(pilot, lambda: second.snap["frame"] > frame + 500)
        assert await wait_for(pilot, lambda: second.snap["monitor"]["clients"] == 1)
        # the rig's events from before this client attached came with the hello (the
        # rig keeps the last 200) and are in the log, older than the first snapshot
        backlog = second.hello["events"]
        assert backlog and backlog[0]["t_s"] < second.history.times[0]
        assert f"{backlog[-1]['type']:<10} {backlog[-1]['text']}" in "\n".join(
            second.log_lines)


async def test_without_a_rig_the_dashboard_says_so() -> None:
    app = RigDashboard("/nonexistent/railrig.sock", retry=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause(0.5)
        assert not app.attached
        assert "DETACHED" in str(app.query_one("#status").render())


def test_the_dashboard_imports_no_plant_code() -> None:
    probe = ("import sys, tui.app; "
             "print(sorted(m for m in sys.modules if m.split('.')[0] in "
             "('emulator', 'numba')))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "[]"
