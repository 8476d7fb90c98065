"""The measurement chain: what the controller's sensors and ADCs make of the plant state.

Each analog channel: y = saturate(quantise(filter(gain x + offset + noise))), in that
order: transducer gain and offset, white noise from the rig's one seeded generator, a
first-order anti-alias/filter lag (exact discretisation over the frame, y += (1 - e^(-T/tau))
(x - y)), the converter's input range, then the ADC's step (range / 2^bits). Encoders
count edges (4 per line, quadrature) into an unsigned 16-bit counter that wraps, as a
board's timer does; a controller derives speed from count differences over its period.

Fault hooks (used by the fault catalogue): per channel an extra gain, an extra offset
and a stuck value (NaN: not stuck); per encoder a count offset. Measurements depend only
on the plant state, never on the command of the same exchange.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba as nb
import numpy as np


@dataclass(frozen=True)
class ChannelSpec:
    """Sensor and ADC of one kind of analog channel (SI units)."""

    gain: float = 1.0
    offset: float = 0.0
    noise_rms: float = 0.0
    filter_s: float = 0.0
    range_lo: float = -math.inf
    range_hi: float = math.inf
    adc_bits: int = 0  # 0: not quantised

    @property
    def lsb(self) -> float:
        """ADC step, in the channel's unit (0 when not quantised)."""
        if self.adc_bits <= 0 or not math.isfinite(self.range_hi - self.range_lo):
            return 0.0
        return (self.range_hi - self.range_lo) / 2**self.adc_bits


@dataclass(frozen=True)
class SensorParams:
    """All sensor kinds of a trainset."""

    current: ChannelSpec = ChannelSpec()
    voltage: ChannelSpec = ChannelSpec()
    speed: ChannelSpec = ChannelSpec()
    temperature: ChannelSpec = ChannelSpec()
    line_voltage: ChannelSpec = ChannelSpec()
    line_current: ChannelSpec = ChannelSpec()
    encoder_lines: int = 256
    encoder_eccentricity_rad: float = 0.0  # once-per-revolution angle error, peak
    encoder_pitch_error: float = 0.0  # rms of the edges' misplacement, of an edge pitch
    # a torque transducer on each motor shaft: test benches and instrumented test trains
    # have one, service trains do not (None: not fitted, no signal in the map)
    shaft_torque: ChannelSpec | None = None


class AnalogChannels:
    """A bank of analog channels sampled together once per frame."""

    def __init__(self, specs: list[ChannelSpec], rng: np.random.Generator) -> None:
        self.rng = rng
        self.gain = np.array([s.gain for s in specs])
        self.offset = np.array([s.offset for s in specs])
        self.noise = np.array([s.noise_rms for s in specs])
        self.tau = np.array([s.filter_s for s in specs])
        self.lo = np.array([s.range_lo for s in specs])
        self.hi = np.array([s.range_hi for s in specs])
        self.lsb = np.array([s.lsb for s in specs])
        self._quantised = self.lsb > 0
        self._noisy = bool(np.any(self.noise > 0))
        # fault hooks
        self.fault_gain = np.ones(len(specs))
        self.fault_offset = np.zeros(len(specs))
        self.stuck = np.full(len(specs), np.nan)
        self._state: np.ndarray | None = None
        self._out = np.zeros(len(specs))
        self._no_noise = np.zeros(len(specs))
        self._alpha_for: float = -1.0
        self._alpha = np.zeros(len(specs))

    def set_noise(self, i: int, rms: float) -> None:
        """Channel i's noise, rms in its unit (a fault hook)."""
        self.noise[i] = rms
        self._noisy = bool(np.any(self.noise > 0))

    def sample(self, true_values: np.ndarray, period_s: float) -> np.ndarray:
        """The channel outputs for the plant values at the sampling instant."""
        if period_s != self._alpha_for:
            tau = np.maximum(self.tau, 1e-300)
            self._alpha = np.where(self.tau > 0, np.exp(-period_s / tau), 0.0)
            self._alpha_for = period_s
        normals = (self.rng.standard_normal(len(true_values)) if self._noisy
                   else self._no_noise)
        if self._state is None:
            self._state = np.zeros(len(true_values))
            self._out = np.zeros(len(true_values))
            _chain(true_values, self.gain, self.fault_gain, self.offset, self.fault_offset,
                   self.noise, normals, np.zeros(len(true_values)), self._state, self.lo,
                   self.hi, self.lsb, self.stuck, self._out)
        else:
            _chain(true_values, self.gain, self.fault_gain, self.offset, self.fault_offset,
                   self.noise, normals, self._alpha, self._state, self.lo, self.hi,
                   self.lsb, self.stuck, self._out)
        return self._out


@nb.njit(cache=True)
def _chain(x, gain, fault_gain, offset, fault_offset, noise, normals, alpha, state, lo, hi,
           lsb, stuck, out):
    """gain/offset/noise -> first-order filter -> range -> ADC step -> stuck override."""
    for i in range(x.shape[0]):
        v = x[i] * gain[i] * fault_gain[i] + offset[i] + fault_offset[i] + noise[i] * normals[i]
        state[i] += (1.0 - alpha[i]) * (v - state[i])
        y = min(max(state[i], lo[i]), hi[i])
        if lsb[i] > 0.0:
            y = np.round(y / lsb[i]) * lsb[i]
        out[i] = y if math.isnan(stuck[i]) else stuck[i]


class Encoders:
    """Incremental encoders on the motor shafts: wrapping 16-bit edge counters, and a
    capture of each encoder's last edge time on a free-running 1 MHz 16-bit timer (as a
    board's input-capture unit gives, for the period method of speed measurement).

    The edge time is found within the frame by linear interpolation of the shaft angle
    between two samples (a constant speed over the frame), rounded to the timer's
    microsecond.
    """

    COUNTER_MODULUS = 1 << 16
    CAPTURE_MODULUS = 1 << 16  # microseconds

    def __init__(self, n: int, lines: int, eccentricity_rad: float = 0.0,
                 pitch_error: float = 0.0, rng: np.random.Generator | None = None) -> None:
        self.edges_per_rev = 4 * lines
        self.count_offset = np.zeros(n, dtype=np.int64)  # fault hook: lost pulses
        self.edge_scale = np.ones(n)  # fault hook: wrong pulses per revolution (0: frozen)
        # the discs' imperfections (and a fault hook): a once-per-revolution angle error
        # and each edge's misplacement, a fraction of the edge pitch (within +-0.45, so the
        # edges keep their order)
        self.eccentricity = np.full(n, eccentricity_rad)
        rng = rng or np.random.default_rng(0)
        self.pitch = (np.clip(rng.normal(0.0, pitch_error, (n, self.edges_per_rev)), -0.45,
                              0.45) if pitch_error > 0 else np.zeros((n, 1)))
        self._last_angle: np.ndarray | None = None
        self._last_time = 0.0
        self._capture = np.zeros(n, dtype=np.int64)

    def set_edge_scale(self, i: int, scale: float, angle_rad: float) -> None:
        """Change encoder i's edges per radian without a jump in its count."""
        k = self.edges_per_rev / (2 * math.pi) * angle_rad
        before = math.floor(k * self.edge_scale[i])
        self.edge_scale[i] = scale
        self.count_offset[i] += before - math.floor(k * scale)

    def distort(self, angle_rad: np.ndarray) -> None:
        """Turn shaft angles into the angles the discs show, in place: the nearest edge j
        sits at (j + pitch_j) edge pitches, the whole disc off by e sin(angle)."""
        _distort(angle_rad, self.eccentricity, self.pitch, 2 * math.pi / self.edges_per_rev)

    def captures(self, angle_rad: np.ndarray, time_s: float) -> np.ndarray:
        """The edge-time captures (us, wrapping) after a sample of the shaft angles at
        plant time time_s; an encoder without an edge since the last sample keeps its
        capture."""
        if self._last_angle is None:
            self._last_angle = angle_rad.copy()
            self._last_time = time_s
            self._capture = np.zeros(len(angle_rad), dtype=np.int64)
        _captures(angle_rad, self._last_angle, time_s, self._last_time,
                  self.edges_per_rev / (2 * math.pi), self.edge_scale, self.CAPTURE_MODULUS,
                  self._capture)
        self._last_angle[:] = angle_rad
        self._last_time = time_s
        return self._capture

    def counts(self, angle_rad: np.ndarray) -> np.ndarray:
        """Counter values for the shaft angles (unwrapped, rad)."""
        out = np.empty(len(angle_rad), dtype=np.int64)
        _counts(angle_rad, self.edges_per_rev / (2 * math.pi), self.edge_scale,
                self.count_offset, self.COUNTER_MODULUS, out)
        return out


@nb.njit(cache=True)
def _counts(angle, edges_per_rad, scale, offset, modulus, out):
    for i in range(angle.shape[0]):
        out[i] = (np.int64(math.floor(angle[i] * edges_per_rad * scale[i])) + offset[i]) % modulus


@nb.njit(cache=True)
def _captures(angle, last, t, t_last, edges_per_rad, scale, modulus, capture):
    """Update each capture with the time of the last edge crossed since the last sample
    (angle linear in time between the samples)."""
    for i in range(angle.shape[0]):
        k = edges_per_rad * scale[i]
        if k <= 0.0 or angle[i] == last[i]:
            continue
        now = math.floor(angle[i] * k)
        before = math.floor(last[i] * k)
        if now == before:
            continue
        # the last edge crossed: entering edge `now` going up, leaving edge `now + 1`
        # going down
        edge = now if angle[i] > last[i] else now + 1
        frac = (edge / k - last[i]) / (angle[i] - last[i])
        t_edge = t_last + frac * (t - t_last)
        capture[i] = np.int64(math.floor(t_edge * 1e6 + 0.5)) % modulus


@nb.njit(cache=True)
def _distort(angle, eccentricity, pitch, edge_rad):
    for i in range(angle.shape[0]):
        a = angle[i] + eccentricity[i] * math.sin(angle[i])
        if pitch.shape[1] > 1:
            nearest = np.int64(math.floor(a / edge_rad + 0.5)) % pitch.shape[1]
            a -= pitch[i, nearest] * edge_rad
        angle[i] = a
