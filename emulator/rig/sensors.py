"""The measurement chain: what the controller's sensors and ADCs make of the plant state.

Each analog channel, in this order: transducer gain and offset; a first-order
anti-alias/filter lag integrated through every sub-step of the frame (the plant probes
the channel's value at each sub-step; the filter is stepped exactly for an input linear
between sub-steps, so a filter keeps its lag whatever the frame, and one shorter than
the frame does not vanish); the sample the board takes, either at an instant (the
exchange, or a stated age before it, as a board sampling at a point of its PWM carrier)
or the mean over the frame (as a board averaging its samples over the period); white
noise on the sample, from the rig's one seeded generator (noise_rms is what the board
sees on its samples, for a frame average the noise of that average: a board averaging N
conversions has 1/sqrt N of one conversion's); the converter's input range; the ADC's
step (range / 2^bits), its top code one step below the range's top.
Encoders count edges (4 per line, quadrature) into an unsigned 16-bit counter that
wraps, as a board's timer does; a controller derives speed from count differences over
its period.

Fault hooks (used by the fault catalogue): per channel an extra gain, an extra offset
and a stuck value (NaN: not stuck); per encoder a count offset. Measurements depend only
on the plant state, never on the command of the same exchange.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME


@dataclass(frozen=True)
class ChannelSpec:
    """Sensor and ADC of one kind of analog channel (SI units)."""

    gain: float = 1.0
    offset: float = 0.0
    noise_rms: float = 0.0
    filter_s: float = 0.0
    frame_average: bool = False  # the mean over the frame, else an instantaneous sample
    sample_age_s: float = 0.0  # an instantaneous sample's age at the exchange
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


# the rows of a bank's channel table (one column a channel)
(C_GAIN, C_FAULT_GAIN, C_OFFSET, C_FAULT_OFFSET, C_DECAY, C_SLOPE, C_INPUT, C_FILTERED,
 C_AVERAGE, C_AGE, C_NOISE, C_LO, C_HI, C_LSB, C_STUCK, C_NORMAL, N_ROWS) = range(17)

#: frames of noise drawn at once. The generator lets go of the GIL while it draws, and
#: taking it back while another thread (the recorder's writer) waits for it cost 19 us a
#: frame against 1.7 us for the draw itself (measured, the full-braking scenario); drawn
#: in batches the values and their order are the same (one stream, read in order).
NOISE_BATCH = 128


class AnalogChannels:
    """A bank of analog channels, filtered through the frame and sampled once per frame.

    The channels' data sit in one table, a row each (C_*), which the compiled chain
    takes whole; the named attributes are views of its rows (the fault hooks write
    through them)."""

    def __init__(self, specs: list[ChannelSpec], rng: np.random.Generator) -> None:
        self.rng = rng
        n = len(specs)
        self.table = np.zeros((N_ROWS, n))
        t = self.table
        t[C_GAIN] = [s.gain for s in specs]
        t[C_FAULT_GAIN] = 1.0
        t[C_OFFSET] = [s.offset for s in specs]
        t[C_NOISE] = [s.noise_rms for s in specs]
        t[C_LO] = [s.range_lo for s in specs]
        t[C_HI] = [s.range_hi for s in specs]
        t[C_LSB] = [s.lsb for s in specs]
        t[C_AVERAGE] = [s.frame_average for s in specs]
        t[C_AGE] = [s.sample_age_s for s in specs]
        t[C_STUCK] = np.nan
        self.tau = np.array([s.filter_s for s in specs])
        self.gain, self.offset, self.noise = t[C_GAIN], t[C_OFFSET], t[C_NOISE]
        self.lo, self.hi, self.lsb = t[C_LO], t[C_HI], t[C_LSB]
        # fault hooks: an extra gain and offset, a stuck value (NaN: not stuck)
        self.fault_gain, self.fault_offset, self.stuck = (t[C_FAULT_GAIN], t[C_FAULT_OFFSET],
                                                          t[C_STUCK])
        self._noisy = bool(np.any(self.noise > 0))
        self.normals = np.zeros((NOISE_BATCH, n))  # drawn ahead, used a row a frame
        self._next_normal = NOISE_BATCH
        self._started = False
        self._out = np.zeros(n)
        self._coeffs_for: float = -1.0

    def set_noise(self, i: int, rms: float) -> None:
        """Channel i's noise, rms in its unit (a fault hook)."""
        self.noise[i] = rms
        self._noisy = bool(np.any(self.noise > 0))

    def prepare(self, h: float) -> bool:
        """The filters' coefficients for sub-steps of length h and this frame's noise,
        in the table; True for the first sample of a run (the filters start settled at
        their input)."""
        settle, row = self.draw(h)
        self.table[C_NORMAL] = self.normals[row] if row >= 0 else 0.0
        return settle

    def draw(self, h: float) -> tuple[bool, int]:
        """prepare() but for the noise's copy into the table's C_NORMAL row: returns
        (settle, the row of ``normals`` that is this frame's noise, -1 for none), for a
        compiled caller that copies it (the rig's sampler)."""
        if h != self._coeffs_for:
            t = self.table
            t[C_DECAY], t[C_SLOPE] = _filter_coefficients(self.tau, h)
            self._coeffs_for = h
        row = -1
        if self._noisy:
            row = self._next_normal
            if row == NOISE_BATCH:
                self.rng.standard_normal(out=self.normals)
                row = 0
            self._next_normal = row + 1
        settle = not self._started
        self._started = True
        return settle, row

    def sample(self, trace: np.ndarray, h: float) -> np.ndarray:
        """The channel outputs after a frame whose sub-steps of length h ended with the
        plant values trace[0], trace[1], ..., trace[-1] (the last row: the values at the
        sampling instant that ends the frame). The first call starts every filter settled
        at its input. (The rig's sampler calls the same chain inside one compiled call.)"""
        settle = self.prepare(h)
        if settle:
            trace = trace[-1:]
        _chain(trace, h, self.table, self._out, settle)
        return self._out


def _filter_coefficients(tau: np.ndarray, h: float) -> tuple[np.ndarray, np.ndarray]:
    """Exact step of tau dy/dt = x - y over h for an input linear between its samples
    x0 -> x1 (first-order hold; e.g. Franklin, Powell & Workman, *Digital Control of
    Dynamic Systems*, ch. 6, ramp-invariant discretisation):

        y1 = a y0 + (1 - a) x1 + c (x1 - x0),  a = e^(-h/tau),  c = a - (tau/h)(1 - a)

    A channel without a filter (tau = 0) passes its input: a = c = 0."""
    safe = np.where(tau > 0, tau, 1.0)
    a = np.where(tau > 0, np.exp(-h / safe), 0.0)
    c = np.where(tau > 0, a - safe / h * (1.0 - a), 0.0)
    return a, c


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _chain(trace, h, t, out, settle):
    """Per channel (a column of the table t): gain and offset, the filter through every
    sub-step, the sample (at its instant, or the frame's mean by the trapezoidal rule),
    then noise, the converter's range, the ADC step and a stuck value. settle: the filter
    starts settled at the first row's input (the first sample of a run)."""
    n = trace.shape[0]
    frame = n * h
    for i in range(trace.shape[1]):
        gain = t[C_GAIN, i] * t[C_FAULT_GAIN, i]
        offset = t[C_OFFSET, i] + t[C_FAULT_OFFSET, i]
        decay, slope = t[C_DECAY, i], t[C_SLOPE, i]
        if settle:
            t[C_INPUT, i] = t[C_FILTERED, i] = trace[0, i] * gain + offset
        x0 = t[C_INPUT, i]
        y0 = t[C_FILTERED, i]
        mean = 0.0
        at = frame - min(t[C_AGE, i], frame)  # the sampling instant, from the frame's start
        sampled = 0.0
        found = False
        for s in range(n):
            x1 = trace[s, i] * gain + offset
            y1 = decay * y0 + (1.0 - decay) * x1 + slope * (x1 - x0)
            mean += 0.5 * (y0 + y1)
            if not found and at <= (s + 1) * h:
                sampled = y0 + (y1 - y0) * (at - s * h) / h
                found = True
            x0, y0 = x1, y1
        t[C_INPUT, i] = x0
        t[C_FILTERED, i] = y0
        y = mean / n if t[C_AVERAGE, i] > 0.5 else sampled
        y += t[C_NOISE, i] * t[C_NORMAL, i]
        lo, hi, lsb = t[C_LO, i], t[C_HI, i], t[C_LSB, i]
        y = min(max(y, lo), hi)
        if lsb > 0.0:
            # the ADC's codes are lo + k lsb, k = 0 .. 2^bits - 1: the top of the range
            # reads one step below it
            y = min(np.round(y / lsb) * lsb, hi - lsb)
        stuck = t[C_STUCK, i]
        out[i] = y if math.isnan(stuck) else stuck


class Encoders:
    """Incremental encoders on the motor shafts: wrapping 16-bit edge counters, and a
    capture of each encoder's last edge time on a free-running 1 MHz 16-bit timer (as a
    board's input-capture unit gives, for the period method of speed measurement).

    The edge time is found within the frame by linear interpolation of the shaft angle
    between two samples (a constant speed over the frame); the capture is the timer's
    count at that time (truncated to its microsecond, as an input capture latches it).
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
        # the last sample's shaft and disc angles and time, which the captures start
        # from (kept by the sampler's compiled call, rig/sampling.py; None: none yet)
        self._last_angle: np.ndarray | None = None
        self._last_disc = np.zeros(n)
        self._last_time = 0.0
        self._capture = np.zeros(n, dtype=np.int64)

    def set_edge_scale(self, i: int, scale: float, angle_rad: float) -> None:
        """Change encoder i's edges per radian without a jump in its count."""
        k = self.edges_per_rev / (2 * math.pi) * angle_rad
        before = math.floor(k * self.edge_scale[i])
        self.edge_scale[i] = scale
        self.count_offset[i] += before - math.floor(k * scale)

    def counts(self, angle_rad: np.ndarray) -> np.ndarray:
        """Counter values for the shaft angles (unwrapped, rad)."""
        out = np.empty(len(angle_rad), dtype=np.int64)
        _counts(angle_rad, self.edges_per_rev / (2 * math.pi), self.edge_scale,
                self.count_offset, self.COUNTER_MODULUS, out)
        return out


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _counts(angle, edges_per_rad, scale, offset, modulus, out):
    for i in range(angle.shape[0]):
        out[i] = (np.int64(math.floor(angle[i] * edges_per_rad * scale[i])) + offset[i]) % modulus


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _captures(shaft, last, disc, last_disc, t, t_last, edges_per_rad, scale, eccentricity,
              pitch, edge_rad, modulus, capture):
    """Update each capture with the time of the last edge crossed since the last sample.

    The edge is found on the disc's angles (as counted); the shaft angle at which it
    passes the read head is its place on the disc, (j + pitch_j) edge pitches, less the
    eccentricity's e sin(theta) (solved by a few fixed-point steps, |e| << 1); its time
    follows with the shaft angle linear in time between the samples."""
    for i in range(shaft.shape[0]):
        k = edges_per_rad * scale[i]
        if k <= 0.0 or disc[i] == last_disc[i] or shaft[i] == last[i]:
            continue
        now = math.floor(disc[i] * k)
        before = math.floor(last_disc[i] * k)
        if now == before:
            continue
        # the last edge crossed: entering edge `now` going up, leaving edge `now + 1`
        # going down
        edge = now if disc[i] > last_disc[i] else now + 1
        place = edge / k
        if pitch.shape[1] > 1:
            nearest = np.int64(math.floor(place / edge_rad + 0.5)) % pitch.shape[1]
            place += pitch[i, nearest] * edge_rad
        theta = place
        if eccentricity[i] != 0.0:  # (a true disc: theta is place, no sine needed)
            for _ in range(4):
                theta = place - eccentricity[i] * math.sin(theta)
        frac = min(max((theta - last[i]) / (shaft[i] - last[i]), 0.0), 1.0)
        t_edge = t_last + frac * (t - t_last)
        # the timer's count when the edge latches it (1e-6 us: round-off at a tick)
        capture[i] = np.int64(math.floor(t_edge * 1e6 + 1e-6)) % modulus


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _distort(angle, eccentricity, pitch, edge_rad):
    """Turn shaft angles into the angles the discs show, in place: the nearest edge j
    sits at (j + pitch_j) edge pitches, the whole disc off by e sin(angle)."""
    for i in range(angle.shape[0]):
        a = angle[i]
        if eccentricity[i] != 0.0:  # (a true disc shows the shaft's angle: no sine)
            a += eccentricity[i] * math.sin(a)
        if pitch.shape[1] > 1:
            nearest = np.int64(math.floor(a / edge_rad + 0.5)) % pitch.shape[1]
            a -= pitch[i, nearest] * edge_rad
        angle[i] = a
