"""Layout snapshots of the dashboard at 80x24 and 160x48, from stored telemetry.

The app is fed the hello and snapshots of tests/tui/data (recorded once from a real
run, see canned.py) without a rig, and the screen's text is compared with
tests/tui/snapshots/*.txt. A missing snapshot is written and the test fails so that a
person reads it; ``RAILRIG_UPDATE_SNAPSHOTS=1`` rewrites them after an intended change.
Colour is not part of the snapshot: what they hold is what a no-colour terminal shows.
"""

from __future__ import annotations

import io
import os
from pathlib import Path

import pytest
from rich.console import Console

from tui.app import RigDashboard

from .canned import load

SNAPSHOTS = Path(__file__).parent / "snapshots"


def screen_text(app) -> str:
    """The screen as plain text (the same render Textual's SVG screenshot uses)."""
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), record=True,
                      color_system=None, legacy_windows=False, safe_box=False)
    console.print(app.screen._compositor.render_update(
        full=True, screen_stack=app._background_screens))
    return "\n".join(line.rstrip() for line in console.export_text().splitlines())


async def fed_app(pilot, app, tab: str) -> str:
    app.animation_level = "none"  # the tab underline slides; a snapshot must not catch it
    hello, snaps = load()
    app._attached(hello)
    for snap in snaps:
        app._take(snap)
    app.action_show(tab)
    await pilot.pause(0.2)
    app.refresh_views()
    await pilot.pause(0.2)
    await pilot.wait_for_animation()
    assert app.malformed == 0  # good telemetry draws whole: no drawing error hidden
    return screen_text(app)


def check(name: str, text: str) -> None:
    path = SNAPSHOTS / f"{name}.txt"
    if os.environ.get("RAILRIG_UPDATE_SNAPSHOTS") == "1" or not path.exists():
        path.write_text(text + "\n")
        if os.environ.get("RAILRIG_UPDATE_SNAPSHOTS") != "1":
            pytest.fail(f"snapshot {path.name} written; read it and commit it")
    assert text + "\n" == path.read_text(), f"{path.name} differs (see the file)"


@pytest.mark.parametrize(("size", "tab"), [
    ((80, 24), "drive"), ((80, 24), "traces"), ((80, 24), "faults"), ((80, 24), "log"),
    ((160, 48), "drive"), ((160, 48), "traces")])
async def test_layout_snapshot(size: tuple[int, int], tab: str) -> None:
    app = RigDashboard("/nonexistent/railrig.sock", retry=False)
    async with app.run_test(size=size) as pilot:
        await pilot.pause(0.3)  # the failed connect is logged first
        text = await fed_app(pilot, app, tab)
    check(f"{tab}-{size[0]}x{size[1]}", text)


async def test_80x24_shows_every_motor_and_both_status_lines() -> None:
    app = RigDashboard("/nonexistent/railrig.sock", retry=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause(0.3)
        lines = (await fed_app(pilot, app, "drive")).splitlines()
    assert lines[0].startswith(" RUNNING  lockstep t 20.00 s  margin 58 %")
    assert lines[1].startswith(" link: telegrams")
    for name in ("INV-A1.m1", "INV-A1.m2", "INV-A2.m1", "INV-A2.m2", "INV-B1.m1",
                 "INV-B1.m2", "INV-B2.m1", "INV-B2.m2", "DC-A", "DC-B"):
        assert any(name in line for line in lines), name
    assert any("adhesion low" in line for line in lines)  # the stored run's patch
    assert all(len(line) <= 80 for line in lines)
