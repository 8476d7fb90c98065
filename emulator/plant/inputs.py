"""Validate commands and load them into the plant's input arrays (compiled, no allocation)."""

from __future__ import annotations

import math

from .commands import CommandError
from .jit import compiled
from .layout import (
    IU_DA,
    IU_DB,
    IU_DC,
    IU_ENABLE,
    KU_CHOPPER,
    LU_ENABLE,
    LU_LINE_CMD,
    LU_MOD,
    LU_PRE_CMD,
    SS_BREAKER_CMD,
)

COMMAND_OK = 0
COMMAND_NOT_FINITE = 1
COMMAND_OUT_OF_RANGE = 2
#: the codes of load_line_commands (COMMAND_* + 2) where both sides' are told apart
LINE_NOT_FINITE = 3
LINE_OUT_OF_RANGE = 4

_MESSAGES = {
    COMMAND_NOT_FINITE: "duty cycles must be finite (NaN or inf received)",
    COMMAND_OUT_OF_RANGE: "duty cycles must lie within 0..1",
    LINE_NOT_FINITE: "line commands must be finite (NaN or inf received)",
    LINE_OUT_OF_RANGE: "modulation must lie within -1..1 and chopper duty within 0..1",
}


def command_error(code: int) -> CommandError:
    """The error for a code of load_commands, or of load_line_commands + 2 (LINE_*)."""
    return CommandError(_MESSAGES[code])


@compiled
def load_commands(duty, gates, iu) -> int:
    """Validate duties (finite, 0..1) and load them with the gate enables into iu.

    Nothing is written unless every value is valid; returns a COMMAND_* code.
    """
    n = iu.shape[0]
    for k in range(n):
        for x in range(3):
            d = duty[k, x]
            if not math.isfinite(d):
                return COMMAND_NOT_FINITE
            if d < 0.0 or d > 1.0:
                return COMMAND_OUT_OF_RANGE
    for k in range(n):
        iu[k, IU_DA] = duty[k, 0]
        iu[k, IU_DB] = duty[k, 1]
        iu[k, IU_DC] = duty[k, 2]
        iu[k, IU_ENABLE] = 1.0 if gates[k] else 0.0
    return COMMAND_OK


@compiled
def load_line_commands(mod, gates, pre, line, breaker, chopper, lu, ss, ku) -> int:
    """Validate and load the line side's commands; nothing is written unless all are valid."""
    for k in range(mod.shape[0]):
        # flags may come as bool or float arrays: x * 1.0 is a float for both
        if not (math.isfinite(mod[k]) and math.isfinite(gates[k] * 1.0)
                and math.isfinite(pre[k] * 1.0) and math.isfinite(line[k] * 1.0)):
            return COMMAND_NOT_FINITE
        if mod[k] < -1.0 or mod[k] > 1.0:
            return COMMAND_OUT_OF_RANGE
    for j in range(chopper.shape[0]):
        if not math.isfinite(chopper[j]):
            return COMMAND_NOT_FINITE
        if chopper[j] < 0.0 or chopper[j] > 1.0:
            return COMMAND_OUT_OF_RANGE
    for k in range(mod.shape[0]):
        lu[k, LU_MOD] = mod[k]
        lu[k, LU_ENABLE] = gates[k] * 1.0
        lu[k, LU_PRE_CMD] = pre[k] * 1.0
        lu[k, LU_LINE_CMD] = line[k] * 1.0
    for j in range(chopper.shape[0]):
        ku[j, KU_CHOPPER] = chopper[j]
    ss[SS_BREAKER_CMD] = breaker
    return COMMAND_OK
