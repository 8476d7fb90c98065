"""``railrig dash``: the terminal dashboard, attached to a running rig's monitor."""

from __future__ import annotations

import argparse

HELP = "the terminal dashboard of a running rig"


def add_arguments(dash: argparse.ArgumentParser) -> None:
    """The options of ``railrig dash``."""
    dash.add_argument("--rig", default=None, metavar="ADDRESS",
                      help="the rig's monitor: a Unix socket path or 127.0.0.1:PORT "
                      "(default: where railrig serve listens by default)")
    dash.add_argument("--token", default=None,
                      help="the token of a TCP monitor (default: read from the file the rig "
                      "keeps for this user beside its runtime files)")


def run(args: argparse.Namespace) -> int:
    """Run the dashboard until the user quits."""
    from tui.app import run_dashboard

    return run_dashboard(args.rig, args.token)
