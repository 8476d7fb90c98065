"""Between the command telegram and the plant: a command vector in map order into the
plant's inputs, and the controller's train-interface replies read from it.

:class:`CommandMapper` loads a received command vector into the plant in one compiled
call (``load``: the mapping and the plant's own validating loaders), keeps the mapping
into a Commands object that the plant takes through its own checks as the reference
(``commands``), and reads the replies.
"""

from __future__ import annotations

import numba as nb
import numpy as np

from emulator.kernel_cache import WITHOUT_RUNTIME
from emulator.plant import Commands, Plant
from emulator.plant.inputs import (
    COMMAND_NOT_FINITE,
    COMMAND_OK,
    LINE_NOT_FINITE,
    command_error,
    load_commands,
    load_line_commands,
)
from emulator.plant.layout import IS_HW_TRIP
from emulator.plant.stepper import LineCommands
from emulator.protocol.signal_map import SignalMap


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _fill_commands(values, duty_pos, gate_pos, reset_pos, gates_allowed, duty, gates, reset,
                   line_pos, chopper_pos, modulation, line_gates, precharge, contactor,
                   chopper):
    """The command vector into the plant's command arrays; the rig's watchdog
    (gates_allowed False) blocks the inverters', the line converters' gates and the
    chopper, while the contactors keep their command. Returns whether any inverter's
    fault reset is asked for."""
    any_reset = False
    for k in range(duty_pos.shape[0]):
        for x in range(3):
            duty[k, x] = values[duty_pos[k, x]]
        gates[k] = gates_allowed and values[gate_pos[k]] >= 0.5
        reset[k] = values[reset_pos[k]] >= 0.5
        any_reset = any_reset or reset[k]
    for j in range(line_pos.shape[0]):
        modulation[j] = values[line_pos[j, 0]]
        line_gates[j] = values[line_pos[j, 1]] >= 0.5 and gates_allowed
        precharge[j] = values[line_pos[j, 2]] >= 0.5
        contactor[j] = values[line_pos[j, 3]] >= 0.5
    for i in range(chopper_pos.shape[0]):
        chopper[i] = values[chopper_pos[i]] if gates_allowed else 0.0
    return any_reset


@nb.njit(cache=True, **WITHOUT_RUNTIME)
def _load_vector(values, duty_pos, gate_pos, reset_pos, gates_allowed, duty, gates, reset,
                 line_pos, chopper_pos, modulation, line_gates, precharge, contactor,
                 chopper, breaker_pos, has_line, iu, lu, ss, ku, ist):
    """CommandMapper.commands then Plant._apply, in one call and in _apply's order: the
    vector mapped (_fill_commands), the line side's commands validated and loaded
    (load_line_commands, when has_line), the hardware trips asked for reset, the
    inverters' commands validated and loaded (load_commands). Returns a COMMAND_* code,
    the line side's as LINE_* (inputs.py)."""
    any_reset = _fill_commands(values, duty_pos, gate_pos, reset_pos, gates_allowed, duty,
                               gates, reset, line_pos, chopper_pos, modulation, line_gates,
                               precharge, contactor, chopper)
    if has_line:
        code = load_line_commands(modulation, line_gates, precharge, contactor,
                                  1.0 if values[breaker_pos] >= 0.5 else 0.0, chopper, lu,
                                  ss, ku)
        if code != COMMAND_OK:
            return code + LINE_NOT_FINITE - COMMAND_NOT_FINITE
    if any_reset:
        for k in range(reset.shape[0]):
            if reset[k]:
                ist[k, IS_HW_TRIP] = 0.0
    return load_commands(duty, gates, iu)


class CommandMapper:
    """Turns a command vector (physical units, map order) into plant commands."""

    def __init__(self, plant: Plant, signal_map: SignalMap) -> None:
        names = [s.name for s in signal_map.commands]
        convs = plant.params.converters
        self._duty_pos = np.array([[names.index(f"{c.name}.duty_{x}") for x in "abc"]
                                   for c in convs])
        self._gate_pos = np.array([names.index(f"{c.name}.gates_enabled") for c in convs])
        self._reset_pos = np.array([names.index(f"{c.name}.fault_reset") for c in convs])
        self._reply_pos = names.index("tcu.achieved_effort_kn")
        self._cmd = Commands(np.full((len(convs), 3), 0.5), np.zeros(len(convs), dtype=bool))
        self._inputs = (plant.iu, plant.lu, plant.ss, plant.ku, plant.ist)  # (load)
        self._reset = np.zeros(len(convs), dtype=bool)
        self.safe = np.zeros(len(names))
        self.safe[self._duty_pos] = 0.5  # gates blocked, duties at mid
        self._line_pos = None
        # (no line side: empty tables for the compiled fill)
        self._no_line = (np.zeros((0, 4), dtype=np.int64), 0, np.zeros(0, dtype=np.int64))
        self._no_line_commands = LineCommands.open(0, 0)
        if plant.line_side:
            units = plant.params.line_converters
            self._line_pos = (
                np.array([names.index(f"{u.name}.{x}") for u in units
                          for x in ("modulation", "gates_enabled", "precharge_close",
                                    "line_contactor_close")], dtype=np.int64).reshape(-1, 4),
                names.index("line.breaker_close"),
                np.array([names.index(f"{lk.name}.chopper_duty")
                          for lk in plant.params.dc_links], dtype=np.int64))
            self._cmd.line = LineCommands.open(len(units), plant.n_links)

    def commands(self, values: np.ndarray, gates_allowed: bool = True) -> Commands:
        """Plant commands; gates_allowed=False blocks every inverter (rig watchdog).

        The rig's frame loads the vector with ``load`` instead (one compiled call); this
        mapping into a Commands object, which the plant takes through its own checks, is
        the reference ``load`` is compared with (tests/link/test_command_loading.py).

        Fills the same Commands object every frame (no allocation in the frame loop); its
        fault_reset is None when no inverter asks for one (the plant looks no further).
        """
        cmd = self._cmd
        pos, breaker, chopper = self._line_pos or self._no_line
        line = cmd.line or self._no_line_commands
        any_reset = _fill_commands(values, self._duty_pos, self._gate_pos, self._reset_pos,
                                   gates_allowed, cmd.duty, cmd.gates_enabled, self._reset,
                                   pos, chopper, line.modulation, line.gates_enabled,
                                   line.precharge, line.line_contactor, line.chopper)
        cmd.fault_reset = self._reset if any_reset else None
        if cmd.line is not None:  # the breaker keeps its command under the watchdog too
            line.breaker = bool(values[breaker] >= 0.5)
        return cmd

    def load(self, values: np.ndarray, gates_allowed: bool = True) -> None:
        """The command vector straight into the plant's inputs (the rig's frame): what
        ``plant.advance(self.commands(values, gates_allowed))`` loads, in one compiled
        call (_load_vector: the same mapping and the plant's own loaders, no Python
        between them); the plant then advances with ``plant.advance(None)``. Raises
        CommandError as the plant would."""
        cmd = self._cmd
        pos, breaker, chopper = self._line_pos or self._no_line
        line = cmd.line or self._no_line_commands
        code = _load_vector(values, self._duty_pos, self._gate_pos, self._reset_pos,
                            gates_allowed, cmd.duty, cmd.gates_enabled, self._reset, pos,
                            chopper, line.modulation, line.gates_enabled, line.precharge,
                            line.line_contactor, line.chopper, breaker,
                            cmd.line is not None, *self._inputs)
        if code:
            raise command_error(code)

    #: the train-interface replies, in the order of the signal map from _reply_pos on
    REPLIES = ("achieved_effort_kn", "available_effort_kn", "status", "event_code")

    def replies(self, values: np.ndarray) -> dict[str, float]:
        """The controller's train-interface replies."""
        p = self._reply_pos
        achieved, available, status, code = values[p:p + 4].tolist()
        return dict(zip(self.REPLIES, (achieved, available, int(status), int(code)),
                        strict=True))

    def reply_positions(self) -> dict[str, int]:
        """Where each reply (REPLIES) is in a command vector."""
        return {name: self._reply_pos + i for i, name in enumerate(self.REPLIES)}
