"""The speed sensors' plausibility: a reading no motor can follow marks its encoder as
failed (latched), and the failed ones read as their healthy neighbours do.

A raw speed (count difference over a period) that jumps by more than SENSOR_JUMP in one
period is physically impossible for a motor on a wheelset (its acceleration is a few
hundred rad/s^2 at most; the counting resolution is 6.1 rad/s at 256 lines and 1 ms):
the sensor is taken as failed for the rest of the run, as a board would until a service
reset.
"""

from __future__ import annotations

SENSOR_JUMP = 20.0  # rad/s in one period: a speed reading no motor can follow


class SpeedPlausibility:
    """Which encoders are healthy, and readings with the failed ones replaced."""

    def __init__(self, motors_per_inverter: list[int]) -> None:
        self.groups = []
        first = 0
        for n in motors_per_inverter:
            self.groups.append(range(first, first + n))
            first += n
        self.ok = [True] * first
        self._last: list[float | None] = [None] * first
        self._fallback_angle: dict[int, float] = {}

    def judge(self, raw: list[float]) -> bool:
        """Mark the encoders whose raw speed jumped implausibly; True if one failed now."""
        failed = False
        for m, (now, before) in enumerate(zip(raw, self._last, strict=True)):
            if (self.ok[m] and before is not None and now is not None
                    and abs(now - before) > SENSOR_JUMP):
                self.ok[m] = False
                failed = True
        self._last = list(raw)
        return failed

    def fill(self, readings: list[float]) -> list[float]:
        """Readings with the failed sensors' replaced by the healthy ones of their
        inverter, or of the train when none of those is left."""
        if all(self.ok):
            return readings
        healthy = [r for r, ok in zip(readings, self.ok, strict=True) if ok]
        out = list(readings)
        for group in self.groups:
            own = [readings[a] for a in group if self.ok[a]]
            for a in group:
                if not self.ok[a]:
                    out[a] = (sum(own) / len(own) if own
                              else sum(healthy) / len(healthy) if healthy else readings[a])
        return out

    def fallback_angle(self, inverter: int, speed: float, period_s: float) -> float:
        """A rotor angle for an inverter whose encoders have all failed: integrated from
        the speed its neighbours give (the drive goes on, less precisely)."""
        self._fallback_angle[inverter] = (self._fallback_angle.get(inverter, 0.0)
                                          + speed * period_s)
        return self._fallback_angle[inverter]
