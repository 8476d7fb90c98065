"""What a monitor client may ask of the rig: one handler per op, applied between frames.

``Monitor`` inherits these; each handler reads its operands through ``operands`` (type,
finiteness, range) and returns the reply's text or raises a ``ValueError`` whose message
the client gets. ``_apply`` contains any other exception to its one message.
"""

from __future__ import annotations

import logging
import time
from typing import Any

from emulator.monitor import operands as op
from emulator.protocol.signal_map import MODES

log = logging.getLogger("emulator.monitor.endpoint")

MODE_OF_DEMAND = {1: "accelerate", 0: "coast", -1: "brake"}
MAX_STEP_FRAMES = 100_000  # frames one step command (and the queue of them) may ask for


class OperatorCommands:
    """The ``_op_*`` handlers of the monitor (a mixin of ``Monitor``)."""

    def _apply(self, client: Any, message: dict) -> None:
        """Run one command's handler and reply (``_reply`` is the endpoint's)."""
        self.counts["commands"] += 1
        name = message["op"]
        handler = getattr(self, f"_op_{name}", None) if name.isidentifier() else None
        if handler is None:
            self.counts["bad_messages"] += 1
            self._reply(client, message, False, f"unknown op {name[:40]!r}")
            return
        try:
            text = handler(message)
        except (ValueError, OSError) as exc:  # a refused operand or fault; a file refused
            self._reply(client, message, False, f"{name}: {exc}")
            return
        except Exception as exc:  # a defect of ours: contained to this message
            self.counts["handler_errors"] += 1
            log.exception("monitor: %s failed on %r", name, message)
            self._reply(client, message, False, f"{name}: internal error ({exc!r}); the rig "
                        "runs on")
            return
        self._reply(client, message, True, text)
        self.resumed.set()

    def _op_auth(self, m: dict) -> str:
        return "no token needed here" if self.token is None else "already authenticated"

    def _op_inject(self, m: dict) -> str:
        until = None if m.get("until_s") is None else op.number(m, "until_s", 0.0, 1e7)
        fault = self.rig.faults.add(op.text(m, "fault"), op.text(m, "target"),
                                    op.numbers_map(m, "params"),
                                    at_s=self.rig.plant.time_s, until_s=until)
        self.event("operator", f"inject {fault.name}")
        return f"{fault.name} scheduled"

    def _op_clear(self, m: dict) -> str:
        name = op.text(m, "fault")
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
        frames = op.integer(m, "frames", 1, MAX_STEP_FRAMES, default=1)
        self.paused = True
        self.steps = min(self.steps + frames, MAX_STEP_FRAMES)
        return f"stepping {frames} frame(s)"

    def _op_demand(self, m: dict) -> str:
        rig = self.rig
        if op.flag(m, "release"):
            if self._held_program is None:
                return "the driver program has the demand already"
            rig.program, self._held_program = self._held_program, None
            self.event("operator", "demand handed back to the driver program")
            return "driver program drives"
        if "change" in m:  # a step from the demand now (keys pressed faster than telemetry)
            change = op.number(m, "change", -2.0, 2.0)
            effort = round(min(1.0, max(-1.0, rig.driver.effort_demand + change)), 3)
        else:
            effort = op.number(m, "effort", -1.0, 1.0)
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
        if op.flag(m, "stop"):
            if self._own_recorder is None:
                raise ValueError("no recording started from the monitor is running")
            path = self._own_recorder.path
            self._own_recorder.close()
            rig.recorder = self._own_recorder = None
            self.event("operator", f"recording stopped: {path}")
            return f"recording stopped: {path}"
        if "path" in m:
            raise ValueError("the monitor takes a bare 'name'; the rig chooses the folder "
                             f"({self.record_dir})")
        if rig.recorder is not None:
            raise ValueError(f"already recording to {rig.recorder.path}")
        name = op.recording_name(m, "name")
        self.record_dir.mkdir(mode=0o700, parents=True, exist_ok=True)
        if name is None:
            stamp = time.strftime("railrig-%Y%m%d-%H%M%S")
            name = next(f"{stamp}{suffix}.rrec" for suffix in
                        ("", *(f"-{i}" for i in range(1, 1000)))
                        if not (self.record_dir / f"{stamp}{suffix}.rrec").exists())
        path = self.record_dir / name
        try:  # never over an existing file: created here or refused
            self._own_recorder = rig.start_recording(str(path), exclusive=True)
        except FileExistsError:
            raise ValueError(f"{path} exists already; choose another name") from None
        self.event("operator", f"recording to {path}")
        return f"recording to {path}"

    def _op_mark(self, m: dict) -> str:
        text = op.text(m, "text", default="mark", max_len=10_000)[:200]
        if self.rig.recorder is not None:
            self.rig.recorder.mark(label=text, what="operator", t=self.rig.plant.time_s)
        self.event("mark", text)
        return "marked"
