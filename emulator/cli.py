"""The ``railrig`` command: parses the command line and hands it to a subcommand.

Each subcommand is a module of ``emulator.commands`` with ``HELP``,
``add_arguments(parser)`` and ``run(args)``; its heavy imports wait until it runs.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from rich.markup import escape

from emulator.commands import stderr_console
from emulator.profiles.table import ProfileError

SUBCOMMANDS = ("demo", "dash", "controller", "serve", "protocol", "export", "run", "replay",
               "campaign", "characteristic", "adhesion", "bench", "board-kit")
console = stderr_console()


def build_parser() -> argparse.ArgumentParser:
    """The command-line grammar."""
    parser = argparse.ArgumentParser(
        prog="railrig", description="Traction-drive plant emulator for testing control "
        "firmware without a train.")
    sub = parser.add_subparsers(dest="command", required=True)
    for name in SUBCOMMANDS:
        command = importlib.import_module(f"emulator.commands.{name.replace('-', '_')}")
        parser_of = sub.add_parser(name, help=command.HELP)
        command.add_arguments(parser_of)
        parser_of.set_defaults(func=command.run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``railrig`` console script."""
    args = build_parser().parse_args(argv)
    try:
        return args.func(args)
    except ProfileError as exc:
        console.print(f"[red]profile error:[/red] {escape(str(exc))}")
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
