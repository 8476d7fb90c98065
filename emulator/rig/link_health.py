"""What the rig counts of the controller's telegrams (reports, the dashboard, tests)."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Any


@dataclass
class LinkHealth:
    """What the rig saw of the controller's telegrams."""

    accepted: int = 0  # telegrams that passed the checks and were queued
    valid: int = 0  # frames that ran on a fresh command
    missing: int = 0  # frames that held the previous command (the controller's doing)
    overrun_held: int = 0  # frames that held it because the rig left too little time
    watchdog_trips: int = 0
    rejected: Counter = field(default_factory=Counter)  # by TelegramError kind
    sequence: Counter = field(default_factory=Counter)  # duplicate, late, unexpected
    expired: int = 0  # accepted answers whose frame passed before they were used
    reordered: int = 0  # accepted, but after a later-numbered one
    repeat_requests: int = 0  # valid telegrams asking for the measurement again
    answers_to_repeats: int = 0  # second answers to a measurement the rig said again

    def as_dict(self) -> dict[str, Any]:
        """Plain dictionary, for reports and JSON."""
        return {"accepted": self.accepted, "valid": self.valid, "missing": self.missing,
                "overrun_held": self.overrun_held, "expired": self.expired,
                "reordered": self.reordered, "repeat_requests": self.repeat_requests,
                "answers_to_repeats": self.answers_to_repeats,
                "watchdog_trips": self.watchdog_trips, "rejected": dict(self.rejected),
                "sequence": dict(self.sequence)}
