"""Between the plant and the telegrams: measurements in map order, commands to the plant.

:class:`MeasurementSampler` reads the plant's state at the sampling instant through the
sensor chains into a vector ordered as the signal map's measurements;
:class:`CommandMapper` turns a received command vector into the plant's commands and the
controller's train-interface replies.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numba as nb
import numpy as np

from emulator.plant import Commands, Plant
from emulator.plant.layout import (
    IS_IA,
    IS_IB,
    IS_IC,
    IS_T_H,
    LS_UDC,
    MS_OMEGA_M,
    MS_T_STATOR,
    MS_THETA_M,
)
from emulator.sensors import AnalogChannels, Encoders, SensorParams
from emulator.signals import SignalMap

KELVIN = 273.15


@dataclass
class DriverDemand:
    """What the train asks of the traction controller (the train-interface inputs)."""

    effort_demand: float = 0.0  # fraction of maximum, negative brakes
    direction: int = 1
    mode: int = 0  # see emulator.signals.MODES
    cruise_speed_kmh: float = 0.0
    neutral_section_ahead: int = 0
    regeneration_allowed: int = 1
    current_limit_a: float = 1000.0
    emergency_loop_closed: int = 1

    def values(self) -> list[float]:
        """In the order of the signal map's train.* measurements."""
        return [self.effort_demand, self.direction, self.mode, self.cruise_speed_kmh,
                self.neutral_section_ahead, self.regeneration_allowed, self.current_limit_a,
                self.emergency_loop_closed]


assert [f.name for f in fields(DriverDemand)] == [
    "effort_demand", "direction", "mode", "cruise_speed_kmh", "neutral_section_ahead",
    "regeneration_allowed", "current_limit_a", "emergency_loop_closed"]


class MeasurementSampler:
    """Builds y_k from the plant state (never from the command of the same exchange)."""

    def __init__(self, plant: Plant, signal_map: SignalMap, sensors: SensorParams | None,
                 rng: np.random.Generator) -> None:
        self.plant = plant
        sensors = sensors or SensorParams()
        params = plant.params
        n_l, n_i, n_m = plant.n_links, plant.n_inverters, plant.n_motors
        # analog channels in one bank: links, then per inverter 3 currents + heatsink,
        # then per motor speed + stator temperature (the order of _analog_truth)
        specs = ([sensors.voltage] * n_l + ([sensors.current] * 3 + [sensors.temperature])
                 * n_i + [sensors.speed, sensors.temperature] * n_m)
        self.analog = AnalogChannels(specs, rng)
        self.encoders = Encoders(n_m, sensors.encoder_lines)
        self.gate_fault = np.zeros(n_i, dtype=np.int64)  # fault hook
        # where each measurement comes from: positions in the output vector
        names = [s.name for s in signal_map.measurements]
        self._n = len(names)
        analog_pos, count_pos, fault_pos = [], [], []
        for lk in params.dc_links:
            analog_pos.append(names.index(f"{lk.name}.voltage_v"))
        for conv in params.converters:
            for phase in "abc":
                analog_pos.append(names.index(f"{conv.name}.current_{phase}_a"))
            analog_pos.append(names.index(f"{conv.name}.heatsink_temperature_degc"))
            fault_pos.append(names.index(f"{conv.name}.gate_fault"))
        for conv in params.converters:
            for j in range(len(conv.wheel_diameters_m)):
                motor = f"{conv.name}.m{j + 1}"
                analog_pos.append(names.index(f"{motor}.speed_rad_s"))
                analog_pos.append(names.index(f"{motor}.stator_temperature_degc"))
                count_pos.append(names.index(f"{motor}.encoder_count"))
        self._analog_pos = np.array(analog_pos)
        self._count_pos = np.array(count_pos)
        self._fault_pos = np.array(fault_pos)
        self._train_pos = names.index("train.effort_demand")
        self._truth = np.zeros(len(analog_pos))
        self._angle = np.zeros(n_m)
        self._train = np.zeros(8)
        self._out = np.zeros(self._n)

    def sample(self, period_s: float, driver: DriverDemand) -> np.ndarray:
        """The measurement vector (physical units) at the present plant state."""
        out = self._out
        p = self.plant
        _gather(p.lst, p.ist, p.ms, self._truth, self._angle)
        analog = self.analog.sample(self._truth, period_s)
        enc = self.encoders
        self._train[:] = driver.values()
        _assemble(analog, self._analog_pos, self._angle, enc.edges_per_rev / (2 * math.pi),
                  enc.count_offset, enc.COUNTER_MODULUS, self._count_pos, self.gate_fault,
                  self._fault_pos, self._train, self._train_pos, out)
        return out


@nb.njit(cache=True)
def _gather(lst, ist, ms, truth, angle):
    """Plant values in the analog bank's order: links, inverters, motors; and angles."""
    j = 0
    for link in range(lst.shape[0]):
        truth[j] = lst[link, LS_UDC]
        j += 1
    for k in range(ist.shape[0]):
        truth[j] = ist[k, IS_IA]
        truth[j + 1] = ist[k, IS_IB]
        truth[j + 2] = ist[k, IS_IC]
        truth[j + 3] = ist[k, IS_T_H] - KELVIN
        j += 4
    for m in range(ms.shape[0]):
        truth[j] = ms[m, MS_OMEGA_M]
        truth[j + 1] = ms[m, MS_T_STATOR] - KELVIN
        angle[m] = ms[m, MS_THETA_M]
        j += 2


@nb.njit(cache=True)
def _assemble(analog, analog_pos, angle, edges_per_rad, count_offset, modulus, count_pos,
              gate_fault, fault_pos, train, train_pos, out):
    """Scatter the channel outputs, encoder counts, fault flags and demands into y."""
    for i in range(analog.shape[0]):
        out[analog_pos[i]] = analog[i]
    for m in range(angle.shape[0]):
        edges = np.int64(math.floor(angle[m] * edges_per_rad)) + count_offset[m]
        out[count_pos[m]] = edges % modulus
    for k in range(gate_fault.shape[0]):
        out[fault_pos[k]] = gate_fault[k]
    for i in range(train.shape[0]):
        out[train_pos + i] = train[i]


@nb.njit(cache=True)
def _fill_commands(values, duty_pos, gate_pos, gates_allowed, duty, gates):
    for k in range(duty_pos.shape[0]):
        for x in range(3):
            duty[k, x] = values[duty_pos[k, x]]
        gates[k] = gates_allowed and values[gate_pos[k]] >= 0.5


class CommandMapper:
    """Turns a command vector (physical units, map order) into plant commands."""

    def __init__(self, plant: Plant, signal_map: SignalMap) -> None:
        names = [s.name for s in signal_map.commands]
        convs = plant.params.converters
        self._duty_pos = np.array([[names.index(f"{c.name}.duty_{x}") for x in "abc"]
                                   for c in convs])
        self._gate_pos = np.array([names.index(f"{c.name}.gates_enabled") for c in convs])
        self._reply_pos = names.index("tcu.achieved_effort_kn")
        self._cmd = Commands(np.full((len(convs), 3), 0.5), np.zeros(len(convs), dtype=bool))
        self.safe = np.zeros(len(names))
        self.safe[self._duty_pos] = 0.5  # gates blocked, duties at mid

    def commands(self, values: np.ndarray, gates_allowed: bool = True) -> Commands:
        """Plant commands; gates_allowed=False blocks every inverter (rig watchdog).

        Fills the same Commands object every frame (no allocation in the frame loop).
        """
        _fill_commands(values, self._duty_pos, self._gate_pos, gates_allowed,
                       self._cmd.duty, self._cmd.gates_enabled)
        return self._cmd

    def replies(self, values: np.ndarray) -> dict[str, float]:
        """The controller's train-interface replies."""
        p = self._reply_pos
        return {"achieved_effort_kn": float(values[p]),
                "available_effort_kn": float(values[p + 1]),
                "status": int(values[p + 2]), "event_code": int(values[p + 3])}
