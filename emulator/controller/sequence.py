"""Switch-on sequence of the line side, with trip handling and a retry policy.

Off -> main breaker -> precharge contactors (link charges through the resistors) ->
line contactors -> precharge open -> running (line converters released, once the line
voltage's phase is tracked again: ``line_locked``). A trip opens
everything; after ``retry_s`` the sequence starts again, at most ``max_retries`` times in a
row. A neutral section ahead opens the breaker after the power has been taken off, and
the sequence recloses once the notice is gone (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass

OFF, BREAKER, PRECHARGE, LINE, RUNNING, TRIPPED, NEUTRAL = range(7)
STATE_NAMES = ("off", "closing breaker", "precharging", "closing line contactor",
               "running", "tripped", "neutral section")


@dataclass
class SwitchgearCommand:
    """What the sequence asks of the switchgear this period."""

    breaker: bool = False
    precharge: bool = False
    line_contactor: bool = False
    converters_enabled: bool = False


class SwitchOnSequence:
    """The state machine; feed it the feedback contacts and link voltages each period."""

    def __init__(self, period_s: float, charged_v: float, timeout_s: float = 5.0,
                 retry_s: float = 2.0, max_retries: int = 3) -> None:
        self.T = period_s
        self.charged_v = charged_v
        self.timeout_s = timeout_s
        self.retry_s = retry_s
        self.max_retries = max_retries
        self.state = OFF
        self.timer = 0.0
        self.retries = 0
        self.trip_reason = 0

    def trip(self, event_code: int) -> None:
        """Open everything now; the retry timer starts."""
        if self.state != TRIPPED:
            self.state, self.timer, self.trip_reason = TRIPPED, 0.0, event_code
            self.retries += 1

    def step(self, breaker_closed: bool, precharge_closed: bool, line_closed: bool,
             link_min_v: float, neutral_ahead: bool, enabled: bool,
             line_locked: bool = True) -> SwitchgearCommand:
        """Advance one period."""
        self.timer += self.T
        s = self.state
        if neutral_ahead and s in (BREAKER, PRECHARGE, LINE, RUNNING):
            self.state, self.timer = NEUTRAL, 0.0
        elif (s == NEUTRAL and not neutral_ahead) or (
                s == TRIPPED and self.timer >= self.retry_s
                and self.retries <= self.max_retries):
            self.state, self.timer = OFF, 0.0
        elif s == OFF and enabled:
            self.state, self.timer = BREAKER, 0.0
        elif s == BREAKER and breaker_closed:
            # a still-charged link (after a neutral section) needs no precharge
            self.state = LINE if link_min_v >= self.charged_v else PRECHARGE
            self.timer = 0.0
        elif s == PRECHARGE and link_min_v >= self.charged_v and precharge_closed:
            self.state, self.timer = LINE, 0.0
        elif s == LINE and line_closed and self.timer >= 0.05 and line_locked:
            self.state, self.timer = RUNNING, 0.0
            self.retries = 0
        elif s in (BREAKER, PRECHARGE, LINE) and self.timer > self.timeout_s:
            self.trip(1)  # sequence timeout
        s = self.state
        return SwitchgearCommand(
            breaker=s in (BREAKER, PRECHARGE, LINE, RUNNING),
            precharge=s == PRECHARGE or (s == LINE and not line_closed),
            line_contactor=s in (LINE, RUNNING),
            converters_enabled=s == RUNNING,
        )
