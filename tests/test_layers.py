"""The rooms of emulator/ and what each may import (the map in DEVELOPERS.md).

Every ``import`` and ``from ... import`` of every module is read from its syntax tree,
including imports inside functions: a lazy import is still a dependency. The rule table
below is the architecture; a change to it is a change of the map and belongs in the
contributor guide too. The checker itself is tried on made-up modules, so a rule that
could never fire would show.
"""

from __future__ import annotations

import ast
from collections import defaultdict
from pathlib import Path

import pytest

EMULATOR = Path(__file__).resolve().parents[1] / "emulator"

#: room -> the other rooms it may import ("tui" is the dashboard package)
MAY_IMPORT: dict[str, set[str]] = {
    "plant": set(),  # numpy and numba only
    "link": set(),  # telegrams and bytes, never physics
    "recording": set(),
    "protocol": {"plant"},  # the trainset's parameter types, to lay out the signal map
    "faults": {"plant"},  # the state layout, to name what a fault touches
    "profiles": {"plant", "rig"},  # builds the plant's and the sensors' parameters
    "controller": {"link", "protocol", "profiles"},  # speaks only the wire protocol
    "boardkit": {"plant", "protocol"},  # the map and the trainset's constants, as C
    "rig": {"plant", "link", "protocol", "recording"},
    # the monitor takes its default address from the dashboard's client (one definition)
    "monitor": {"plant", "faults", "protocol", "tui"},
    "scenario": {"plant", "rig", "link", "protocol", "faults", "monitor", "profiles",
                 "recording", "controller"},
    # many runs: the scenario room runs each; faults names what a sweep may set; link
    # the loopback ports of a run's own controller process
    "campaign": {"scenario", "profiles", "recording", "faults", "link"},
    "bench": {"plant", "rig", "link", "protocol", "monitor", "profiles", "controller",
              "scenario", "recording"},
    "commands": {"plant", "rig", "link", "protocol", "faults", "monitor", "profiles",
                 "recording", "controller", "scenario", "campaign", "bench", "tui",
                 "boardkit"},
}
#: modules that stay loose at the top of emulator/ (the package face and the entry point)
LOOSE = {"__init__", "cli", "kernel_cache"}


def imported_modules(source: str) -> set[str]:
    """Absolute module names a source imports (anywhere in it)."""
    names = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
    return names


def room_of(module: str) -> str | None:
    """The room a dotted module name belongs to (None outside emulator and tui)."""
    parts = module.split(".")
    if parts[0] == "tui":
        return "tui"
    if parts[0] != "emulator" or len(parts) < 2:
        return None
    return parts[1]


def violations(room: str, source: str) -> list[str]:
    """The imports of a module of ``room`` that the table forbids."""
    bad = []
    for module in sorted(imported_modules(source)):
        other = room_of(module)
        if other is None or other == room or other in LOOSE or other.startswith("__"):
            continue
        if other not in MAY_IMPORT.get(room, set()):
            bad.append(f"{room} imports {module}")
    return bad


def rooms() -> dict[str, list[Path]]:
    found = defaultdict(list)
    for path in EMULATOR.rglob("*.py"):
        rel = path.relative_to(EMULATOR).parts
        if len(rel) > 1:
            found[rel[0]].append(path)
    return found


def test_every_room_is_in_the_table() -> None:
    assert set(rooms()) == set(MAY_IMPORT)


@pytest.mark.parametrize("room", sorted(MAY_IMPORT))
def test_room_imports_only_what_the_map_allows(room: str) -> None:
    bad = [f"{p.relative_to(EMULATOR)}: {v}" for p in sorted(rooms()[room])
           for v in violations(room, p.read_text(encoding="utf-8"))]
    assert bad == []


def test_at_most_eight_modules_stay_loose() -> None:
    loose = {p.stem for p in EMULATOR.glob("*.py")}
    assert loose == LOOSE
    assert len(loose) <= 8


def import_circles(sources: dict[str, tuple[str, bool]]) -> list[str]:
    """Import circles among modules given as {dotted name: (source, is a package face)}."""
    graph = {}
    for name, (source, is_package) in sources.items():
        package = name if is_package else name.rpartition(".")[0]
        targets = {m for m in imported_modules(source) if m in sources}
        for node in ast.walk(ast.parse(source)):  # relative imports, resolved
            if isinstance(node, ast.ImportFrom) and node.level:
                base = package.rsplit(".", node.level - 1)[0] if node.level > 1 else package
                mod = f"{base}.{node.module}" if node.module else base
                targets.update(m for m in (mod, *(f"{mod}.{a.name}" for a in node.names))
                               if m in sources)
        # a package's face re-exporting its own modules is not a circle of theirs
        graph[name] = {t for t in targets if t != name and not name.startswith(t + ".")}
    circles: list[str] = []
    state: dict[str, int] = {}

    def visit(node: str, path: list[str]) -> None:
        state[node] = 1
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                circles.append(" -> ".join([*path[path.index(nxt):], nxt]))
            elif nxt not in state:
                visit(nxt, [*path, nxt])
        state[node] = 2

    for name in sorted(graph):
        if name not in state:
            visit(name, [name])
    return circles


def test_no_import_circles_between_modules() -> None:
    """No module imports, directly or through others, a module that imports it back."""
    sources = {}
    for path in EMULATOR.rglob("*.py"):
        rel = path.relative_to(EMULATOR.parent).with_suffix("")
        name = ".".join(rel.parts[:-1] if rel.name == "__init__" else rel.parts)
        sources[name] = (path.read_text(encoding="utf-8"), path.name == "__init__.py")
    assert import_circles(sources) == []


def test_the_circle_finder_sees_the_circles_this_layout_broke() -> None:
    # the registry imported its transports lazily, and they imported the registry
    registry = ("def open_link(url):\n    from . import udp\n", False)
    udp = ("from .registry import register\n", False)
    assert import_circles({"emulator.link.registry": registry, "emulator.link.udp": udp})
    # the catalogue re-exported FaultSet from the module that imports the catalogue
    faults = ("from emulator.fault_points import FaultSet\n", False)
    points = ("from emulator.faults import make_fault\n", False)
    assert import_circles({"emulator.faults": faults, "emulator.fault_points": points})


# The checker on made-up modules: each rule named in the issue fires.
@pytest.mark.parametrize(("room", "source"), [
    ("plant", "import asyncio\nfrom emulator.rig.clock import MonotonicClock\n"),
    ("plant", "def f():\n    from emulator.profiles.reader import load_trainset\n"),
    ("link", "from emulator.plant import layout\n"),
    ("controller", "from emulator.plant.stepper import Plant\n"),
    ("controller", "import emulator.rig.frame_loop\n"),
])
def test_the_checker_sees_a_forbidden_import(room: str, source: str) -> None:
    assert violations(room, source)


def test_the_checker_lets_allowed_imports_pass() -> None:
    assert violations("controller", "from emulator.link import open_link\n"
                      "from emulator.protocol.signal_map import build_signal_map\n") == []
