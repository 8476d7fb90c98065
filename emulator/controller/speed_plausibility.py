"""The speed sensors' plausibility: a reading no motor can follow marks its encoder as
failed (latched), and the failed ones read as their healthy neighbours do.

A raw speed (count difference over a period) that jumps by more than SENSOR_JUMP in one
period is physically impossible for a motor on a wheelset (its acceleration is a few
hundred rad/s^2 at most; the counting resolution is 6.1 rad/s at 256 lines and 1 ms):
the sensor is taken as failed for the rest of the run, as a board would until a service
reset. Below that jump (an encoder that stops counting at a standstill or at walking
pace) a second rule judges it: in traction, no wheel stands while the others turn
(judge_stopped). An encoder that gives too few pulses per revolution from a standstill
is judged by neither (DEVELOPERS.md).
"""

from __future__ import annotations

SENSOR_JUMP = 20.0  # rad/s in one period: a speed reading no motor can follow
#: in traction, an encoder that counts nothing for this long in a row ...
STOPPED_S = 0.5
#: ... while every other healthy one reads its wheel faster than this (m/s at the rail)
#: has failed (judge_stopped)
STOPPED_OTHERS_MPS = 0.25


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
        self._stopped = [0] * first  # periods in a row counting nothing (judge_stopped)
        self._fallback_angle: dict[int, float] = {}
        # per inverter: the angle used last, its shift from the source's, and the source
        # (a bit per healthy encoder of its motors; 0: the fallback)
        self._angle_used = [0.0] * len(self.groups)
        self._angle_shift = [0.0] * len(self.groups)
        self._angle_source = [(1 << len(g)) - 1 for g in self.groups]

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

    def judge_stopped(self, raw: list[float], speeds: list[float], traction: bool,
                      floor: float, periods: int) -> bool:
        """Mark the encoders that count nothing (``raw``, the last period's difference,
        is 0) for ``periods`` periods in a row while the train is in traction and every
        other healthy encoder reads its wheel faster than ``floor`` (``speeds``, the
        windowed ones; both rad/s at the motor); True if one failed now.

        A wheel that transmits a tractive force turns at least as fast as the train
        (its creep has the force's sign, as any adhesion law has it: Kalker's theory,
        Polach's model); one that stands while all the others turn is no wheel's but an
        encoder's that stopped counting below SENSOR_JUMP, at a standstill or at walking
        pace. Left unjudged it would hold the slip control's reference (the slowest
        wheel in traction) at zero, and every other axle would seem to slip: the train
        would crawl at the creep limit. STOPPED_OTHERS_MPS at the rail is some 200
        counts of a healthy encoder over STOPPED_S at 256 lines, so a turning wheel
        cannot count nothing for that long. All the others, not their median: a wheel
        that grips while the train stands and the others spin on a wet rail has some
        that do not spin. Outside traction, and with fewer than two healthy encoders,
        nothing is judged and the runs start anew."""
        n = len(raw)
        healthy = [m for m in range(n) if self.ok[m]]
        if not traction or len(healthy) < 2:
            self._stopped = [0] * n
            return False
        failed = False
        for m in range(n):
            if (self.ok[m] and raw[m] == 0.0
                    and all(speeds[o] > floor for o in healthy if o != m)):
                self._stopped[m] += 1
                if self._stopped[m] >= periods:
                    self.ok[m] = False
                    failed = True
            else:
                self._stopped[m] = 0
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

    def rotor_angle(self, inverter: int, angles: list[float], speed: float,
                    period_s: float) -> float:
        """The rotor angle inverter's control uses this period: the mean of its healthy
        encoders' counted angles (``angles``, one per motor of it), or the fallback's
        where none is left, shifted so that it carries on where the encoders it is
        taken from change. At a change the angle used last, advanced by the speed over
        the period, is where the new source is made to start: a mean that loses one of
        two motors jumps by half their angles' difference, and the fallback starts from
        its own zero, either a step of the field angle under a running drive."""
        group = self.groups[inverter]
        source, total, healthy = 0, 0.0, 0
        for j, a in enumerate(group):
            if self.ok[a]:
                source |= 1 << j
                total += angles[j]
                healthy += 1
        raw = (total / healthy if healthy
               else self.fallback_angle(inverter, speed, period_s))
        if source != self._angle_source[inverter]:
            self._angle_shift[inverter] = (self._angle_used[inverter] + speed * period_s) - raw
            self._angle_source[inverter] = source
        angle = raw + self._angle_shift[inverter]
        self._angle_used[inverter] = angle
        return angle

    def fallback_angle(self, inverter: int, speed: float, period_s: float) -> float:
        """A rotor angle for an inverter whose encoders have all failed: integrated from
        the speed its neighbours give (the drive goes on, less precisely)."""
        self._fallback_angle[inverter] = (self._fallback_angle.get(inverter, 0.0)
                                          + speed * period_s)
        return self._fallback_angle[inverter]
