"""``railrig controller``: the reference controller on a link, as a board would run."""

from __future__ import annotations

import argparse

from rich.markup import escape

from emulator.commands import DEFAULT_TRAINSET, stderr_console

console = stderr_console()
HELP = "run the reference controller on a link"


def add_arguments(ctl: argparse.ArgumentParser) -> None:
    """The options of ``railrig controller``."""
    ctl.add_argument("--profile", default=DEFAULT_TRAINSET, help="trainset profile")
    ctl.add_argument("--link", required=True, help="udp://HOST:PORT?peer=HOST:PORT or "
                     "serial:///dev/ttyX?baud=N[&fec=P]")
    ctl.add_argument("--allow-remote", action="store_true", help="allow non-loopback UDP")
    ctl.add_argument("--idle-timeout", type=float, default=30.0,
                     help="stop after this many seconds without a telegram")


def run(args: argparse.Namespace) -> int:
    """Serve until SIGINT/SIGTERM or the idle timeout; 2 on a link error."""
    import asyncio
    import signal

    from emulator.controller.process import serve_controller
    from emulator.link import LinkError
    from emulator.profiles.reader import resolve_profile

    async def serve() -> None:
        stop = asyncio.Event()
        loop = asyncio.get_running_loop()
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.add_signal_handler(sig, stop.set)
        await serve_controller(resolve_profile(args.profile), args.link,
                               allow_remote=args.allow_remote,
                               idle_timeout_s=args.idle_timeout, stop=stop)

    try:
        asyncio.run(serve())
    except LinkError as exc:
        console.print(f"[red]link error:[/red] {escape(str(exc))}")
        return 2
    return 0
