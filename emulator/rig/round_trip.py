"""Lockstep's round trips and the silence before a measurement is said again.

The estimator of RFC 6298 (Paxson et al., "Computing TCP's Retransmission Timer",
section 2): the smoothed round trip SRTT and its variation RTTVAR, gains 1/8 and 1/4, the
timeout SRTT + 4 RTTVAR. Samples only from round trips without a repeat (Karn's rule,
section 3); bounds of our own (emulator/rig/lockstep.py: at least two periods, at
most the rig's lockstep repeat interval, which also holds until 8 samples are in).
"""

from __future__ import annotations


class RoundTrip:
    """SRTT and RTTVAR of the lockstep round trips, in seconds."""

    #: samples before the estimate is used
    MIN_SAMPLES = 8

    def __init__(self) -> None:
        self.srtt = self.rttvar = 0.0
        self.samples = 0

    def note(self, seconds: float) -> None:
        """One round trip (RFC 6298, 2.2 and 2.3)."""
        if self.samples == 0:
            self.srtt, self.rttvar = seconds, seconds / 2
        else:
            self.rttvar += 0.25 * (abs(self.srtt - seconds) - self.rttvar)
            self.srtt += 0.125 * (seconds - self.srtt)
        self.samples += 1

    def timeout(self, floor: float, ceiling: float) -> float:
        """SRTT + 4 RTTVAR within [floor, ceiling]; the ceiling until MIN_SAMPLES."""
        if self.samples < self.MIN_SAMPLES:
            return ceiling
        return min(max(self.srtt + 4 * self.rttvar, floor), ceiling)
