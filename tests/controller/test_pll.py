"""SOGI-PLL (Ciobotaru, Teodorescu & Blaabjerg, PESC 2006) against the known signal."""

from __future__ import annotations

import copy
import math

import pytest

from emulator.controller.pll import DEAD_SAMPLES, LOCK_RESIDUAL, SogiPll, dead_samples


@pytest.mark.parametrize("f_hz", [50.0, 49.5, 50.5, 16.7, 16.5, 17.0])
def test_locks_on_phase_and_frequency_with_harmonics(f_hz: float) -> None:
    nominal = 50.0 if f_hz > 30 else 16.7
    pll = SogiPll(nominal, 1e-3)
    errors = []
    for k in range(4000):
        t = k * 1e-3
        theta = 2 * math.pi * f_hz * t + 0.7
        v = 35355 * (math.sin(theta) + 0.015 * math.sin(3 * theta))  # a 1.5 % third harmonic
        est = pll.update(v)
        if k > 3000:
            errors.append((est - theta + math.pi) % (2 * math.pi) - math.pi)
    assert max(abs(e) for e in errors) < math.radians(2.0)  # the harmonic wobbles it a little
    assert abs(sum(errors) / len(errors)) < math.radians(0.2)
    # the fundamental's amplitude, not the wave's: the SOGI's band-pass, k w s / (s^2 +
    # k w s + w^2) (Ciobotaru et al.), passes the third harmonic with 3k / sqrt(64 + 9k^2)
    # = 0.47 at k = 1.41, so the 1.5 % harmonic moves the estimate by at most 0.7 %
    leak = 3 * pll.k / math.sqrt(64 + 9 * pll.k ** 2)
    assert pll.amplitude == pytest.approx(35355, rel=0.015 * leak)


# --- the live-line test and its lock monitor (pll.dead_samples) --------------------------
# Supply levels from EN 50163 / IEC 60850 (REFERENCES.md), rms: U_n, U_min2, U_max2.
SUPPLIES = {50.0: (25000.0, 17500.0, 29000.0), 16.7: (15000.0, 11000.0, 18000.0)}
T = 1e-3  # the reference controller's period
SETTLE = 1000  # frames of the nominal line before the event (the PLL locks in a few periods)
BAND_DEG = 2 * math.degrees(math.asin(LOCK_RESIDUAL))  # a dead line's blind band, 73.7 deg


def _levels(f_hz: float) -> dict[str, float]:
    """The supply's levels in pu of U_n; 'low' is U_min2 less the 10 % that the train's
    own current may pull the pantograph under the line (our demo line's order)."""
    u_n, u_min2, u_max2 = SUPPLIES[f_hz]
    return {"u_min2": u_min2 / u_n, "low": 0.9 * u_min2 / u_n, "u_max2": u_max2 / u_n}


def _line(f_hz: float, pu, phase=lambda k: 0.0):
    """A sine of pu(k) x the nominal peak, with a phase offset phase(k), sampled at k T;
    a 1.5 % third harmonic on it."""
    peak = SUPPLIES[f_hz][0] * math.sqrt(2)

    def sample(k: int) -> float:
        th = 2 * math.pi * f_hz * k * T + 0.3 + phase(k)
        return pu(k) * peak * (math.sin(th) + 0.015 * math.sin(3 * th))

    return sample


class _Monitor:
    """The reference controller's live-line test, sample by sample: its PLL, the ring of
    the last quarter period's |samples|, the count of samples in a row not like a live
    line (live while under DEAD_SAMPLES)."""

    def __init__(self, f_hz: float) -> None:
        u_n, u_min2, _ = SUPPLIES[f_hz]
        self.peak, self.u_min2_peak = u_n * math.sqrt(2), u_min2 * math.sqrt(2)
        self.pll = SogiPll(f_hz, T, min_amplitude=0.2 * self.peak)
        self.ring = [0.0] * max(round(1 / (4 * f_hz * T)), 1)
        self.run_dead = 0.0
        self.k = 0

    def run(self, sample, until: int) -> list[bool]:
        flags = []
        while self.k < until:
            v = sample(self.k)
            theta = self.pll.update(v)
            self.ring[self.k % len(self.ring)] = abs(v)
            self.run_dead = dead_samples(v, theta, self.pll.amplitude, max(self.ring),
                                         self.peak, self.u_min2_peak, self.run_dead)
            flags.append(self.run_dead < DEAD_SAMPLES)
            self.k += 1
        return flags


def _after_an_event(f_hz: float, event_line, frames: int):
    """For an event at each sample of one line period after SETTLE: (its frame, the live
    flags from that frame on). event_line(at) is the line with the event at frame at."""
    locked = _Monitor(f_hz)
    assert all(locked.run(_line(f_hz, lambda k: 1.0), SETTLE)[SETTLE // 2:])
    for start in range(round(1 / (f_hz * T))):
        monitor = copy.deepcopy(locked)
        at = SETTLE + start
        flags = monitor.run(event_line(at), at + frames)
        yield at, flags[start:]


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
@pytest.mark.parametrize("steps", [("u_min2", 1.0), ("low", 1.0), (1.0, "u_max2"),
                                   ("low", "u_max2")])
def test_steps_between_u_min2_and_u_max2_keep_the_line_live(f_hz, steps) -> None:
    # EN 50163: a train runs on a line from U_min2 to U_max2. A step down to it (a
    # dip, even with the train's own drop under U_min2) or back up (its recovery, to
    # U_max2) at any instant must not be taken for a dead line or a lost lock: the line
    # converters would stop for LOCK_S at each. From 1 pu to the first level, then to
    # the second one 0.3 s later.
    lv = _levels(f_hz)
    first, second = (lv.get(x, x) for x in steps)
    for at, flags in _after_an_event(
            f_hz, lambda at: _line(f_hz, lambda k: (1.0 if k < at else first if k < at + 300
                                                    else second)), 700):
        assert all(flags), (at, flags.index(False))


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
def test_a_dead_line_is_seen_within_the_lock_monitors_blind_band(f_hz) -> None:
    # The line drops to nothing at any instant. It falls short of the tracked sine by
    # A |sin theta|: past LOCK_RESIDUAL A except in the band of 2 asin 0.6 = 73.7 degrees
    # around the sine's zeros. So it is seen at worst once the band is crossed, plus the
    # samples in a row the monitor asks for; and at the earliest sample it can be
    # (DEAD_SAMPLES - 1) whenever the first two samples fall outside the band: for
    # (180 - 73.7 - one sample's degrees) / 180 of the instants, less one instant a half
    # period for the sampling grid (geometry). In the band after that it may look live
    # for a few samples (never for LOCK_S), and by the next band, half a period on, the
    # amplitude has fallen under its floor: dead for good (measured)
    step_deg = 360 * f_hz * T
    bound = math.ceil(BAND_DEG / step_deg) + DEAD_SAMPLES - 1
    waits = []
    for _at, flags in _after_an_event(f_hz, lambda at: _line(f_hz, lambda k: 0.0 if k >= at
                                                              else 1.0), 400):
        waits.append(flags.index(False))
        assert not any(flags[bound + 1:])
    assert max(waits) <= bound, waits
    at_once = sum(w == DEAD_SAMPLES - 1 for w in waits) / len(waits)
    assert at_once >= (180 - BAND_DEG - step_deg) / 180 - 2 / len(waits), waits


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
@pytest.mark.parametrize("jump_deg", [90.0, 150.0, 180.0])
def test_a_large_phase_jump_is_a_lost_lock(f_hz, jump_deg) -> None:
    # a jump of phi makes the sample fall short of the tracked sine by
    # 2 A sin(phi / 2) |cos(theta + phi / 2)| on half of each period: for phi = 90 deg
    # past LOCK_RESIDUAL A over 110 degrees of every half period, more for larger
    # jumps (geometry); the PLL's own pull towards the new phase shortens that, so the
    # bound is half a period at any instant. The line converters must not modulate on
    # against a phase they no longer follow (a 150-180 degree jump tripped the links on
    # overvoltage when only the amplitude was looked at)
    half = math.ceil(0.5 / (f_hz * T))
    jump = math.radians(jump_deg)
    for at, flags in _after_an_event(f_hz, lambda at: _line(
            f_hz, lambda k: 1.0, lambda k: jump if k >= at else 0.0), 100):
        assert not all(flags[:half]), at


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
@pytest.mark.parametrize("jump_deg", [-30.0, 20.0, 30.0])
def test_a_small_phase_jump_is_followed(f_hz, jump_deg) -> None:
    # below 2 asin(LOCK_RESIDUAL / 2) = 34.9 degrees no sample can fall short by 0.6 A:
    # the PLL follows the jump, the line stays live at any instant
    jump = math.radians(jump_deg)
    for at, flags in _after_an_event(f_hz, lambda at: _line(
            f_hz, lambda k: 1.0, lambda k: jump if k >= at else 0.0), 300):
        assert all(flags), (at, flags.index(False))


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
@pytest.mark.parametrize("glitch", [0.0, 0.5, 2.0])
def test_one_glitched_sample_is_not_a_lost_line(f_hz, glitch) -> None:
    # one sample read as zero, as half or as twice the line, at any instant: the monitor
    # asks for DEAD_SAMPLES samples in a row, so such a glitch does not stop the line
    # converters for LOCK_S (one read with its sign flipped near the peak still does, at
    # 2 of 20 instants at 50 Hz: it throws the PLL for the next sample too)
    for at, flags in _after_an_event(f_hz, lambda at: _line(
            f_hz, lambda k: glitch if k == at else 1.0), 200):
        assert all(flags), (at, flags.index(False))


@pytest.mark.parametrize("f_hz", [50.0, 16.7])
def test_a_line_at_half_its_voltage_is_not_live(f_hz) -> None:
    # 0.5 pu: below U_min2 (0.7 / 0.73 pu) and below the floor with its margin
    # (0.8 U_min2: 0.56 / 0.59 pu) once the amplitude has followed it
    monitor = _Monitor(f_hz)
    flags = monitor.run(_line(f_hz, lambda k: 0.5 if k >= SETTLE else 1.0), SETTLE + 800)
    assert all(flags[SETTLE // 2:SETTLE])
    assert not any(flags[SETTLE + 400:])
