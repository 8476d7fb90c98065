"""A monitor client: connect, read the rig's messages, send operator commands.

The protocol is the one ``emulator/monitor/endpoint.py`` documents: msgpack maps one
after another on a Unix socket or a loopback TCP connection. This module does not import
the emulator, so a dashboard attaches to a rig on a bench PC over SSH without the plant.
It is also the one place that says where a monitor lives (its default socket, the folder
of its runtime files, the token file of a TCP endpoint): the rig imports these.
"""

from __future__ import annotations

import asyncio
import os
import stat
from collections.abc import AsyncIterator
from pathlib import Path
from typing import Any

import msgpack

MAX_MESSAGE = 16 * 1024 * 1024  # a hello with a large catalogue stays far below this


def runtime_dir() -> Path:
    """The folder of the rig's runtime files: $XDG_RUNTIME_DIR, else /tmp/railrig-UID."""
    return Path(os.environ.get("XDG_RUNTIME_DIR") or f"/tmp/railrig-{os.getuid()}")


def default_address() -> str:
    """Where ``railrig serve`` listens by default (the rig's monitor uses this too)."""
    return str(runtime_dir() / "railrig-monitor.sock")


def token_file(port: int) -> Path:
    """Where a rig keeps the token of its TCP monitor on ``port`` (mode 0600)."""
    return runtime_dir() / f"railrig-monitor-{port}.token"


def private_dir(path: Path) -> Path:
    """Make sure ``path`` is a folder only this user may write into (creating it 0700).

    Raises PermissionError if it belongs to someone else or others may write into it:
    anyone who can write there can replace the socket or the token with their own.
    """
    path.mkdir(mode=0o700, parents=True, exist_ok=True)
    info = path.lstat()
    if not stat.S_ISDIR(info.st_mode):
        raise PermissionError(f"{path} is not a folder (a link?); the monitor needs a "
                              "private folder")
    if info.st_uid != os.geteuid():
        raise PermissionError(f"{path} belongs to user {info.st_uid}, not to this user "
                              f"({os.geteuid()}): refusing to put the monitor there")
    if info.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
        raise PermissionError(f"{path} is writable by others (mode "
                              f"{stat.S_IMODE(info.st_mode):04o}): refusing to put the "
                              "monitor there; chmod go-w it or choose another folder")
    return path


#: what the client's reader says when the rig's monitor has closed the stream (not None:
#: a nil is a message, of the wrong shape)
GONE = object()


class RigConnectionError(ConnectionError):
    """The rig's monitor cannot be reached or went away."""


class RigClient:
    """One connection to a rig's monitor."""

    def __init__(self, address: str | None = None, token: str | None = None) -> None:
        self.address = address or default_address()
        self.token = token
        self.hello: dict[str, Any] = {}
        self._reader: asyncio.StreamReader | None = None
        self._writer: asyncio.StreamWriter | None = None
        self._unpacker = msgpack.Unpacker(max_buffer_size=MAX_MESSAGE, strict_map_key=False)
        self._next_id = 0

    async def connect(self, timeout_s: float = 5.0) -> dict[str, Any]:
        """Connect and return the rig's hello (layout, catalogue, events so far)."""
        a = self.address
        try:
            token = None
            if a.startswith("unix:") or "/" in a:
                opening = asyncio.open_unix_connection(a.removeprefix("unix:"))
            else:
                host, _, port = a.rpartition(":")
                token = self.token or token_file(int(port)).read_text().strip()
                opening = asyncio.open_connection(host.strip("[]") or "127.0.0.1", int(port))
            self._reader, self._writer = await asyncio.wait_for(opening, timeout_s)
            if token is not None:
                self._writer.write(msgpack.packb({"op": "auth", "token": token}))
            first = await asyncio.wait_for(self._next_message(), timeout_s)
        except FileNotFoundError as exc:
            raise RigConnectionError(f"no token for the rig monitor at {a} ({exc.filename}); "
                                     "give it with --token") from None
        except (OSError, ValueError, TimeoutError) as exc:
            raise RigConnectionError(f"no rig monitor at {a}: {exc}") from None
        kind = first.get("kind") if isinstance(first, dict) else None
        if kind == "error":
            raise RigConnectionError(f"{a} refused: {first.get('text')}")
        if kind != "hello":
            raise RigConnectionError(f"{a} did not greet as a rig monitor")
        self.hello = first
        return first

    async def _next_message(self) -> Any:
        """The next message, whatever its shape (the dashboard counts and drops one that
        is not a map, nil too), or GONE when the rig has gone."""
        assert self._reader is not None
        while True:
            for message in self._unpacker:
                return message
            data = await self._reader.read(65536)
            if not data:
                return GONE
            self._unpacker.feed(data)

    async def messages(self) -> AsyncIterator[Any]:
        """Telemetry, events and replies until the rig goes away (as sent: a message of
        another shape is the caller's to refuse)."""
        while True:
            try:
                message = await self._next_message()
            except (OSError, ValueError, msgpack.UnpackException) as exc:
                raise RigConnectionError(f"monitor stream broken: {exc}") from None
            if message is GONE:
                return
            yield message

    def send(self, op: str, **args: Any) -> int:
        """Send a command without waiting; returns its id (the reply carries it)."""
        if self._writer is None or self._writer.is_closing():
            raise RigConnectionError("not connected to a rig")
        self._next_id += 1
        self._writer.write(msgpack.packb({"op": op, "id": self._next_id, **args}))
        return self._next_id

    def close(self) -> None:
        """Detach; the rig runs on."""
        if self._writer is not None:
            self._writer.close()
            self._writer = None
