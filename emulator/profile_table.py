"""Reading one TOML table with units, ranges and no silent defaults.

Every value is checked once against its unit and range; a key nobody asked for is an
error (a misspelling), and a missing key names its likely misspelling.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from pathlib import Path
from typing import Any


class ProfileError(ValueError):
    """A profile file is unreadable, incomplete or inconsistent."""


class Table:
    """Reads one TOML table, checking each key once and rejecting unknown ones."""

    def __init__(self, data: dict[str, Any], file: Path | str, section: str) -> None:
        self._data = data
        self._file = str(file)
        self._section = section
        self._seen: set[str] = set()

    def error(self, key: str, message: str) -> ProfileError:
        """An error naming the file, the table and the key."""
        return ProfileError(f"{self._file}: [{self._section}] {key}: {message}")

    def has(self, key: str) -> bool:
        """Whether the table holds key."""
        return key in self._data

    def _get(self, key: str) -> Any:
        self._seen.add(key)
        if key not in self._data:
            near = difflib.get_close_matches(key, [k for k in self._data if k != key], n=1)
            hint = f" (is {near[0]!r} a misspelling of it?)" if near else ""
            raise self.error(key, "missing" + hint)
        return self._data[key]

    def number(self, key: str, unit: str, lo: float, hi: float, *, lo_open: bool = False,
               scale: float = 1.0, offset: float = 0.0) -> float:
        """A finite number within [lo, hi] (or (lo, hi] if lo_open), then scaled to SI."""
        value = self._get(key)
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.error(key, f"expected a number in {unit}, got {value!r}")
        value = float(value)
        bad_lo = value <= lo if lo_open else value < lo
        if not math.isfinite(value) or bad_lo or value > hi:
            bracket = "(" if lo_open else "["
            raise self.error(key, f"expected {unit} in {bracket}{lo:g}, {hi:g}], got {value:g}")
        return value * scale + offset

    def integer(self, key: str, lo: int, hi: int) -> int:
        """An integer within [lo, hi]."""
        value = self._get(key)
        if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
            raise self.error(key, f"expected an integer in [{lo}, {hi}], got {value!r}")
        return value

    def string(self, key: str, choices: tuple[str, ...] | None = None) -> str:
        """A non-empty string, optionally one of choices."""
        value = self._get(key)
        if not isinstance(value, str) or not value:
            raise self.error(key, f"expected a non-empty string, got {value!r}")
        if choices is not None and value not in choices:
            raise self.error(key, f"expected one of {', '.join(choices)}, got {value!r}")
        return value

    def numbers(self, key: str, unit: str, lo: float, hi: float, *, lo_open: bool = False,
                min_len: int = 1) -> tuple[float, ...]:
        """A list of at least min_len numbers, each within range."""
        value = self._get(key)
        if not isinstance(value, list) or len(value) < min_len:
            raise self.error(key, f"expected a list of at least {min_len} numbers in {unit}")
        out = []
        for i, item in enumerate(value):
            sub = Table({f"{key}[{i}]": item}, self._file, self._section)
            out.append(sub.number(f"{key}[{i}]", unit, lo, hi, lo_open=lo_open))
        return tuple(out)

    def table(self, key: str) -> Table:
        """A sub-table."""
        value = self._get(key)
        if not isinstance(value, dict):
            raise self.error(key, "expected a table")
        return Table(value, self._file, f"{self._section}.{key}" if self._section else key)

    def tables(self, key: str) -> list[Table]:
        """An array of tables ([[key]] in TOML), at least one."""
        value = self._get(key)
        if not isinstance(value, list) or not value or not all(isinstance(v, dict)
                                                                for v in value):
            raise self.error(key, "expected one or more [[" + key + "]] tables")
        return [Table(v, self._file, f"{key}[{i}]") for i, v in enumerate(value)]

    def finish(self) -> None:
        """Raise on keys nobody asked for: a misspelt key is an error, not a default."""
        unknown = sorted(set(self._data) - self._seen)
        if unknown:
            raise self.error(unknown[0], "unknown key (misspelt, or in the wrong table?)")


def read_toml(path: Path | str) -> dict[str, Any]:
    """Parse a TOML file, turning every failure into a ProfileError naming the file."""
    path = Path(path)
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except FileNotFoundError:
        raise ProfileError(f"{path}: no such profile") from None
    except tomllib.TOMLDecodeError as exc:
        raise ProfileError(f"{path}: not valid TOML: {exc}") from None
    except OSError as exc:
        raise ProfileError(f"{path}: cannot read: {exc}") from None
