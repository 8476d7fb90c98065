"""The fault panel: browse the rig's catalogue, set parameters, inject; see and clear.

The catalogue and the target names come from the rig's hello, so the panel offers what
this rig and trainset can do; the rig checks every value again and replies.
"""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.widgets import Button, Input, Label, OptionList, Select, Static
from textual.widgets.option_list import Option


class FaultPanel(Vertical):
    """Catalogue on the left, the chosen fault's form on the right, active faults below."""

    class Inject(Message):
        """The operator asks for a fault."""

        def __init__(self, fault: str, target: str, params: dict[str, float]) -> None:
            super().__init__()
            self.fault, self.target, self.params = fault, target, params

    class Clear(Message):
        """The operator ends a fault (its name@target)."""

        def __init__(self, name: str) -> None:
            super().__init__()
            self.name = name

    def __init__(self, **kw) -> None:
        super().__init__(**kw)
        self.catalogue: list[dict[str, Any]] = []
        self.targets: dict[str, list[str]] = {}
        self.inputs: list[tuple[dict[str, Any], Input]] = []
        self.current: dict[str, Any] | None = None
        self._listing: list[str] = []  # the names of the run's faults, in list order
        self._lines: list[str] = []  # what the list shows

    def compose(self) -> ComposeResult:
        with Horizontal(id="fault-top"):
            yield OptionList(id="catalogue")
            with VerticalScroll(id="fault-form"):
                yield Static("choose a fault on the left", id="fault-description")
                yield Label("target")
                yield Select([], id="fault-target", allow_blank=True, prompt="target")
                yield Vertical(id="fault-params")
                yield Button("Inject (i)", id="inject", variant="warning")
        yield Label("faults of this run (x clears the highlighted one)")
        yield OptionList(id="active-faults")

    def load(self, hello: dict[str, Any]) -> None:
        """Fill the catalogue from the rig's hello; only faults this trainset can take."""
        self.targets = hello.get("targets", {})
        self.catalogue = [k for k in hello.get("catalogue", []) if self.targets.get(k["target"])]
        menu = self.query_one("#catalogue", OptionList)
        menu.clear_options()
        menu.add_options([Option(f"{k['name']} [{k['point']}]", id=k["name"])
                          for k in self.catalogue])

    def on_option_list_option_highlighted(self, event: OptionList.OptionHighlighted) -> None:
        if event.option_list.id == "catalogue" and event.option.id is not None:
            self.choose(event.option.id)

    def choose(self, name: str) -> None:
        """Show the form of one catalogue entry."""
        kind = next((k for k in self.catalogue if k["name"] == name), None)
        if kind is None or kind is self.current:
            return
        self.current = kind
        self.query_one("#fault-description", Static).update(
            f"{kind['name']} — at the {kind['point']} point; target: {kind['target']}\n"
            f"{kind['description']}")
        select = self.query_one("#fault-target", Select)
        names = self.targets.get(kind["target"], [])
        select.set_options([(n, n) for n in names])
        if names:
            select.value = names[0]
        box = self.query_one("#fault-params", Vertical)
        box.remove_children()
        self.inputs = []
        widgets = []
        for p in kind["params"]:
            label = Label(f"{p['name']} ({p['unit']}, {p['lo']:g}..{p['hi']:g})")
            field = Input(value=f"{p['default']:g}", placeholder=f"{p['default']:g}")
            self.inputs.append((p, field))
            widgets += [label, field]
        if widgets:
            box.mount(*widgets)

    def request(self) -> FaultPanel.Inject | str:
        """The injection the form describes, or what is wrong with it."""
        if self.current is None:
            return "choose a fault first"
        target = self.query_one("#fault-target", Select).value
        if not isinstance(target, str):
            return "choose a target"
        params = {}
        for p, field in self.inputs:
            try:
                value = float(field.value)
            except ValueError:
                return f"{p['name']}: {field.value!r} is not a number"
            if not p["lo"] <= value <= p["hi"]:
                return f"{p['name']} must be within {p['lo']:g}..{p['hi']:g} {p['unit']}"
            params[p["name"]] = value
        return FaultPanel.Inject(self.current["name"], target, params)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        """Enter in a parameter field injects (there, ``i`` types an i)."""
        event.stop()
        self.inject()
        self.query_one("#catalogue", OptionList).focus()  # letters are keys again

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "inject":
            self.inject()

    def inject(self) -> None:
        """Post the form's injection, or say what is wrong."""
        what = self.request()
        if isinstance(what, str):
            self.app.notify(what, severity="error")
        else:
            self.post_message(what)

    def clear_highlighted(self) -> None:
        """Post a clear for the highlighted active fault."""
        menu = self.query_one("#active-faults", OptionList)
        i = menu.highlighted
        if i is None or i >= len(self._listing):
            self.app.notify("highlight an active fault in the list first", severity="error")
            return
        self.post_message(FaultPanel.Clear(self._listing[i]))

    def show(self, faults: list[dict[str, Any]]) -> None:
        """The faults of the run with their states; rebuilt only when they change."""
        lines = [f"{f['state']:>7}  {f['name']}  "
                 + " ".join(f"{k}={v:g}" for k, v in f["params"].items()) for f in faults]
        lines = lines or ["none"]
        if lines == self._lines:
            return
        self._lines = lines
        names = [f["name"] for f in faults]
        menu = self.query_one("#active-faults", OptionList)
        highlighted = menu.highlighted
        self._listing = names
        menu.clear_options()
        menu.add_options(lines)
        if names:
            menu.highlighted = highlighted if highlighted is not None and \
                highlighted < len(names) else 0
