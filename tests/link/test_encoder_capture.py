"""The encoders' edge-time capture and the period method of speed measurement.

Period method (e.g. Leonhard, *Control of Electrical Drives*, on digital speed sensing;
common practice of drive boards): the speed is the angle between two captured edges over
the time between them, w = (n2 - n1) 2 pi / N / (t2 - t1), N edges a revolution. With the
times read from a 1 MHz timer, each capture is the timer's count at the edge (within the
microsecond before it), so the relative speed error is at most 1 us / (t2 - t1), by hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from emulator.plant import Plant
from emulator.profiles.reader import PROFILES_DIR, load_machine
from emulator.protocol.signal_map import build_signal_map
from emulator.rig.sampling import DriverDemand, MeasurementSampler

MACHINE = PROFILES_DIR / "machines" / "tern-tm310.toml"
TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"


def _captures(speed: float, frames: int):
    """(counts, captures) each 1 ms frame of a shaft turning at a held speed."""
    plant = Plant.test_bench(load_machine(MACHINE), frame_s=1e-3)
    plant.impose_speed(0, speed)
    sampler = MeasurementSampler(plant, build_signal_map(plant.params), None,
                                 np.random.default_rng(0))
    names = [s.name for s in build_signal_map(plant.params).measurements]
    motor = plant.params.motor_names[0]
    i_count, i_time = names.index(f"{motor}.encoder_count"), names.index(
        f"{motor}.encoder_edge_time_us")
    counts, times = [], []
    sampler.sample(1e-3, DriverDemand())  # y_0 at t_0, as the rig sends it
    for _ in range(frames):
        plant.advance(None)
        y = sampler.sample(1e-3, DriverDemand())
        counts.append(int(y[i_count]))
        times.append(int(y[i_time]))
    return np.array(counts), np.array(times), sampler.encoders.edges_per_rev


@pytest.mark.parametrize("speed", [2.0, 30.0, 150.0])  # rad/s: 0.3 to 25 edges a frame
def test_period_method_speed_within_the_capture_quantisation(speed: float) -> None:
    counts, times, per_rev = _captures(speed, 400)
    checked = 0
    for a in range(len(counts) - 1):
        b = a + 1
        while b < len(counts) and counts[b] == counts[a]:
            b += 1  # no edge in between: the capture holds
        if b == len(counts):
            break
        assert times[b - 1] == times[a]  # held while no edge came
        edges = (counts[b] - counts[a]) % 65536
        dt = ((times[b] - times[a]) % 65536) * 1e-6
        estimate = edges * 2 * math.pi / per_rev / dt
        assert abs(estimate / speed - 1) <= 1e-6 / dt + 1e-9
        checked += 1
    assert checked > 50


def test_the_count_method_at_low_speed_is_coarse_where_the_period_method_is_not() -> None:
    # at 2 rad/s an edge comes every 3.1 ms: counted over one 1 ms frame the speed reads 0
    # or 6.1 rad/s; the period method, within 1 us / 3.1 ms (0.03 %)
    counts, _, per_rev = _captures(2.0, 50)
    step = 2 * math.pi / per_rev / 1e-3
    per_frame = np.diff(counts) * step
    assert set(np.round(per_frame, 3)) == {0.0, round(step, 3)}
    # and the counts keep the speed on average: within one edge over the 49 frames
    assert per_frame.mean() == pytest.approx(2.0, abs=step / len(per_frame))


def _sampler_with(tmp_path, extra: str):
    """A test bench whose encoders have the imperfections in extra ([sensors.encoder])."""
    from emulator.profiles.reader import load_trainset

    text = TRAINSET.read_text()
    (tmp_path / "trainsets").mkdir()
    (tmp_path / "machines").mkdir()
    (tmp_path / "machines" / MACHINE.name).write_text(MACHINE.read_text())
    out = tmp_path / "trainsets" / TRAINSET.name
    out.write_text(text.replace("lines_per_rev = 256\n", "lines_per_rev = 256\n" + extra, 1))
    return load_trainset(out).sensors


def _captures_with(sensors, speed: float, frames: int):
    plant = Plant.test_bench(load_machine(MACHINE), frame_s=1e-3)
    plant.impose_speed(0, speed)
    smap = build_signal_map(plant.params)
    sampler = MeasurementSampler(plant, smap, sensors, np.random.default_rng(0))
    names = [s.name for s in smap.measurements]
    motor = plant.params.motor_names[0]
    i_count, i_time = names.index(f"{motor}.encoder_count"), names.index(
        f"{motor}.encoder_edge_time_us")
    counts, times = [], []
    sampler.sample(1e-3, DriverDemand())
    for _ in range(frames):
        plant.advance(None)
        y = sampler.sample(1e-3, DriverDemand())
        counts.append(int(y[i_count]))
        times.append(int(y[i_time]))
    return np.array(counts), np.array(times), sampler.encoders


def test_eccentricity_gives_a_once_per_revolution_speed_ripple(tmp_path) -> None:
    """A disc off centre by e (rad of angle, peak) reads theta + e sin(theta): the period
    method's speed is w (1 + e cos theta), a ripple of +-e once per revolution, by hand."""
    sensors = _sampler_with(tmp_path, "eccentricity_arcmin = 60.0\n")
    e = math.radians(1.0)
    speed = 30.0
    counts, times, enc = _captures_with(sensors, speed, 600)  # 2.9 revolutions
    estimates, mid = [], []
    elapsed = times[0] + np.concatenate([[0], np.cumsum(np.diff(times) % 65536)])
    for a in range(len(counts) - 1):
        edges = (counts[a + 1] - counts[a]) % 65536
        dt = ((times[a + 1] - times[a]) % 65536) * 1e-6
        if edges and dt:
            estimates.append(edges * 2 * math.pi / enc.edges_per_rev / dt / speed - 1)
            mid.append(speed * 0.5e-6 * (elapsed[a] + elapsed[a + 1]))
    ripple = np.array(estimates)
    # over ~1 ms the ripple's average differs from its peak by under 0.1 %, and each
    # capture adds at most 1 us / 1 ms: +-e within 0.3 % of e plus 1e-3
    assert ripple.max() == pytest.approx(e, abs=3e-3 * e + 1e-3)
    assert ripple.min() == pytest.approx(-e, abs=3e-3 * e + 1e-3)
    # once per revolution: the ripple is e cos(theta) at the shaft angle of each
    # interval's middle (a least-squares fit; each estimate within 1e-3, so each
    # coefficient within 2e-3 whatever the errors' pattern)
    (cos_part, sin_part), *_ = np.linalg.lstsq(
        np.column_stack([np.cos(mid), np.sin(mid)]), ripple, rcond=None)
    assert cos_part == pytest.approx(e, abs=2e-3)
    assert abs(sin_part) <= 2e-3


@pytest.mark.parametrize("speed", [2.0, 30.0, 150.0])  # rad/s: 0.3 to 25 edges a frame
def test_pitch_errors_move_each_edge_by_its_own_fraction(tmp_path, speed: float) -> None:
    """Each edge j is crossed at (j + pitch_j) edge pitches: the capture of the last edge
    of each frame is there, within the timer's microsecond before it (the shaft's speed
    is held, so its angle is exactly linear in time)."""
    sensors = _sampler_with(tmp_path, "pitch_error_pct = 5.0\n")
    counts, times, enc = _captures_with(sensors, speed, 300)
    pitch = enc.pitch[0]
    # the draw's 5 % rms over 1024 edges: the standard error of an rms of n normal
    # draws is about rms / sqrt(2 n) = 0.0011; four of them
    assert pitch.std() == pytest.approx(0.05, abs=4 * 0.05 / math.sqrt(2 * len(pitch)))
    edge_rad = 2 * math.pi / enc.edges_per_rev
    checked = 0
    for a in range(1, len(counts)):
        if counts[a] != counts[a - 1]:
            j = counts[a]  # the edge just crossed (the count after it)
            t_edge = (j + pitch[j % enc.edges_per_rev]) * edge_rad / speed
            off = (times[a] - t_edge * 1e6 + 32768) % 65536 - 32768  # the timer wraps
            assert -1.0 - 1e-6 < off <= 1e-6
            checked += 1
    assert checked > 50


def test_a_first_sample_with_a_whole_number_period_changes_no_later_sample() -> None:
    """The sampler's call is bound at its first sample (kernel_cache.entry_point): a first
    period given as the integer 1 samples as 1.0 does, and the later frames' sub-steps
    (floats) are not truncated to an integer by it (a sub-step of 0 had divided by zero)."""
    ys = []
    for first in (1, 1.0):
        plant = Plant.test_bench(load_machine(MACHINE), frame_s=1e-3)
        plant.impose_speed(0, 30.0)
        sampler = MeasurementSampler(plant, build_signal_map(plant.params), None,
                                     np.random.default_rng(0))
        run = [sampler.sample(first, DriverDemand()).copy()]
        for _ in range(20):
            plant.advance(None)
            run.append(sampler.sample(1e-3, DriverDemand()).copy())
        ys.append(np.array(run))
    assert ys[0].tobytes() == ys[1].tobytes()
