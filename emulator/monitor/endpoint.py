"""The rig's monitor endpoint: telemetry out, operator commands in.

A local socket only (a Unix socket, or TCP on loopback), since it can inject faults.
Messages are msgpack maps, one after another on the stream (msgpack delimits them; no
extra framing). The rig sends ``hello`` (layout, fault catalogue, the events so far) on
connect, then ``telemetry`` about 30 times a second, ``event`` as things happen and a
``reply`` to each command. A client sends ``{"op": ..., "id": n, ...}``:

========  ==============================================================================
op        arguments
========  ==============================================================================
inject    fault (catalogue name), target, params (map), until_s (optional)
clear     fault (the name@target the listing shows)
pause     -
resume    -
step      frames (default 1): run that many frames, then pause again
demand    effort (-1..1, negative brakes) or change (added to the demand now): the
          operator takes the driver's demand; release = true hands it back
record    name (optional, a bare file name): start recording every frame into the rig's
          recordings folder (``--record-dir``); stop = true ends it
mark      text: a mark in the recording and the event log
auth      token: the first message on a TCP connection (see below)
========  ==============================================================================

Every operand is checked for type, finiteness and range (``operands.py``); a bad one, an
unknown op, or a handler that fails anyway gets ``{"kind": "reply", "ok": false}`` with
the reason, and the frame loop never sees the exception.

Who can reach it: the Unix socket is created with mode 0600 (under a umask, before it
listens) in a folder that must belong to the rig's user and be writable by nobody else,
so only that user connects. A TCP endpoint (loopback only) is open to every local user,
so it asks for a token first: the rig writes a random one, mode 0600, beside its runtime
files (``tui.client.token_file``), where ``railrig dash`` of the same user finds it; a
client that does not send ``{"op": "auth", "token": ...}`` as its first message gets one
error message and is closed.

It never slows the frame loop: the rig calls ``service()`` once per frame, which applies
queued commands and, every Nth frame (N frames of plant time = 1 / RATE_HZ; no closer
than half that in wall time when the rig runs faster than real time) and only with
clients attached, schedules one snapshot, built when the loop next waits (before the
next deadline in real time) and written to every client without waiting. A client
whose unsent backlog passes ``MAX_BACKLOG`` (a slow or vanished reader) is dropped; so
is one that sends bytes msgpack cannot decode.
"""

from __future__ import annotations

import asyncio
import contextlib
import hmac
import ipaddress
import logging
import os
import secrets
import socket
import time
from collections import deque
from pathlib import Path
from typing import Any

import msgpack

from emulator.monitor.operations import OperatorCommands
from emulator.monitor.telemetry import TelemetryBuilder

# one place for where a monitor lives; the client imports no emulator code
from tui.client import default_address, private_dir, token_file

log = logging.getLogger(__name__)

RATE_HZ = 30.0
MAX_BACKLOG = 256 * 1024  # bytes queued for one client before it counts as too slow
MAX_MESSAGE = 64 * 1024  # a command larger than this is not a command
MAX_QUEUED = 256  # commands waiting for the next frame, from all clients
HISTORY = 200  # events kept for clients that attach later
AUTH_TIMEOUT_S = 5.0  # a TCP client sends its token within this time or is closed


def _plain(obj: Any) -> Any:
    """numpy scalars and arrays as the Python values msgpack knows."""
    if hasattr(obj, "tolist"):
        return obj.tolist()
    raise TypeError(f"cannot send a {type(obj).__name__} to a monitor client")


def pack(message: dict[str, Any]) -> bytes:
    """One monitor message on the wire."""
    return msgpack.packb(message, default=_plain)


class MonitorError(ValueError):
    """A monitor address that cannot be used."""


def parse_address(address: str) -> tuple[str, Any]:
    """("unix", path) or ("tcp", (host, port)); TCP only on a loopback address."""
    if address.startswith("unix:"):
        return "unix", address[5:]
    if "/" in address or address.endswith(".sock"):
        return "unix", address
    host, sep, port = address.rpartition(":")
    if not sep or not port.isdigit():
        raise MonitorError(f"monitor address {address!r}: give a socket path or "
                           "127.0.0.1:PORT")
    host = host.strip("[]") or "127.0.0.1"
    try:
        loopback = host == "localhost" or ipaddress.ip_address(host).is_loopback
    except ValueError:
        loopback = False
    if not loopback:
        raise MonitorError(f"monitor address {address!r}: the monitor can inject faults, "
                           "so it listens on loopback only")
    return "tcp", (host, int(port))


class _Client:
    def __init__(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        self.reader = reader
        self.writer = writer
        self.name = f"client {id(self) & 0xFFFF:04x}"

    def send(self, packed: bytes) -> bool:
        """Queue bytes without waiting; False if the client is gone or too slow."""
        transport = self.writer.transport
        if transport.is_closing() or transport.get_write_buffer_size() > MAX_BACKLOG:
            return False
        transport.write(packed)
        return True

    def close(self, flush: bool = False) -> None:
        """Drop the connection; ``flush`` first sends what is queued (a clean end)."""
        if flush:
            self.writer.transport.close()
        else:
            self.writer.transport.abort()


class Monitor(OperatorCommands):
    """Publishes a rig's state and applies operator commands between frames."""

    def __init__(self, rig, address: str | None = None, *, rate_hz: float = RATE_HZ,
                 record_dir: str | Path = "recordings") -> None:
        self.rig = rig
        self.address = address or default_address()
        self.kind, self.where = parse_address(self.address)
        self.record_dir = Path(record_dir)
        self.token = secrets.token_hex(16) if self.kind == "tcp" else None
        self.token_path: Path | None = None
        self._socket_inode: int | None = None  # of the socket file this monitor bound
        self.every = max(1, round(1e6 / (rate_hz * rig.period_us)))
        #: at most 2 x rate_hz snapshots a second of wall time: a rig faster than real
        #: time (lockstep) reaches every Nth frame many times a second, and no client
        #: draws that fast (in real time every Nth frame is 1 / rate_hz apart: no change)
        self.min_gap_s = 0.5 / rate_hz
        self._last_publish_s = -1e9
        self.builder = TelemetryBuilder(rig)
        self.clients: list[_Client] = []
        self.commands: deque[tuple[_Client, dict]] = deque()
        self.events: deque[dict] = deque(maxlen=HISTORY)
        self.counts = {"clients_dropped": 0, "bad_messages": 0, "commands": 0,
                       "snapshots": 0, "refused": 0, "handler_errors": 0}
        self.paused = False
        self.steps = 0
        self.resumed = asyncio.Event()
        self._server: asyncio.AbstractServer | None = None
        self._own_recorder = None
        self._held_program = None  # the driver program while the operator drives
        self._last_code = 0
        self._publish_pending = False
        self._last_phase = ""
        self._last_watchdog = False
        if rig.faults is None:
            from emulator.faults import FaultSet

            rig.faults = FaultSet(rig, seed=rig.seed)
        chained = rig.faults.on_change

        def on_change(fault, what: str, t: float) -> None:
            if chained is not None:
                chained(fault, what, t)
            self.event("fault", f"{fault.name} {'active' if what == 'start' else 'cleared'}")

        rig.faults.on_change = on_change
        rig.monitor = self

    # --- the socket -------------------------------------------------------------------
    async def start(self) -> None:
        """Listen. A socket file left by a killed rig is replaced; one where another rig
        still answers is not (MonitorError)."""
        if self.kind == "unix":
            path = Path(self.where)
            try:
                private_dir(path.parent)
            except PermissionError as exc:
                raise MonitorError(str(exc)) from None
            if path.exists() and path.is_socket():
                try:
                    _, writer = await asyncio.open_unix_connection(str(path))
                except OSError:  # refused: nobody listens, the file is stale
                    path.unlink(missing_ok=True)
                else:
                    writer.close()
                    raise MonitorError(f"another rig's monitor listens at {path}; give this "
                                       "one --monitor with another address")
            # bound here, synchronously, under a umask: the file is born 0600, and no other
            # coroutine or thread runs while the process's umask is narrowed
            sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
            old = os.umask(0o177)
            try:
                sock.bind(str(path))
            except OSError:
                sock.close()
                raise
            finally:
                os.umask(old)
            self._socket_inode = path.stat().st_ino
            self._server = await asyncio.start_unix_server(self._serve, sock=sock)
        else:
            host, port = self.where
            self._server = await asyncio.start_server(self._serve, host, port)
            if port == 0:  # tell callers which port the system chose
                port = self._server.sockets[0].getsockname()[1]
                self.address = f"{host}:{port}"
                self.where = (host, port)
            try:
                self.token_path = token_file(port)
                private_dir(self.token_path.parent)
                fd = os.open(self.token_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC
                             | os.O_NOFOLLOW, 0o600)
                with os.fdopen(fd, "w") as fh:
                    fh.write(self.token + "\n")
            except OSError as exc:
                self.close()
                raise MonitorError(f"cannot keep the monitor's token at {self.token_path}: "
                                   f"{exc}") from None

    def close(self) -> None:
        """Stop listening and close every client (queued messages are still sent)."""
        for c in self.clients:
            c.close(flush=True)
        self.clients.clear()
        if self._server is not None:
            self._server.close()
            self._server = None
        if self.kind == "unix":
            self._remove_own_socket()
        elif self.token_path is not None:
            self.token_path.unlink(missing_ok=True)
            self.token_path = None
        if self._own_recorder is not None:
            self._own_recorder.close()
            self.rig.recorder = self._own_recorder = None

    def _remove_own_socket(self) -> None:
        """Remove the socket file if it is the one this monitor bound (a monitor that
        failed to start must not remove the live socket of another rig)."""
        if self._socket_inode is None:
            return
        path = Path(self.where)
        try:
            if path.stat().st_ino == self._socket_inode:
                path.unlink()
        except OSError:
            pass
        self._socket_inode = None

    async def _authenticate(self, client: _Client, unpacker: msgpack.Unpacker) -> bool:
        """TCP: the first message must carry the token (compared in constant time)."""
        message = None
        try:
            async with asyncio.timeout(AUTH_TIMEOUT_S):
                while message is None:
                    data = await client.reader.read(4096)
                    if not data:
                        return False
                    unpacker.feed(data)
                    message = next(unpacker, None)
        except Exception:  # silence, garbage or a reset: refused like a wrong token
            message = None
        token = message.get("token") if isinstance(message, dict) else None
        if (isinstance(message, dict) and message.get("op") == "auth"
                and isinstance(token, str)
                and hmac.compare_digest(token.encode(), self.token.encode())):
            return True
        self.counts["refused"] += 1
        client.send(pack({"kind": "error", "text": "this monitor needs its token first: "
                          "{'op': 'auth', 'token': ...} (railrig dash reads it from "
                          f"{self.token_path})"}))
        client.close(flush=True)
        return False

    async def _serve(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        client = _Client(reader, writer)
        unpacker = msgpack.Unpacker(max_buffer_size=MAX_MESSAGE, strict_map_key=False)
        if self.token is not None and not await self._authenticate(client, unpacker):
            return
        hello = self.builder.hello(self.rig.faults.targets())
        hello["events"] = list(self.events)
        if not client.send(pack(hello)):
            client.close()
            return
        self.clients.append(client)
        self._publish_to([client])
        try:
            while True:
                for message in unpacker:  # first what came with the token, if anything
                    if not (isinstance(message, dict) and isinstance(message.get("op"), str)):
                        self.counts["bad_messages"] += 1
                        self._reply(client, message, False, "not a command: expected a map "
                                    "with an 'op' key")
                    elif len(self.commands) >= MAX_QUEUED:
                        self.counts["bad_messages"] += 1
                        self._reply(client, message, False, "busy: too many commands "
                                    "waiting for the next frame; this one was dropped")
                    else:
                        self.commands.append((client, message))
                data = await reader.read(4096)
                if not data:
                    break
                unpacker.feed(data)
        except asyncio.CancelledError:  # the loop is closing with the client attached
            pass
        except Exception as exc:  # undecodable bytes, unhashable keys, a reset: this client
            self.counts["bad_messages"] += 1
            log.info("monitor: %s dropped: %s", client.name, exc)
        finally:
            self._drop(client)

    def _drop(self, client: _Client) -> None:
        if client in self.clients:
            self.clients.remove(client)
        client.close()

    # --- once per frame ---------------------------------------------------------------
    def service(self) -> None:
        """Apply queued commands; publish if a snapshot is due. Called between frames."""
        while self.commands:
            client, message = self.commands.popleft()
            self._apply(client, message)
        self._watch()
        if self.clients:
            self.builder.accumulate()
            if (self.rig.frame % self.every == 0 and not self._publish_pending
                    and time.monotonic() - self._last_publish_s >= self.min_gap_s):
                # built when the frame loop next waits (for its deadline, the link or
                # its periodic yield), not inside the frame: a snapshot costs ~0.1 ms
                self._publish_pending = True
                asyncio.get_running_loop().call_soon(self._publish_soon)

    def _publish_soon(self) -> None:
        self._publish_pending = False
        self._last_publish_s = time.monotonic()
        self.publish()

    def publish(self) -> None:
        """One snapshot to every client, without waiting."""
        if self.clients:
            self._publish_to(list(self.clients))

    def _program_phase(self) -> str:
        """The driver program's step now ("" without a program)."""
        return getattr(self.rig.program, "phase", "") if self.rig.program is not None else ""

    def _publish_to(self, clients: list[_Client]) -> None:
        program = "operator" if self._held_program is not None else self._program_phase()
        recording = getattr(self.rig.recorder, "path", None)
        snap = self.builder.snapshot(self.paused, str(recording) if recording else None,
                                     str(program))
        snap["monitor"] = dict(self.counts, clients=len(self.clients))
        self._broadcast(pack(snap), clients)
        self.counts["snapshots"] += 1

    def _broadcast(self, packed: bytes, clients: list[_Client] | None = None) -> None:
        for c in list(self.clients if clients is None else clients):
            if not c.send(packed):
                self.counts["clients_dropped"] += 1
                log.info("monitor: %s too slow or gone, dropped", c.name)
                self._drop(c)

    def event(self, kind: str, text: str) -> None:
        """Log an event and send it to every client."""
        e = {"kind": "event", "t_s": self.rig.plant.time_s, "type": kind, "text": text}
        self.events.append(e)
        if self.clients:
            self._broadcast(pack(e))

    def _watch(self) -> None:
        """Turn changes of the controller's event code, the watchdog and the driver
        program's step into events."""
        phase = self._program_phase()
        if phase != self._last_phase:
            self._last_phase = phase
            if phase:
                self.event("driver", f"step: {phase}")
        code = int(self.rig.replies.get("event_code", 0))
        if code != self._last_code:
            self._last_code = code
            if code:
                self.event("controller", f"event {code}")
        if self.rig.tripped != self._last_watchdog:
            self._last_watchdog = self.rig.tripped
            self.event("link", "watchdog tripped: gates blocked" if self.rig.tripped
                       else "valid commands again")

    # --- pausing ----------------------------------------------------------------------
    def may_run(self) -> bool:
        """Whether the next frame may run (takes one single-step allowance)."""
        if not self.paused:
            return True
        if self.steps > 0:
            self.steps -= 1
            return True
        return False

    async def hold(self, stop: asyncio.Event | None = None) -> bool:
        """While paused, keep serving commands and telemetry. True when a frame may run,
        False if ``stop`` was set meanwhile."""
        last = 0.0
        while stop is None or not stop.is_set():
            self.resumed.clear()
            while self.commands:
                client, message = self.commands.popleft()
                self._apply(client, message)
            if self.may_run():
                return True
            now = time.monotonic()
            if now - last > 0.2:
                self.publish()
                last = now
                if self.rig.recorder is not None:
                    self.rig.recorder.tick()  # rows before the pause reach the disk
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self.resumed.wait(), 0.05)
        return False

    # --- replies ------------------------------------------------------------------------
    def _reply(self, client: _Client, message: Any, ok: bool, text: str) -> None:
        ident = message.get("id") if isinstance(message, dict) else None
        if not client.send(pack({"kind": "reply", "id": ident, "ok": ok,
                                          "text": text})):
            self._drop(client)
