"""The speed sensors' plausibility rule for an encoder that stands in traction
(SpeedPlausibility.judge_stopped) on made-up counter sequences, and its compiled twin
(period_sensing.judge_stopped, after period_sensing.encoder_update) against it period by
period, to the bit.

The sequences are a train's counters as a 256-line quadrature encoder gives them (4
edges a line) at 1 ms: the healthy wheels from their speed, a lost one frozen, or, as a
4x decoder with one channel lost counts, stepping +1 and -1 on the other channel's
edges. What the rule claims (speed_plausibility.py): a stand of STOPPED_S while every
other healthy wheel turns faster than the floor is judged in traction, either way
round, several at once; not outside traction, nor while a healthy wheel turns below the
floor.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from emulator.controller import period_parts as pp
from emulator.controller import period_sensing as ps
from emulator.controller.encoder import EncoderSpeed
from emulator.controller.speed_plausibility import STOPPED_S, SpeedPlausibility

LINES, PERIOD_S, MOTORS = 256, 1e-3, 8
EDGES_PER_RAD = 4 * LINES / (2 * math.pi)
FLOOR_RAD_S = 1.7  # at the motor (0.175 m/s at the rail on the demo trainset's gear)
PERIODS = round(STOPPED_S / PERIOD_S)


class _Both:
    """The plain rule on EncoderSpeed, and the compiled one on its rows, fed alike."""

    def __init__(self, n: int = MOTORS) -> None:
        self.encoders = [EncoderSpeed(LINES, PERIOD_S) for _ in range(n)]
        self.plain = SpeedPlausibility([2] * (n // 2))
        window = self.encoders[0].window
        self.k = np.zeros(pp.N_K)
        self.k[pp.K_PERIOD], self.k[pp.K_RAD_PER_COUNT] = PERIOD_S, 2 * math.pi / (4 * LINES)
        self.k[pp.K_WINDOW], self.k[pp.K_SHORT] = window, self.encoders[0].short
        self.k[pp.K_STOPPED_FLOOR], self.k[pp.K_STOPPED_PERIODS] = FLOOR_RAD_S, PERIODS
        self.mot = np.zeros((n, pp.M_WINDOW + window))
        self.mot[:, pp.M_OK] = 1.0
        self.mot[:, pp.M_INVERTER] = np.arange(n) // 2  # two motors an inverter

    def period(self, counts, traction: bool) -> list[bool]:
        """One period on these counter values; the healthy flags, after asserting that
        both rules agree on them, on what they returned and on their runs."""
        for e, row, c in zip(self.encoders, self.mot, counts, strict=True):
            e.update(c)
            ps.encoder_update(row, self.k, float(c))
        said = self.plain.judge_stopped([e.counts[-1] for e in self.encoders],
                                        [e.speed for e in self.encoders], traction,
                                        FLOOR_RAD_S, PERIODS)
        assert ps.judge_stopped(self.mot, self.k, traction) == said
        assert self.mot[:, pp.M_OK].tolist() == [float(ok) for ok in self.plain.ok]
        assert self.mot[:, pp.M_STOPPED].tolist() == [float(r) for r in self.plain._stopped]
        assert self.mot[:, pp.M_STOPPED_NET].tolist() == [float(r)
                                                          for r in self.plain._stopped_net]
        return list(self.plain.ok)


def _counts(angle: np.ndarray, lost: dict[int, str]) -> list[int]:
    """Counter values for rotor angles (rad): healthy, "frozen" at the count of angle 0,
    or "dither" (+1 while the other channel is high: every second edge)."""
    edges = np.floor(angle * EDGES_PER_RAD).astype(int)
    out = [int(e) % 65536 for e in edges]
    for m, how in lost.items():
        out[m] = 0 if how == "frozen" else int(edges[m] // 2 % 2)
    return out


def _start(both: _Both, lost: dict[int, str], accel: float, sign: float = 1.0,
           traction: bool = True, slow: int | None = None, seconds: float = 3.0):
    """A start from a standstill at ``accel`` rad/s^2 at the motors (``slow``: one more
    healthy wheel at a tenth of it); the period of each judgement, and the healthy
    wheels' counts over each period's eight-period window (periods x motors)."""
    angle = np.zeros(MOTORS)
    judged: dict[int, int] = {}
    edges = []
    for j in range(round(seconds / PERIOD_S)):
        speed = np.full(MOTORS, sign * accel * j * PERIOD_S)
        if slow is not None:
            speed[slow] *= 0.1
        angle += speed * PERIOD_S
        edges.append(np.floor(angle * EDGES_PER_RAD))
        ok = both.period(_counts(angle, lost), traction)
        for m in range(MOTORS):
            if not ok[m] and m not in judged:
                judged[m] = j
    edges = np.array(edges)
    windowed = np.zeros_like(edges)
    windowed[WINDOW_PERIODS:] = edges[WINDOW_PERIODS:] - edges[:-WINDOW_PERIODS]
    healthy = [m for m in range(MOTORS) if m not in lost]
    return judged, windowed[:, healthy]


WINDOW_PERIODS = 8  # encoder.EncoderSpeed's window


@pytest.mark.parametrize(("lost", "sign"), [
    ({1: "frozen"}, 1.0),
    ({2: "frozen", 3: "frozen"}, 1.0),  # both of an inverter's: its shared supply
    ({1: "frozen"}, -1.0),  # the train backwards
    ({3: "dither"}, 1.0),  # a 4x decoder with one channel lost
])
def test_a_standing_encoder_is_judged_once_the_others_turn(lost, sign) -> None:
    """Judged: the lost ones only, at the end of the first STOPPED_S in which every
    healthy wheel's windowed reading (its counts over the last eight periods, worked
    out here from the counter sequence with numpy) was past the floor every period; at
    1 m/s^2 at the rail (10 rad/s^2 at the motor)."""
    judged, windowed = _start(_Both(), lost, 10.0, sign)
    floor_counts = FLOOR_RAD_S * WINDOW_PERIODS * PERIOD_S * EDGES_PER_RAD
    turning = np.all(np.abs(windowed) > floor_counts, axis=1)
    runs = np.convolve(turning, np.ones(PERIODS), "full")[:len(turning)]
    expected = int(np.flatnonzero(runs == PERIODS)[0])
    assert judged == dict.fromkeys(lost, expected)


@pytest.mark.parametrize("lost", [
    {1: "frozen", 6: "frozen"},  # two inverters' at once: a double fault, not judged
    {m: "frozen" for m in range(MOTORS) if m != 4},  # one wheel turns, the rest stand
])
def test_standing_encoders_on_several_inverters_are_not_judged(lost) -> None:
    """What stands on several inverters at once may be the train standing, held by its
    brake on a hill start, while one wheel creeps on a greasy spot: nothing is judged
    (a first version judged all seven standing ones beside the one wheel turning)."""
    judged, windowed = _start(_Both(), lost, 10.0)
    floor_counts = FLOOR_RAD_S * WINDOW_PERIODS * PERIOD_S * EDGES_PER_RAD
    assert np.all(np.abs(windowed[-1]) > floor_counts)  # (the wheels left turn, fast)
    assert not judged


def test_nothing_is_judged_outside_traction() -> None:
    """Braking or coasting, a wheel may stand (a locked wheel is the slide control's
    business): never judged."""
    judged, windowed = _start(_Both(), {1: "frozen"}, 10.0, traction=False)
    assert np.all(np.abs(windowed[-1])
                  > FLOOR_RAD_S * WINDOW_PERIODS * PERIOD_S * EDGES_PER_RAD)
    assert not judged


def test_nothing_is_judged_while_a_healthy_wheel_turns_below_the_floor() -> None:
    """A wheel that turns, if slowly, shows the train is not running away from the
    standing one on spinning wheels alone: the rule waits (here for the whole start)."""
    judged, windowed = _start(_Both(), {1: "frozen"}, 10.0, slow=5, seconds=1.5)
    floor_counts = FLOOR_RAD_S * WINDOW_PERIODS * PERIOD_S * EDGES_PER_RAD
    slow = [0, 2, 3, 4, 5, 6, 7].index(5)  # (windowed has the healthy wheels' columns)
    assert np.abs(windowed[-1, slow]) < floor_counts
    assert np.all(np.abs(np.delete(windowed[-1], slow)) > floor_counts)
    assert not judged


@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_the_compiled_rule_is_the_plain_one_period_by_period(data) -> None:
    """Random drives: each wheel's speed a random walk (either way round, some through
    zero), some encoders frozen or dithering from random periods, traction switched on
    and off; the two agree on every period (_Both.period asserts it). About one drive
    in six reaches a judgement (9 of 60 with the same draws from a seeded generator);
    the tests above reach one each."""
    n = 4
    both = _Both(n)
    angle = np.zeros(n)
    # the wheels' speeds: mostly clear of the floor (so that judgements happen), some
    # through it (so that stands are broken off)
    speed = np.array(data.draw(st.lists(st.one_of(st.floats(5, 30), st.floats(-30, -5),
                                                  st.floats(-3, 3)),
                                        min_size=n, max_size=n)))
    lost_at = data.draw(st.lists(st.one_of(st.none(), st.integers(0, 600)),
                                 min_size=n, max_size=n))
    how = data.draw(st.lists(st.sampled_from(["frozen", "dither"]), min_size=n, max_size=n))
    # runs long enough to judge in, and short ones that break a stand off
    traction_runs = data.draw(st.lists(st.integers(100, 1200), min_size=1, max_size=4))
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    switches = np.cumsum(traction_runs)
    for j in range(1500):
        speed += rng.normal(0.0, 0.1, n)
        angle += speed * PERIOD_S
        lost = {m: how[m] for m in range(n) if lost_at[m] is not None and j >= lost_at[m]}
        both.period(_counts(angle, lost), bool(np.searchsorted(switches, j, "right") % 2 == 0))


def test_one_judged_while_another_stands_the_twins_agree() -> None:
    """The order within a period: INV-A1.m1's encoder frozen from the start and
    INV-A1.m2's from 0.3 s, so that the first is judged while the second's stand is
    under way (a compiled rule that let the first one's mark count in the same period
    judged the second a period apart); each is judged after its own STOPPED_S."""
    both = _Both(4)
    angle = np.zeros(4)
    judged: dict[int, int] = {}
    for j in range(1500):
        angle += 10.0 * j * PERIOD_S * PERIOD_S
        lost = {0: "frozen"} | ({1: "frozen"} if j >= 300 else {})
        ok = both.period(_counts(angle, lost), True)
        judged |= {m: j for m in range(4) if not ok[m] and m not in judged}
    assert set(judged) == {0, 1}
    assert judged[0] < judged[1]
    assert judged[1] >= 300 + PERIODS - 1
