"""``railrig board-kit``: write the C99 kit for the board's side of the link."""

from __future__ import annotations

import argparse

from rich.console import Console
from rich.markup import escape

from emulator.commands import DEFAULT_TRAINSET

HELP = "write a C99 kit (map header, codec, example controller, Makefile) for a board"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """The options of ``railrig board-kit``."""
    parser.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    parser.add_argument("--out", required=True, help="folder to write the kit into")


def run(args: argparse.Namespace) -> int:
    """Write the kit and say what is in it."""
    from emulator.boardkit.generate import KitError, write_kit
    from emulator.profiles.reader import load_trainset
    from emulator.protocol.signal_map import build_signal_map

    params = load_trainset(args.profile)
    out = Console()
    try:
        files = write_kit(params, args.out)
    except (KitError, OSError) as exc:
        out.print(f"[red]board-kit:[/red] {escape(str(exc))}")
        return 2
    sm = build_signal_map(params)
    out.print(f"Board kit for {params.name}: protocol {sm.version}, map digest "
              f"0x{sm.digest():08X}, {len(sm.measurements)} measurements, "
              f"{len(sm.commands)} commands.")
    for path in files:
        out.print(f"  {path}")
    out.print(f"Build the example with `make -C {args.out}`; its README.txt says how to run "
              "it against `railrig serve`.")
    return 0
