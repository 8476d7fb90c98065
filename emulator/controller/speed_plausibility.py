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
#: in traction, an encoder whose count moves by no more than STOPPED_COUNTS over this
#: long ...
STOPPED_S = 0.5
STOPPED_COUNTS = 1  # (a decoder with one channel lost dithers by one count)
#: ... while the other healthy ones read their wheels faster than this share of the
#: slip control's creep limit has failed (judge_stopped)
STOPPED_CREEP_SHARE = 0.5


def added(values) -> float:
    """The floats added one by one from 0.0, in order, as the compiled period adds them
    (from Python 3.12 sum() compensates its rounding, and the plain controller would
    part from the compiled one in the last bit)."""
    total = 0.0
    for value in values:
        total += value
    return total


class SpeedPlausibility:
    """Which encoders are healthy, and readings with the failed ones replaced."""

    def __init__(self, motors_per_inverter: list[int]) -> None:
        self.groups = []
        first = 0
        for n in motors_per_inverter:
            self.groups.append(range(first, first + n))
            first += n
        self.ok = [True] * first
        self.inverter = [k for k, group in enumerate(self.groups) for _ in group]
        self._last: list[float | None] = [None] * first
        # judge_stopped: per encoder, periods in a row standing, and its net count there
        self._stopped = [0] * first
        self._stopped_net = [0] * first
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

    def judge_stopped(self, deltas: list[int], speeds: list[float], traction: bool,
                      floor: float, periods: int) -> bool:
        """Mark the encoders that stand (their count moves by STOPPED_COUNTS at most over
        ``periods`` periods in a row; ``deltas``, this period's count differences) while
        the train is in traction and the others turn: every healthy encoder of the other
        inverters reads its wheel faster than ``floor`` (``speeds``, the windowed ones,
        rad/s at the motor, either way round), and those of the standing one's inverter
        turn or stand too. True if one failed now.

        A wheel that transmits a tractive force turns at least as fast as the train
        (its creep has the force's sign, as any adhesion law has it: Kalker's theory,
        Polach's model); one that stands while the others turn is no wheel's but an
        encoder's that stopped below SENSOR_JUMP, at a standstill or at walking pace.
        Left unjudged it holds the slip control's reference (the slowest wheel in
        traction) at zero, every other axle seems to slip, and the train crawls at the
        creep limit: so ``floor`` is below that limit (STOPPED_CREEP_SHARE of it), or
        the crawl would never reach it. The encoders of one inverter may stand at once
        (its bogie's shared supply or connector): they are judged together, so long as
        the other inverters' all turn (a wheel turning on one inverter while the rest of
        the train stands, on a hill start held by the brake, judges none). One count
        either way is allowed: a 4x decoder whose second channel is lost counts +1 and
        -1 on the first one's edges. Not caught: a wheel that truly stands in traction
        while all the others spin (a gripping axle on a wet start with the train held,
        a seized axle) reads the same; the slip control's cut and re-apply keep spinning
        wheels below the floor part of each 0.5 s in the runs measured (DEVELOPERS.md).
        Outside traction nothing is judged and the runs start anew."""
        n = len(deltas)
        nets = [self._stopped_net[m] + deltas[m] for m in range(n)]
        turning = [self.ok[m] and abs(speeds[m]) > floor for m in range(n)]
        standing = [self.ok[m] and not turning[m] and abs(nets[m]) <= STOPPED_COUNTS
                    for m in range(n)]
        standing_on = {self.inverter[m] for m in range(n) if standing[m]}
        judging = (traction and any(turning) and len(standing_on) == 1
                   and all(turning[m] or standing[m] for m in range(n) if self.ok[m]))
        failed = False
        for m in range(n):
            if judging and standing[m]:
                self._stopped[m] += 1
                self._stopped_net[m] = nets[m]
                if self._stopped[m] >= periods:
                    self.ok[m] = False
                    failed = True
            else:
                self._stopped[m] = 0
                self._stopped_net[m] = 0
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
                    out[a] = (added(own) / len(own) if own
                              else added(healthy) / len(healthy) if healthy else readings[a])
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
