"""Faults: the catalogue (what can go wrong, triggers) and where each one is applied.

Imports the plant's state layout only; no physics module knows which faults exist.
"""

from emulator.faults.catalogue import (
    CATALOGUE,
    Condition,
    Fault,
    FaultError,
    FaultKind,
    Param,
    make_fault,
)
from emulator.faults.points import FaultSet

__all__ = ["CATALOGUE", "Condition", "Fault", "FaultError", "FaultKind", "FaultSet",
           "Param", "make_fault"]
