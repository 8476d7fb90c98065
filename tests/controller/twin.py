"""The compiled reference controller beside its plain-Python description: both take
every measurement telegram of a run, and their commands are compared before rounding,
bit for bit (the compiled period is the same IEEE 754 arithmetic in the same order: no
fastmath, and no library call that rounds differently, see pll.py's magnitude)."""

from __future__ import annotations

import msgpack
import numpy as np

from emulator.controller.compiled_tcu import CompiledController
from emulator.controller.tcu import ReferenceController


class Twin:
    """Install on a CompiledController; then ``compared`` periods, ``mismatches`` the
    first few that differ (period, the commands' names, "events" if the events counted
    or the last one differ)."""

    def __init__(self) -> None:
        self.compared = 0
        self.mismatches: list[tuple[int, list[str]]] = []
        self.plain: ReferenceController | None = None
        self.compiled: CompiledController | None = None

    def install(self, tcu: CompiledController) -> None:
        """Compare every period tcu runs: those of its telegrams (``answer``: in one
        compiled call with the codec, or through ``_period`` for a telegram the compiled
        reader leaves) and those called directly (``_period``)."""
        plain = ReferenceController(tcu.cfg, tcu.signal_map)
        self.plain, self.compiled = plain, tcu
        inner_period, inner_answer = tcu._period, tcu.answer
        out_plain = [0.0] * len(tcu.c_names)

        def compare(y: list[float], flags: int, period_s: float, out: np.ndarray) -> None:
            plain.adhesion.enabled = tcu.adhesion.enabled
            plain.step(y, flags, period_s, out_plain)
            self.compared += 1
            same = out.tobytes() == np.array(out_plain).tobytes()  # -0.0 is not 0.0
            same_events = tcu.events == plain.events and tcu.event == plain.event
            if not (same and same_events) and len(self.mismatches) < 5:
                names = [n for n, a, b in zip(tcu.c_names, out.tolist(), out_plain,
                                              strict=True) if repr(a) != repr(b)]
                self.mismatches.append((self.compared, names + ["events"] * (not same_events)))

        def period(y, flags, period_s, out) -> None:
            y_read = y.tolist()
            inner_period(y, flags, period_s, out)
            compare(y_read, flags, period_s, out)

        def answer(payload: bytes) -> bytes:
            before, compared = tcu._last_seq, self.compared
            reply = inner_answer(payload)
            m = msgpack.unpackb(payload)
            if m[1] != before and self.compared == compared:  # the one compiled call's
                # period: on the measurements it read
                compare(tcu._y.tolist(), m[4], m[3] * 1e-6, tcu._commands)
            return reply

        tcu._period, tcu.answer = period, answer

    def assert_identical(self, at_least: int) -> None:
        assert self.compared >= at_least
        assert not self.mismatches, self.mismatches
        assert self.compiled.events == self.plain.events
        assert self.compiled.event == self.plain.event
