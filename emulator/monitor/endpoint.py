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
record    path (optional): start recording every frame; stop = true ends it
mark      text: a mark in the recording and the event log
========  ==============================================================================

It never slows the frame loop: the rig calls ``service()`` once per frame, which applies
queued commands and, every Nth frame and only with clients attached, schedules one
snapshot, built when the loop next waits (before the next deadline in real time) and
written to every client without waiting. A client whose unsent backlog passes
``MAX_BACKLOG`` (a slow or vanished reader) is dropped; so is one that sends bytes
msgpack cannot decode.
"""

from __future__ import annotations

import asyncio
import contextlib
import ipaddress
import logging
import os
import time
from collections import deque
from pathlib import Path
from typing import Any

import msgpack

from emulator.faults import FaultError
from emulator.monitor.telemetry import TelemetryBuilder
from emulator.protocol.signal_map import MODES
from tui.client import default_address  # one place for it; the client needs no emulator

log = logging.getLogger(__name__)

RATE_HZ = 30.0
MAX_BACKLOG = 256 * 1024  # bytes queued for one client before it counts as too slow
MAX_MESSAGE = 64 * 1024  # a command larger than this is not a command
HISTORY = 200  # events kept for clients that attach later
MODE_OF_DEMAND = {1: "accelerate", 0: "coast", -1: "brake"}


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


class Monitor:
    """Publishes a rig's state and applies operator commands between frames."""

    def __init__(self, rig, address: str | None = None, *, rate_hz: float = RATE_HZ) -> None:
        self.rig = rig
        self.address = address or default_address()
        self.kind, self.where = parse_address(self.address)
        self.every = max(1, round(1e6 / (rate_hz * rig.period_us)))
        self.builder = TelemetryBuilder(rig)
        self.clients: list[_Client] = []
        self.commands: deque[tuple[_Client, dict]] = deque()
        self.events: deque[dict] = deque(maxlen=HISTORY)
        self.counts = {"clients_dropped": 0, "bad_messages": 0, "commands": 0,
                       "snapshots": 0}
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
            path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
            if path.exists() and path.is_socket():
                try:
                    _, writer = await asyncio.open_unix_connection(str(path))
                except OSError:  # refused: nobody listens, the file is stale
                    path.unlink(missing_ok=True)
                else:
                    writer.close()
                    raise MonitorError(f"another rig's monitor listens at {path}; give this "
                                       "one --monitor with another address")
            self._server = await asyncio.start_unix_server(self._serve, path=str(path))
            os.chmod(path, 0o600)
        else:
            host, port = self.where
            self._server = await asyncio.start_server(self._serve, host, port)
            if port == 0:  # tell callers which port the system chose
                port = self._server.sockets[0].getsockname()[1]
                self.address = f"{host}:{port}"
                self.where = (host, port)

    def close(self) -> None:
        """Stop listening and close every client (queued messages are still sent)."""
        for c in self.clients:
            c.close(flush=True)
        self.clients.clear()
        if self._server is not None:
            self._server.close()
            self._server = None
        if self.kind == "unix":
            Path(self.where).unlink(missing_ok=True)
        if self._own_recorder is not None:
            self._own_recorder.close()
            self.rig.recorder = self._own_recorder = None

    async def _serve(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        client = _Client(reader, writer)
        hello = self.builder.hello(self.rig.faults.targets())
        hello["events"] = list(self.events)
        if not client.send(pack(hello)):
            client.close()
            return
        self.clients.append(client)
        self._publish_to([client])
        unpacker = msgpack.Unpacker(max_buffer_size=MAX_MESSAGE, strict_map_key=False)
        try:
            while data := await reader.read(4096):
                unpacker.feed(data)
                for message in unpacker:
                    if isinstance(message, dict) and isinstance(message.get("op"), str):
                        self.commands.append((client, message))
                    else:
                        self.counts["bad_messages"] += 1
                        self._reply(client, message, False, "not a command: expected a map "
                                    "with an 'op' key")
        except (msgpack.UnpackException, ValueError, ConnectionError) as exc:
            self.counts["bad_messages"] += 1
            log.info("monitor: %s dropped: %s", client.name, exc)
        except asyncio.CancelledError:  # the loop is closing with the client attached
            pass
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
            if self.rig.frame % self.every == 0 and not self._publish_pending:
                # built when the frame loop next waits (for its deadline, the link or
                # its periodic yield), not inside the frame: a snapshot costs ~0.1 ms
                self._publish_pending = True
                asyncio.get_running_loop().call_soon(self._publish_soon)

    def _publish_soon(self) -> None:
        self._publish_pending = False
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
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self.resumed.wait(), 0.05)
        return False

    # --- commands ---------------------------------------------------------------------
    def _reply(self, client: _Client, message: Any, ok: bool, text: str) -> None:
        ident = message.get("id") if isinstance(message, dict) else None
        if not client.send(pack({"kind": "reply", "id": ident, "ok": ok,
                                          "text": text})):
            self._drop(client)

    def _apply(self, client: _Client, message: dict) -> None:
        self.counts["commands"] += 1
        op = message["op"]
        handler = getattr(self, f"_op_{op}", None)
        if handler is None:
            self.counts["bad_messages"] += 1
            self._reply(client, message, False, f"unknown op {op!r}")
            return
        try:
            text = handler(message)
        except (FaultError, ValueError, TypeError, KeyError, OSError) as exc:
            self._reply(client, message, False, f"{op}: {exc}")
            return
        self._reply(client, message, True, text)
        self.resumed.set()

    def _op_inject(self, m: dict) -> str:
        params = m.get("params") or {}
        if not isinstance(params, dict):
            raise ValueError("params must be a map of name to number")
        until = m.get("until_s")
        fault = self.rig.faults.add(str(m["fault"]), str(m["target"]),
                                    {str(k): float(v) for k, v in params.items()},
                                    at_s=self.rig.plant.time_s,
                                    until_s=None if until is None else float(until))
        self.event("operator", f"inject {fault.name}")
        return f"{fault.name} scheduled"

    def _op_clear(self, m: dict) -> str:
        name = str(m["fault"])
        active = [f for f in self.rig.faults.faults if f.active and name in (f.name, f.label)]
        if not active:
            raise ValueError(f"no active fault named {name!r}")
        self.rig.faults.clear(name)
        self.event("operator", f"clear {name}")
        return f"{name} cleared"

    def _op_pause(self, m: dict) -> str:
        self.paused, self.steps = True, 0
        self.event("operator", "paused")
        return "paused"

    def _op_resume(self, m: dict) -> str:
        self.paused = False
        self.event("operator", "resumed")
        return "running"

    def _op_step(self, m: dict) -> str:
        frames = int(m.get("frames", 1))
        if not 1 <= frames <= 100_000:
            raise ValueError("frames must be 1..100000")
        self.paused = True
        self.steps += frames
        return f"stepping {frames} frame(s)"

    def _op_demand(self, m: dict) -> str:
        rig = self.rig
        if m.get("release"):
            if self._held_program is None:
                return "the driver program has the demand already"
            rig.program, self._held_program = self._held_program, None
            self.event("operator", "demand handed back to the driver program")
            return "driver program drives"
        if "change" in m:  # a step from the demand now (keys pressed faster than telemetry)
            effort = round(min(1.0, max(-1.0, rig.driver.effort_demand + float(m["change"]))),
                           3)
        else:
            effort = float(m["effort"])
        if not -1.0 <= effort <= 1.0:
            raise ValueError(f"effort must be within -1..1, got {effort}")
        if self._held_program is None and rig.program is not None:
            self._held_program, rig.program = rig.program, None
        rig.driver.effort_demand = effort
        sign = (effort > 0) - (effort < 0)
        mode = MODE_OF_DEMAND[sign]
        rig.driver.mode = next(k for k, v in MODES.items() if v == mode)
        self.event("operator", f"demand {effort:+.2f} ({mode})")
        return f"demand {effort:+.2f}"

    def _op_record(self, m: dict) -> str:
        rig = self.rig
        if m.get("stop"):
            if self._own_recorder is None:
                raise ValueError("no recording started from the monitor is running")
            path = self._own_recorder.path
            self._own_recorder.close()
            rig.recorder = self._own_recorder = None
            self.event("operator", f"recording stopped: {path}")
            return f"recording stopped: {path}"
        if rig.recorder is not None:
            raise ValueError(f"already recording to {rig.recorder.path}")
        path = m.get("path") or time.strftime("railrig-%Y%m%d-%H%M%S.rrec")
        self._own_recorder = rig.start_recording(str(path))
        self.event("operator", f"recording to {path}")
        return f"recording to {path}"

    def _op_mark(self, m: dict) -> str:
        text = str(m.get("text", "mark"))[:200]
        if self.rig.recorder is not None:
            self.rig.recorder.mark(label=text, what="operator", t=self.rig.plant.time_s)
        self.event("mark", text)
        return "marked"
