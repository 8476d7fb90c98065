"""One module per ``railrig`` subcommand: its arguments, and what it runs and prints.

The top layer: may import any room; nothing imports it but ``emulator.cli``. Each module
has ``HELP``, ``add_arguments(parser)`` and ``run(args) -> exit code``.
"""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

DEFAULT_TRAINSET = "trainsets/tern-25kv"


def stderr_console() -> Console:
    """The console a command says its errors and progress on: standard error, lines
    never broken inside (a path or a key in an error stays whole when a log or a test
    reads it, whatever the width)."""
    return Console(stderr=True, soft_wrap=True)


def pairs_table(title: str, first: str = "figure") -> Table:
    """A two-column table of names and right-aligned values."""
    table = Table(title=title)
    table.add_column(first)
    table.add_column("value", justify="right")
    return table
