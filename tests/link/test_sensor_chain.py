"""The analog measurement chain through the frame: filters stepped at every sub-step,
samples taken at an instant or averaged over the frame.

Sources:
- First-order low-pass frequency response, H(jw) = 1 / (1 + jw tau): phase -atan(w tau),
  gain 1 / sqrt(1 + (w tau)^2) (any control textbook, e.g. Ogata, *Modern Control
  Engineering*, frequency-response analysis). At 50 Hz and tau = 0.5 ms: 8.93 deg.
- Steady-state ramp error of a first-order lag: the output follows a ramp r t at r (t -
  tau) (Ogata, steady-state errors).
- The mean over a window T of a sine of frequency f: gain sin(pi f T) / (pi f T), delay
  T / 2 (the moving-average filter; Oppenheim & Schafer, *Discrete-Time Signal
  Processing*, on its linear phase). At 50 Hz and T = 1 ms: 9.0 deg.
- The rms of N independent normal samples has a relative standard error of about
  1 / sqrt(2 N) (sampling distribution of the standard deviation).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from emulator.plant import Plant
from emulator.plant.layout import IS_IA
from emulator.profiles.reader import PROFILES_DIR, ProfileError, load_machine, load_trainset
from emulator.protocol.signal_map import build_signal_map
from emulator.rig.sampling import DriverDemand, MeasurementSampler
from emulator.rig.sensors import AnalogChannels, ChannelSpec, SensorParams

MACHINE = PROFILES_DIR / "machines" / "tern-tm310.toml"
TRAINSET = PROFILES_DIR / "trainsets" / "tern-25kv.toml"
FRAME = 1e-3
F = 50.0
W = 2 * math.pi * F


def _run(spec: ChannelSpec, signal, substep: float, frames: int = 400, seed: int = 0):
    """(frame-end times, outputs) of one channel fed signal(t) through frames of FRAME cut
    into sub-steps; the first sample at t = 0 starts the filter."""
    bank = AnalogChannels([spec], np.random.default_rng(seed))
    n = round(FRAME / substep)
    h = FRAME / n
    bank.sample(np.array([[signal(0.0)]]), h)
    times, out = [], []
    for k in range(frames):
        t = k * FRAME + h * np.arange(1, n + 1)
        trace = np.array([signal(x) for x in t]).reshape(n, 1)
        out.append(float(bank.sample(trace, h)[0]))
        times.append(t[-1])
    return np.array(times), np.array(out)


def _phase_and_gain(times, values):
    """Phase (rad) and amplitude of the 50 Hz sine fitted to the values at the times."""
    basis = np.column_stack([np.sin(W * times), np.cos(W * times), np.ones_like(times)])
    (a, b, _), *_ = np.linalg.lstsq(basis, values, rcond=None)
    return math.atan2(b, a), math.hypot(a, b)


@pytest.mark.parametrize("substep", [125e-6, 50e-6])  # the Tern's sub-step; a test bench's
def test_first_order_filter_phase_and_gain_at_50_hz(substep: float) -> None:
    tau = 0.5e-3
    times, y = _run(ChannelSpec(filter_s=tau), lambda t: math.sin(W * t), substep)
    keep = times > 0.1  # the filter's start has died away (200 tau)
    phase, gain = _phase_and_gain(times[keep], y[keep])
    expected = math.atan(W * tau)
    assert math.degrees(expected) == pytest.approx(8.93, abs=0.005)
    # the first-order hold's error for a sine is of the order (w h)^2 / 12 < 1e-4 here,
    # so 0.05 deg and 0.1 % are far above the method and far below the 0.5 deg
    assert math.degrees(-phase) == pytest.approx(math.degrees(expected), abs=0.05)
    assert gain == pytest.approx(1 / math.hypot(1, W * tau), rel=1e-3)


def test_a_filter_shorter_than_the_frame_keeps_its_lag() -> None:
    """A 20 us current filter against a ramp, frames of 1 ms in 125 us sub-steps: the
    output lags the ramp by tau (once per frame on point samples it would vanish)."""
    tau, rate = 20e-6, 1e5  # 100 A/ms
    times, y = _run(ChannelSpec(filter_s=tau), lambda t: rate * t, 125e-6, frames=20)
    np.testing.assert_allclose(y[5:], rate * (times[5:] - tau), rtol=0, atol=1e-6)


def test_frame_average_of_a_ramp_is_its_mid_frame_value() -> None:
    rate = 1e5
    times, y = _run(ChannelSpec(frame_average=True), lambda t: rate * t, 125e-6, frames=10)
    np.testing.assert_allclose(y, rate * (times - FRAME / 2), rtol=0, atol=1e-6)


def test_frame_average_of_a_sine_delays_half_a_frame() -> None:
    times, y = _run(ChannelSpec(frame_average=True), lambda t: math.sin(W * t), 125e-6)
    phase, gain = _phase_and_gain(times, y)
    x = math.pi * F * FRAME
    assert math.degrees(-phase) == pytest.approx(math.degrees(W * FRAME / 2), abs=0.05)
    # the trapezoidal mean of a sine over 8 sub-steps: error of order (w h)^2 / 12
    assert gain == pytest.approx(math.sin(x) / x, rel=1e-3)


def test_a_sample_with_an_age_is_the_value_that_long_before_the_exchange() -> None:
    rate = 1e5
    spec = ChannelSpec(sample_age_s=300e-6)  # between two 125 us sub-steps: interpolated
    times, y = _run(spec, lambda t: rate * t, 125e-6, frames=10)
    np.testing.assert_allclose(y, rate * (times - 300e-6), rtol=0, atol=1e-6)


def test_noise_is_what_the_board_sees_on_its_samples() -> None:
    """A heavily filtered channel still shows its stated noise on every sample."""
    n = 4000
    _, y = _run(ChannelSpec(filter_s=1.0, noise_rms=2.0), lambda t: 0.0, 125e-6,
                    frames=n)
    # relative standard error 1/sqrt(2 n) = 1.1 %: 5 % is more than four of them
    assert np.sqrt(np.mean(y ** 2)) == pytest.approx(2.0, rel=0.05)


def _bench(substep: float) -> Plant:
    """One TM-310 locked on a dynamometer, fed 50 Hz from an ideal source."""
    plant = Plant.test_bench(load_machine(MACHINE), substep_s=substep, frame_s=FRAME)
    plant.impose_speed(0, 0.0)
    plant.drive_from_sine(0, 100.0, F)
    return plant


def test_the_plant_probes_each_substep_for_the_chain() -> None:
    """A current sampled half a frame before the exchange equals the phase current a
    twin plant reaches at that instant, advanced in half frames of the same sub-steps.

    The twin's thermal networks step once per half frame, so its winding temperatures
    part from the plant's by 1e-10 K and its currents by about 1e-6 A of a 130 A peak
    (seen); the bound 1e-4 A holds both the frame ends and the mid-frame sample, while an
    interpolation between the frame ends instead of the sub-steps would be off by about
    (w T)^2 / 8 = 1 % of the peak, 1 A."""
    plant, twin = _bench(125e-6), _bench(125e-6)
    sensors = SensorParams(current=ChannelSpec(sample_age_s=FRAME / 2))
    sampler = MeasurementSampler(plant, build_signal_map(plant.params), sensors,
                                 np.random.default_rng(0))
    names = [s.name for s in build_signal_map(plant.params).measurements]
    i_a = names.index(f"{plant.params.converters[0].name}.current_a_a")
    sampler.sample(FRAME, DriverDemand())
    for _ in range(60):
        plant.advance(None)
        measured = sampler.sample(FRAME, DriverDemand())[i_a]
        twin.advance(None, FRAME / 2)
        assert measured == pytest.approx(twin.ist[0, IS_IA], abs=1e-4)
        twin.advance(None, FRAME / 2)
        assert plant.ist[0, IS_IA] == pytest.approx(twin.ist[0, IS_IA], abs=1e-4)


def test_filter_phase_through_the_rig_sampler() -> None:
    """tau = 0.5 ms on the phase current of the locked bench motor at 50 Hz: the sample
    lags the plant's own current by atan(w tau) = 8.9 deg."""
    plant = _bench(125e-6)
    sensors = SensorParams(current=ChannelSpec(filter_s=0.5e-3))
    sampler = MeasurementSampler(plant, build_signal_map(plant.params), sensors,
                                 np.random.default_rng(0))
    names = [s.name for s in build_signal_map(plant.params).measurements]
    i_a = names.index(f"{plant.params.converters[0].name}.current_a_a")
    sampler.sample(FRAME, DriverDemand())
    times, truth, measured = [], [], []
    for _ in range(400):
        plant.advance(None)
        measured.append(sampler.sample(FRAME, DriverDemand())[i_a])
        truth.append(plant.ist[0, IS_IA])
        times.append(plant.time_s)
    keep = np.array(times) > 0.2  # the locked machine's current transient has died away
    t = np.array(times)[keep]
    (phase_true, gain_true), (phase_seen, gain_seen) = (
        _phase_and_gain(t, np.array(x)[keep]) for x in (truth, measured))
    # the issue asks 0.5 deg; the first-order hold on the plant's own sub-steps errs by
    # about (w h)^2 / 12 < 1e-4, so the same 0.05 deg and 0.1 % as the unit test
    assert math.degrees(phase_true - phase_seen) == pytest.approx(
        math.degrees(math.atan(W * 0.5e-3)), abs=0.05)
    assert gain_seen / gain_true == pytest.approx(1 / math.hypot(1, W * 0.5e-3), rel=1e-3)


def test_profile_sampling_keys(tmp_path) -> None:
    text = TRAINSET.read_text()
    averaged = text.replace("[sensors.current]\n", '[sensors.current]\nsampling = '
                            '"frame_average"\n')
    path = tmp_path / "t.toml"
    path.write_text(averaged.replace("../machines/", str(MACHINE.parent) + "/"))
    params = load_trainset(path)
    assert params.sensors.current.frame_average
    assert params.sensors.voltage == dataclasses.replace(
        load_trainset(TRAINSET).sensors.voltage)
    aged = text.replace("[sensors.current]\n", "[sensors.current]\nsample_age_us = 1500.0\n")
    path.write_text(aged.replace("../machines/", str(MACHINE.parent) + "/"))
    with pytest.raises(ProfileError, match="sample_age_us"):
        load_trainset(path)  # older than the 1 ms frame
    both = averaged.replace('"frame_average"\n', '"frame_average"\nsample_age_us = 100.0\n')
    path.write_text(both.replace("../machines/", str(MACHINE.parent) + "/"))
    with pytest.raises(ProfileError, match="only an instantaneous sample"):
        load_trainset(path)


def test_the_noise_is_the_generators_draws_frame_after_frame() -> None:
    """Drawn ahead in batches, the noise is still what one draw a frame of the same
    seeded generator gives, in that order, across a noise switched off and on again
    (a fault's): numpy's own generator is the reference."""
    specs = [ChannelSpec(noise_rms=1.0), ChannelSpec(noise_rms=0.5), ChannelSpec()]
    chain = AnalogChannels(specs, np.random.default_rng(11))
    reference = np.random.default_rng(11)
    trace = np.zeros((2, 3))
    for frame in range(600):  # several batches
        quiet = 200 <= frame < 260
        if frame in (200, 260):
            for i, rms in enumerate((0.0, 0.0) if quiet else (1.0, 0.5)):
                chain.set_noise(i, rms)
        y = chain.sample(trace, 125e-6).copy()
        want = np.zeros(3) if quiet else reference.standard_normal(3) * [1.0, 0.5, 0.0]
        np.testing.assert_array_equal(y, want, err_msg=f"frame {frame}")
