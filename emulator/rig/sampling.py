"""Between the plant and the measurement telegram: measurements in map order.

:class:`MeasurementSampler` reads the plant's state at the sampling instant through the
sensor chains into a vector ordered as the signal map's measurements, with the train's
demands (:class:`DriverDemand`). The other way, commands to the plant:
command_mapping.py.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME, entry_point
from emulator.plant import Plant
from emulator.plant.layout import (
    IS_HW_TRIP,
    IS_IA,
    IS_IB,
    IS_IC,
    IS_T_H,
    LS2_I,
    LS2_LINE,
    LS2_PRE,
    LS_OVP,
    LS_UDC,
    MS_OMEGA_M,
    MS_SHAFT_TORQUE,
    MS_T_STATOR,
    MS_THETA_M,
    SS_BREAKER,
    SS_IP,
    SS_LINE_TRIP,
    SS_UP,
)
from emulator.plant.probe import (
    SRC_INVERTER,
    SRC_LINE_CONVERTER,
    SRC_LINK,
    SRC_MOTOR,
    SRC_SUPPLY,
    probe_values,
)
from emulator.protocol.signal_map import SignalMap
from emulator.rig.sensors import (
    C_NORMAL,
    AnalogChannels,
    Encoders,
    SensorParams,
    _captures,
    _chain,
    _distort,
)

KELVIN = 273.15
HARDWARE_TRIP_BIT = 8  # bit 3 of a gate_fault measurement: the latched hardware trip


@dataclass
class DriverDemand:
    """What the train asks of the traction controller (the train-interface inputs)."""

    effort_demand: float = 0.0  # fraction of maximum, negative brakes
    direction: int = 1
    mode: int = 0  # see emulator.protocol.signal_map.MODES
    cruise_speed_kmh: float = 0.0
    neutral_section_ahead: int = 0
    regeneration_allowed: int = 1
    current_limit_a: float = 1000.0
    emergency_loop_closed: int = 1

    def write_into(self, out: memoryview) -> None:
        """Into out (a memoryview of 8 doubles), in the order of the signal map's train.*
        measurements (item by item: a third of the cost of a list into an array)."""
        out[0], out[1], out[2] = self.effort_demand, self.direction, self.mode
        out[3], out[4] = self.cruise_speed_kmh, self.neutral_section_ahead
        out[5], out[6] = self.regeneration_allowed, self.current_limit_a
        out[7] = self.emergency_loop_closed


assert [f.name for f in fields(DriverDemand)] == [
    "effort_demand", "direction", "mode", "cruise_speed_kmh", "neutral_section_ahead",
    "regeneration_allowed", "current_limit_a", "emergency_loop_closed"]



class MeasurementSampler:
    """Builds y_k from the plant state (never from the command of the same exchange).

    A gather plan, made once from the signal map, says for every measured value which
    state array, row and column it comes from; analog values then pass the sensor chain,
    flags go through as they are. The analog values are also the plant's probes: the
    sensor chain sees them at every sub-step of the frame (its filters act through the
    frame, and a channel may be sampled before the frame's end or averaged over it).
    """

    def __init__(self, plant: Plant, signal_map: SignalMap, sensors: SensorParams | None,
                 rng: np.random.Generator) -> None:
        self.plant = plant
        sensors = sensors or SensorParams()
        params = plant.params
        names = [s.name for s in signal_map.measurements]
        analog: list[tuple] = []
        flags: list[tuple] = []
        if plant.line_side:
            analog.append(("line.voltage_v", SRC_SUPPLY, 0, SS_UP, 0.0, sensors.line_voltage))
            analog.append(("line.current_a", SRC_SUPPLY, 0, SS_IP, 0.0, sensors.line_current))
            flags.append(("line.breaker_closed", SRC_SUPPLY, 0, SS_BREAKER))
            flags.append(("line.overcurrent_trip", SRC_SUPPLY, 0, SS_LINE_TRIP))
            for k, unit in enumerate(params.line_converters):
                analog.append((f"{unit.name}.current_a", SRC_LINE_CONVERTER, k, LS2_I, 0.0,
                               sensors.current))
                flags.append((f"{unit.name}.precharge_closed", SRC_LINE_CONVERTER, k, LS2_PRE))
                flags.append((f"{unit.name}.line_contactor_closed", SRC_LINE_CONVERTER, k,
                              LS2_LINE))
        for link, lk in enumerate(params.dc_links):
            analog.append((f"{lk.name}.voltage_v", SRC_LINK, link, LS_UDC, 0.0,
                           sensors.voltage))
            if plant.line_side:
                flags.append((f"{lk.name}.overvoltage", SRC_LINK, link, LS_OVP))
        m = 0
        for k, conv in enumerate(params.converters):
            for x, col in zip("abc", (IS_IA, IS_IB, IS_IC), strict=True):
                analog.append((f"{conv.name}.current_{x}_a", SRC_INVERTER, k, col, 0.0,
                               sensors.current))
            analog.append((f"{conv.name}.heatsink_temperature_degc", SRC_INVERTER, k, IS_T_H,
                           -KELVIN, sensors.temperature))
            for j in range(len(conv.wheel_diameters_m)):
                motor = f"{conv.name}.m{j + 1}"
                analog.append((f"{motor}.speed_rad_s", SRC_MOTOR, m, MS_OMEGA_M, 0.0,
                               sensors.speed))
                analog.append((f"{motor}.stator_temperature_degc", SRC_MOTOR, m, MS_T_STATOR,
                               -KELVIN, sensors.temperature))
                if sensors.shaft_torque is not None:
                    analog.append((f"{motor}.shaft_torque_nm", SRC_MOTOR, m, MS_SHAFT_TORQUE,
                                   0.0, sensors.shaft_torque))
                m += 1
        plan = analog + [(*f, 0.0) for f in flags]
        self.analog_names = [a[0] for a in analog]  # fault targets: the analog channels
        self.analog = AnalogChannels([a[5] for a in analog], rng)
        self._plan = (np.array([p[1] for p in plan], dtype=np.int64),
                      np.array([p[2] for p in plan], dtype=np.int64),
                      np.array([p[3] for p in plan], dtype=np.int64),
                      np.array([p[4] for p in plan], dtype=np.float64))
        self._n_analog = len(analog)
        plant.probes.set(*(p[:len(analog)] for p in self._plan[:3]))
        self._offsets = self._plan[3][:len(analog)].copy()
        self._sampled_frame = -1
        self._analog_pos = np.array([names.index(a[0]) for a in analog], dtype=np.int64)
        self._flag_pos = np.array([names.index(f[0]) for f in flags], dtype=np.int64)
        self.encoders = Encoders(plant.n_motors, sensors.encoder_lines,
                                 sensors.encoder_eccentricity_rad, sensors.encoder_pitch_error,
                                 np.random.default_rng(rng.integers(2**31))
                                 if sensors.encoder_pitch_error > 0 else None)
        self.gate_fault = np.zeros(plant.n_inverters, dtype=np.int64)  # fault hook
        self._count_pos = np.array([names.index(f"{m}.encoder_count")
                                    for m in params.motor_names], dtype=np.int64)
        self._capture_pos = np.array([names.index(f"{m}.encoder_edge_time_us")
                                      for m in params.motor_names], dtype=np.int64)
        self._fault_pos = np.array([names.index(f"{c.name}.gate_fault")
                                    for c in params.converters], dtype=np.int64)
        self._train_pos = names.index("train.effort_demand")
        self._values = np.zeros(len(plan))
        self._angle = np.zeros(plant.n_motors)
        self._shaft = np.zeros(plant.n_motors)
        self._train = np.zeros(8)
        self._train_items = memoryview(self._train)  # (DriverDemand.write_into)
        #: y goes into these in turn, so the one sample() returned stays as it was
        #: through the next sample (a rig that ran a frame ahead says it again)
        self._outs = (np.zeros(len(names)), np.zeros(len(names)))
        self._turn = 0  # the one that took the last sample
        self._fixed_args: tuple | None = None  # _frame_args's arrays, once asked for
        self._sample_frame = None  # _sample_frame, bound at the first sample

    def warm_up(self) -> None:
        """Compile or load the sample's one call, on copies: nothing of the sampler or
        the plant changes."""
        n, motors = self._n_analog, self.plant.n_motors
        args = self._frame_args(np.zeros((2, n)), 2, 1e-4, False, -1, np.zeros(motors),
                                np.zeros(motors), True)
        _sample_frame(*(a.copy() if isinstance(a, np.ndarray) else a for a in args))

    def _frame_args(self, trace, rows, h, settle, noise_row, last_angle, last_disc,
                    first) -> tuple:
        """The arguments of _sample_frame (the live arrays, but for those given)."""
        if self._fixed_args is None:  # the arrays are made once (the plant's in build.py,
            # these in __init__); faults write into them, never replace them
            p, analog, enc = self.plant, self.analog, self.encoders
            src, row, col, off = self._plan
            self._fixed_args = (
                (src, row, col, off, p.ss, p.ls2, p.lst, p.ist, p.ms, self._values,
                 self._angle, self._shaft),
                (self._offsets,),
                (analog.normals, analog.table, analog._out, enc.eccentricity, enc.pitch,
                 2 * math.pi / enc.edges_per_rev, enc.edges_per_rev / (2 * math.pi),
                 enc.edge_scale, enc.count_offset, enc.COUNTER_MODULUS, self._count_pos,
                 self._analog_pos, self._flag_pos, self.gate_fault, self._fault_pos,
                 self._train, self._train_pos),
                tuple((enc.CAPTURE_MODULUS, enc._capture, self._capture_pos, out)
                      for out in self._outs))
        a, b, c, d = self._fixed_args
        return (*a, trace, rows, *b, h, settle, noise_row, *c, first, last_angle, last_disc,
                self.plant.time_s, self.encoders._last_time, *d[self._turn])

    def sample(self, period_s: float, driver: DriverDemand) -> np.ndarray:
        """The measurement vector (physical units) at the present plant state: in one of
        two arrays taken in turn, so it holds until the sample after next."""
        p, probes, enc = self.plant, self.plant.probes, self.encoders
        if probes.frame == p.frames and self._sampled_frame == p.frames - 1:
            # one frame since the last sample: its sub-steps, the last at this instant
            trace, rows, h = probes.trace, probes.n_sub, probes.h
        else:  # a first sample, or frames the chain did not see: the present values
            trace, rows = self._values[:self._n_analog].reshape(1, -1), 1
            h = float(period_s)  # (the sample's call is bound to a float h)
        self._sampled_frame = p.frames
        settle, noise_row = self.analog.draw(h)  # coefficients and this frame's noise
        first = enc._last_angle is None  # the captures start here (none yet)
        if first:
            enc._last_angle, enc._last_disc = np.zeros(p.n_motors), np.zeros(p.n_motors)
        driver.write_into(self._train_items)
        self._turn ^= 1
        args = self._frame_args(trace, rows, h, settle, noise_row, enc._last_angle,
                                enc._last_disc, first)
        sample_frame = self._sample_frame
        if sample_frame is None:  # for these arrays (kernel_cache.entry_point)
            sample_frame = self._sample_frame = entry_point(_sample_frame, *args)
        sample_frame(*args)
        enc._last_time = p.time_s
        return self._outs[self._turn]


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _sample_frame(src, row, col, off, ss, ls2, lst, ist, ms, values, angle, shaft, trace,
                  rows, offsets, h, settle, noise_row, normals, table, analog, eccentricity,
                  pitch, edge_rad, edges_per_rad, edge_scale, count_offset, modulus,
                  count_pos, analog_pos, flag_pos, gate_fault, ist_fault_pos, train,
                  train_pos, first, last_angle, last_disc, time_s, last_time,
                  capture_modulus, capture, capture_pos, out):
    """y from the plant state: gather (the shaft angles too), the frame's trace (its
    first ``rows`` rows) in the measured units (a trace that is a view of the values
    gathered: unchanged), the frame's noise (row noise_row of normals, -1: none) into
    the channel table, the analog chain (settle: the filters start at the last row's
    input), the angles the discs show, y assembled, and the edge captures (first: they
    start here, none latched)."""
    trace = trace[:rows]
    for i in range(table.shape[1]):
        table[C_NORMAL, i] = normals[noise_row, i] if noise_row >= 0 else 0.0
    _gather(src, row, col, off, ss, ls2, lst, ist, ms, values, angle, shaft)
    _complete_trace(trace, offsets, values)
    _chain(trace[trace.shape[0] - 1:] if settle else trace, h, table, analog, settle)
    _distort(angle, eccentricity, pitch, edge_rad)
    n = analog.shape[0]
    _assemble(analog, analog_pos, values[n:], flag_pos, angle, edges_per_rad, edge_scale,
              count_offset, modulus, count_pos, gate_fault, ist, ist_fault_pos, train,
              train_pos, out)
    if not first:  # edges crossed since the last sample
        _captures(shaft, last_angle, angle, last_disc, time_s, last_time, edges_per_rad,
                  edge_scale, eccentricity, pitch, edge_rad, capture_modulus, capture)
    for m in range(shaft.shape[0]):
        last_angle[m] = shaft[m]
        last_disc[m] = angle[m]
    for m in range(capture_pos.shape[0]):
        out[capture_pos[m]] = capture[m]


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _gather(src, row, col, off, ss, ls2, lst, ist, ms, values, angle, shaft):
    """Plant values by the plan, and the shaft angles for the encoders (twice: one copy
    becomes the angles the discs show)."""
    probe_values(src, row, col, ss, ls2, lst, ist, ms, values)
    for i in range(src.shape[0]):
        values[i] += off[i]
    for m in range(ms.shape[0]):
        angle[m] = ms[m, MS_THETA_M]
        shaft[m] = angle[m]


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _complete_trace(trace, offsets, values):
    """The probes' rows in the measured units (the offsets added), the last row the
    values gathered at the sampling instant."""
    n = trace.shape[0]
    for s in range(n - 1):
        for i in range(trace.shape[1]):
            trace[s, i] += offsets[i]
    for i in range(trace.shape[1]):
        trace[n - 1, i] = values[i]


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _assemble(analog, analog_pos, flags, flag_pos, angle, edges_per_rad, edge_scale,
              count_offset, modulus, count_pos, gate_fault, ist, fault_pos, train, train_pos,
              out):
    """Scatter the channel outputs, flags, encoder counts, fault flags and demands into y."""
    for i in range(analog.shape[0]):
        out[analog_pos[i]] = analog[i]
    for i in range(flags.shape[0]):
        out[flag_pos[i]] = flags[i]
    for m in range(angle.shape[0]):
        edges = np.int64(math.floor(angle[m] * edges_per_rad * edge_scale[m])) + count_offset[m]
        out[count_pos[m]] = edges % modulus
    for k in range(gate_fault.shape[0]):
        # bits 0-2 from the fault catalogue's hooks, bit 3 the plant's latched hardware trip
        out[fault_pos[k]] = gate_fault[k] | (HARDWARE_TRIP_BIT if ist[k, IS_HW_TRIP] > 0.5
                                             else 0)
    for i in range(train.shape[0]):
        out[train_pos + i] = train[i]
