"""``railrig protocol``: the signal map of a trainset, for the board's side of the link."""

from __future__ import annotations

import argparse
import json

from rich.console import Console
from rich.table import Table

from emulator.commands import DEFAULT_TRAINSET

HELP = "print the signal map of a trainset"


def add_arguments(protocol: argparse.ArgumentParser) -> None:
    """The options of ``railrig protocol``."""
    protocol.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    protocol.add_argument("--json", action="store_true", help="machine-readable")
    protocol.add_argument("--readme", action="store_true",
                          help="the header, flag and pacing rules as the README's Markdown "
                          "(the same for every trainset)")


def run(args: argparse.Namespace) -> int:
    """Print the map as tables (or JSON)."""
    from emulator.profiles.reader import load_trainset
    from emulator.protocol.signal_map import HEADER, build_signal_map

    if args.readme:
        from emulator.protocol.reference_text import protocol_rules_markdown

        print(protocol_rules_markdown(), end="")
        return 0
    params = load_trainset(args.profile)
    sm = build_signal_map(params)
    if args.json:
        print(json.dumps(sm.as_dict(), indent=1))
        return 0
    out = Console()
    out.print(f"[bold]Signal map[/bold] of {params.name}, protocol version {sm.version}, "
              f"map digest 0x{sm.digest():08X}. Each telegram is a msgpack array; physical "
              "value = wire value x scale.")
    for direction, signals in (("rig -> controller (measurements)", sm.measurements),
                               ("controller -> rig (commands)", sm.commands)):
        table = Table(title=direction)
        for col in ("index", "name", "unit", "scale", "range", "kind"):
            # a long name wraps (folds) in a narrow terminal, it is never cut
            table.add_column(col, justify="right" if col in ("index", "scale") else "left",
                             overflow="fold", no_wrap=False, min_width=5 if col == "name" else None)
        for i, name in enumerate(HEADER):
            table.add_row(str(i), name, "", "", "", "header")
        for i, sig in enumerate(signals, start=len(HEADER)):
            table.add_row(str(i), sig.name, sig.unit, f"{sig.scale:g}",
                          f"{sig.lo:g} .. {sig.hi:g}", sig.kind)
        out.print(table)
    return 0
