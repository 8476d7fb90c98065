"""Operands of monitor commands, checked before use: type, finiteness and range.

A monitor client is outside the rig: every value it sends is read through these
functions, which raise ``OperandError`` (a ``ValueError``) naming the operand, so a bad
command gets an error reply and never reaches the frame loop as an exception.
"""

from __future__ import annotations

import math
import re
from typing import Any

MAX_TEXT = 200  # characters of a mark, a fault or target name
#: a recording name a client may suggest: a bare file name, no folder, no leading dot
RECORDING_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,63}")


class OperandError(ValueError):
    """An operand of a monitor command that cannot be used."""


def number(m: dict, key: str, lo: float, hi: float, default: float | None = None) -> float:
    """A finite real number within lo..hi (booleans are not numbers here)."""
    value = m.get(key, default)
    if value is None:
        raise OperandError(f"{key} is missing")
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise OperandError(f"{key} must be a number, got {type(value).__name__}")
    if isinstance(value, int) and not -2**53 <= value <= 2**53:
        raise OperandError(f"{key} must be within {lo:g}..{hi:g}, got {value}")
    value = float(value)
    if not math.isfinite(value) or not lo <= value <= hi:
        raise OperandError(f"{key} must be a finite number within {lo:g}..{hi:g}, "
                           f"got {value!r}")
    return value


def integer(m: dict, key: str, lo: int, hi: int, default: int | None = None) -> int:
    """A whole number within lo..hi; a float with no fraction (1.0) is taken as well."""
    value = m.get(key, default)
    if value is None:
        raise OperandError(f"{key} is missing")
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        value = int(value)
    if isinstance(value, bool) or not isinstance(value, int):
        raise OperandError(f"{key} must be a whole number within {lo}..{hi}, got {value!r}")
    if not lo <= value <= hi:
        raise OperandError(f"{key} must be within {lo}..{hi}, got {value}")
    return value


def text(m: dict, key: str, default: str | None = None, max_len: int = MAX_TEXT) -> str:
    """A string of at most ``max_len`` characters."""
    value = m.get(key, default)
    if value is None:
        raise OperandError(f"{key} is missing")
    if not isinstance(value, str):
        raise OperandError(f"{key} must be text, got {type(value).__name__}")
    if len(value) > max_len:
        raise OperandError(f"{key} is longer than {max_len} characters")
    return value


def flag(m: dict, key: str) -> bool:
    """A yes/no operand: absent, false or true (nothing else)."""
    value = m.get(key, False)
    if value is None or isinstance(value, bool):
        return bool(value)
    raise OperandError(f"{key} must be true or false, got {value!r}")


def numbers_map(m: dict, key: str, max_items: int = 16) -> dict[str, float]:
    """A map of short names to finite numbers (fault parameters); range is the caller's."""
    value = m.get(key) or {}
    if not isinstance(value, dict) or len(value) > max_items:
        raise OperandError(f"{key} must be a map of at most {max_items} names to numbers")
    out = {}
    for name in value:
        if not isinstance(name, str) or len(name) > 64:
            raise OperandError(f"{key}: names must be text of at most 64 characters")
        out[name] = number(value, name, -math.inf, math.inf)
    return out


def recording_name(m: dict, key: str) -> str | None:
    """A bare file name a client suggests for a recording (no folder, no ``..``)."""
    value = m.get(key)
    if value is None:
        return None
    if not isinstance(value, str) or not RECORDING_NAME.fullmatch(value) or ".." in value:
        raise OperandError(f"{key} must be a bare file name (letters, digits, '.', '_', "
                           f"'-'; at most 64; no folder), got {str(value)[:80]!r}")
    return value if value.endswith(".rrec") else value + ".rrec"


def as_any(value: Any) -> str:
    """A short printable form of a value, for error replies."""
    return repr(value)[:80]
