"""``railrig dash``: the Textual dashboard of a running rig.

A client of the rig's monitor endpoint and nothing else: it attaches to a rig started by
``railrig serve`` or ``railrig demo``, shows it live, sends operator commands, and can
detach and attach again while the rig runs on. Keys are listed in the footer.
"""

from __future__ import annotations

import asyncio
from typing import Any, ClassVar

from rich.text import Text
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.css.query import NoMatches
from textual.widgets import Footer, RichLog, Static, TabbedContent, TabPane

from tui.client import RigClient, RigConnectionError
from tui.fault_panel import FaultPanel
from tui.history import History
from tui.panels import GroupTable, MotorTable, TracePanel, TrainPanel, paint, status_text

REFRESH_S = 0.1  # views redraw at 10 Hz; telemetry arrives at ~30 Hz into the history
RETRY_S = 1.0
#: what a message of the wrong shape raises while it is read or drawn: the dashboard
#: says so in its log and keeps the last good snapshot, never a traceback
MALFORMED = (KeyError, TypeError, ValueError, AttributeError, IndexError)
DEMAND_STEP = 0.1


class RigDashboard(App):
    """Status line on top, four views in tabs, the last event and the keys below."""

    TITLE = "railrig dashboard"
    ENABLE_COMMAND_PALETTE = False
    CSS = """
    #status { height: 2; background: $panel; }
    #last-event { height: 1; background: $panel; }
    TabbedContent { height: 1fr; }
    TabPane { padding: 0; }
    #train { height: auto; }
    GroupTable { height: auto; }
    MotorTable { height: auto; }
    TracePanel { height: 1fr; }
    #drive-trace { display: none; }
    .tall #drive-trace { display: block; }
    #fault-top { height: 1fr; }
    #catalogue { width: 34; }
    #fault-form { width: 1fr; padding: 0 1; }
    #fault-params { height: auto; }
    #fault-params Input { width: 24; }
    #active-faults { height: 6; }
    /* reverse video marks the highlighted entry on a terminal without colour too */
    OptionList > .option-list--option-highlighted { text-style: bold reverse; }
    """
    BINDINGS: ClassVar = [
        Binding("d", "show('drive')", "drive"),
        Binding("t", "show('traces')", "traces"),
        Binding("l", "show('log')", "log"),
        Binding("f", "show('faults')", "faults"),
        Binding("space", "pause", "pause"),
        Binding("s", "step", "step"),
        Binding("plus,equals_sign", "demand(1)", "dem+"),
        Binding("minus", "demand(-1)", "dem-"),
        Binding("0", "coast", "coast", show=False),
        Binding("h", "hand_back", "to program", show=False),
        Binding("m", "mark", "mark"),
        Binding("r", "record", "rec"),
        Binding("i", "inject", "inject", show=False),
        Binding("x", "clear_fault", "clear", show=False),
        Binding("n", "trace(1)", "next trace", show=False),
        Binding("p", "trace(-1)", "prev trace", show=False),
        Binding("1", "slot(0)", show=False),
        Binding("2", "slot(1)", show=False),
        Binding("3", "slot(2)", show=False),
        Binding("q", "quit", "quit"),
    ]

    def __init__(self, address: str | None = None, *, retry: bool = True,
                 token: str | None = None) -> None:
        super().__init__()
        self.client = RigClient(address, token)
        self.retry = retry
        self.hello: dict[str, Any] = {}
        self.snap: dict[str, Any] | None = None
        self.attached = False
        self.history = History()
        self.log_lines: list[str] = []  # what the event log shows, as plain text
        self.good_snap: dict[str, Any] | None = None  # the last snapshot drawn whole
        self.malformed = 0  # messages of the wrong shape, dropped

    def compose(self) -> ComposeResult:
        yield Static(id="status")
        with TabbedContent(initial="drive"):
            with TabPane("Drive (d)", id="drive"), Vertical():
                yield TrainPanel(id="train")
                yield GroupTable(id="groups")
                yield MotorTable(id="motors")
                # two traces under the motors, on terminals of 40 rows or more
                yield TracePanel(slots=2, selectable=False, id="drive-trace")
            with TabPane("Traces (t)", id="traces"):
                yield TracePanel(id="trace-panel")
            with TabPane("Log (l)", id="log"):
                yield RichLog(id="event-log", wrap=True, max_lines=2000)
            with TabPane("Faults (f)", id="faults"):
                yield FaultPanel(id="fault-panel")
        yield Static("no events yet", id="last-event")
        yield Footer()

    def on_resize(self, event) -> None:
        self.set_class(event.size.height >= 40, "tall")  # room for traces under the motors

    def on_mount(self) -> None:
        self.set_class(self.size.height >= 40, "tall")
        self.run_worker(self._follow(), exclusive=True, name="monitor")
        self.set_interval(REFRESH_S, self.refresh_views)
        self.refresh_views()

    # --- the monitor stream -----------------------------------------------------------
    async def _follow(self) -> None:
        """Attach, read until the rig goes away, attach again (unless retry is off)."""
        while True:
            try:
                hello = await self.client.connect()
            except RigConnectionError as exc:
                self._detached(str(exc))
                if not self.retry:
                    return
                await asyncio.sleep(RETRY_S)
                continue
            try:
                self._attached(hello)
            except MALFORMED as exc:
                self.client.close()
                self._detached(f"the rig's hello is malformed ({exc!r})")
                self._log("dashboard", f"not attached: the hello is malformed ({exc!r})")
                if not self.retry:
                    return
                await asyncio.sleep(RETRY_S)
                continue
            try:
                async for message in self.client.messages():
                    try:
                        self._take(message)
                    except MALFORMED as exc:
                        self._malformed(message, exc)
            except RigConnectionError as exc:
                self._log("dashboard", str(exc))
            self.client.close()
            self._detached("the rig's monitor closed")
            if not self.retry:
                return
            await asyncio.sleep(RETRY_S)

    def _attached(self, hello: dict[str, Any]) -> None:
        self.hello = hello
        self.attached = True
        self.snap = None
        self.history = History(hello["motors"])
        self.sub_title = f"{hello['trainset']} ({hello['mode']}) at {self.client.address}"
        self.query_one(FaultPanel).load(hello)
        self._log("dashboard", f"attached to {self.client.address}")
        for e in hello.get("events", []):
            self._event(e)

    def _detached(self, why: str) -> None:
        if self.attached:
            self._log("dashboard", f"detached: {why}")
        self.attached = False

    def _take(self, message: dict[str, Any]) -> None:
        kind = message["kind"]
        if kind == "telemetry":
            self.history.add(message)  # raises on a malformed one before it is kept
            self.snap = message
        elif kind == "event":
            self._event(message)
        elif kind == "reply":
            if not message.get("ok"):
                self.notify(message.get("text", "refused"), severity="error")
            self._log("reply", message.get("text", ""))

    def _malformed(self, message: Any, exc: Exception) -> None:
        """Drop a message of the wrong shape; say so in the log (the first of a run)."""
        self.malformed += 1
        if self.malformed == 1 or self.malformed % 100 == 0:
            kind = message.get("kind") if isinstance(message, dict) else type(message).__name__
            self._log("dashboard", f"malformed {kind} from the rig dropped ({exc!r}); "
                      f"{self.malformed} so far")

    def _event(self, e: dict[str, Any]) -> None:
        self._log(e.get("type", "event"), e.get("text", ""), e.get("t_s"))

    def _log(self, kind: str, text: str, t_s: float | None = None) -> None:
        when = f"{t_s:9.3f} s" if t_s is not None else "          -"
        line = Text(f"{when}  {kind:<10} {text}")
        self.log_lines.append(line.plain)
        del self.log_lines[:-2000]
        self.query_one("#event-log", RichLog).write(line)
        paint(self.query_one("#last-event", Static), Text(f"last: {line.plain}"))

    # --- drawing ----------------------------------------------------------------------
    def refresh_views(self) -> None:
        """Redraw every view from the latest snapshot (10 Hz); a snapshot that cannot be
        drawn is dropped for the last good one."""
        try:
            self._redraw()
            self.good_snap = self.snap
        except NoMatches:  # a tick between the screen's teardown and the timer's end
            return
        except MALFORMED as exc:
            self._malformed(self.snap, exc)
            self.snap = self.good_snap

    def _redraw(self) -> None:
        paint(self.query_one("#status", Static), status_text(self.hello, self.snap,
                                                             self.attached))
        snap = self.snap
        if snap is None:
            return
        tabs = self.query_one(TabbedContent).active
        if tabs == "drive":
            self.query_one(TrainPanel).show(self.hello, snap)
            self.query_one(GroupTable).show(snap)
            self.query_one(MotorTable).show(self.hello, snap)
            if self.has_class("tall"):
                self.query_one("#drive-trace", TracePanel).show(self.history)
        elif tabs == "traces":
            self.query_one("#trace-panel", TracePanel).show(self.history)
        self.query_one(FaultPanel).show(snap.get("faults", []))

    # --- commands ---------------------------------------------------------------------
    def _send(self, op: str, **args: Any) -> None:
        try:
            self.client.send(op, **args)
        except RigConnectionError as exc:
            self.notify(str(exc), severity="error")

    def action_show(self, tab: str) -> None:
        # drop the focus first: a focused widget left in a hidden pane would be moved to
        # its pane's next widget, and the tabs follow the focus back to that pane
        self.set_focus(None)
        self.query_one(TabbedContent).active = tab
        if tab == "faults":
            self.query_one("#catalogue").focus()

    def action_pause(self) -> None:
        paused = bool(self.snap and self.snap.get("paused"))
        self._send("resume" if paused else "pause")

    def action_step(self) -> None:
        self._send("step", frames=1)

    def action_demand(self, direction: int) -> None:
        self._send("demand", change=direction * DEMAND_STEP)

    def action_coast(self) -> None:
        self._send("demand", effort=0.0)

    def action_hand_back(self) -> None:
        self._send("demand", release=True)

    def action_mark(self) -> None:
        t = self.snap["t_s"] if self.snap else 0.0
        self._send("mark", text=f"operator mark at {t:.2f} s")

    def action_record(self) -> None:
        if self.snap and self.snap.get("recording"):
            self._send("record", stop=True)
        else:
            self._send("record")

    def action_inject(self) -> None:
        self.action_show("faults")
        self.query_one(FaultPanel).inject()

    def action_clear_fault(self) -> None:
        self.query_one(FaultPanel).clear_highlighted()

    def action_trace(self, step: int) -> None:
        self.query_one("#trace-panel", TracePanel).cycle(self.history, step)

    def action_slot(self, slot: int) -> None:
        self.query_one("#trace-panel", TracePanel).selected = slot

    def on_fault_panel_inject(self, message: FaultPanel.Inject) -> None:
        self._send("inject", fault=message.fault, target=message.target,
                   params=message.params)

    def on_fault_panel_clear(self, message: FaultPanel.Clear) -> None:
        self._send("clear", fault=message.name)

    def on_unmount(self) -> None:
        self.client.close()


def run_dashboard(address: str | None = None, token: str | None = None) -> int:
    """Run the dashboard in this terminal until the operator quits."""
    RigDashboard(address, token=token).run()
    return 0
