"""What the power stages and the line side are told for one frame."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


class CommandError(ValueError):
    """A command the plant cannot apply (non-finite, out of range, wrong shape)."""


@dataclass
class Commands:
    """What the power stages are told for one frame.

    Attributes:
        duty: per inverter, the three leg duty cycles, shape (n_inverter, 3), 0..1.
        gates_enabled: per inverter, True when the gates are released.
    """

    duty: np.ndarray
    gates_enabled: np.ndarray
    line: LineCommands | None = None  # None: keep the line side's previous commands
    # per inverter, True resets the gate drivers' latched hardware trip (None: no reset)
    fault_reset: np.ndarray | None = None

    @classmethod
    def blocked(cls, n_inverter: int) -> Commands:
        """All gates blocked, duties at 0.5."""
        return cls(np.full((n_inverter, 3), 0.5), np.zeros(n_inverter, dtype=bool))


@dataclass
class LineCommands:
    """What the line side is told for one frame.

    Attributes:
        modulation: per line converter, m in -1..1 (converter voltage m U_dc).
        gates_enabled: per line converter.
        precharge: per line converter, precharge contactor commanded closed.
        line_contactor: per line converter, line contactor commanded closed.
        breaker: main breaker commanded closed.
        chopper: per DC link, brake chopper duty 0..1.
    """

    modulation: np.ndarray
    gates_enabled: np.ndarray
    precharge: np.ndarray
    line_contactor: np.ndarray
    breaker: bool
    chopper: np.ndarray

    @classmethod
    def open(cls, n_converters: int, n_links: int) -> LineCommands:
        """Everything open and blocked."""
        return cls(np.zeros(n_converters), np.zeros(n_converters, dtype=bool),
                   np.zeros(n_converters, dtype=bool), np.zeros(n_converters, dtype=bool),
                   False, np.zeros(n_links))
