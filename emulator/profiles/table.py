"""Reading one TOML table with units, ranges and no silent defaults.

Every value is checked once against its unit and range; a key nobody asked for is an
error (a misspelling), and a missing key names its likely misspelling.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from pathlib import Path
from typing import Any


class ProfileError(ValueError):
    """A profile file is unreadable, incomplete or inconsistent."""


class Table:
    """Reads one TOML table, checking each key once and rejecting unknown ones."""

    def __init__(self, data: dict[str, Any], file: Path | str, section: str,
                 lines: dict[tuple[str, str], int] | None = None) -> None:
        self._data = data
        self._file = str(file)
        self._section = section
        self._lines = lines or {}  # (section, key) -> line number, from key_lines()
        self._seen: set[str] = set()

    def _sub(self, data: dict[str, Any], section: str) -> Table:
        return Table(data, self._file, section, self._lines)

    def line_of(self, key: str) -> int | None:
        """The line where key (or, failing that, its table) is written, if known."""
        section, key = self._section, key.split("[")[0]
        while True:
            for k in (key, ""):
                if (section, k) in self._lines:
                    return self._lines[section, k]
            if not section:
                return None
            # an inline table: the line of the key that holds it
            section, _, key = section.rpartition(".")
            key = key.split("[")[0]

    def error(self, key: str, message: str, at: str | None = None) -> ProfileError:
        """An error naming the file, its line (of ``at`` if given), the table and the key."""
        line = self.line_of(at or key)
        where = f"{self._file}:{line}" if line else self._file
        return ProfileError(f"{where}: [{self._section}] {key}: {message}")

    def has(self, key: str) -> bool:
        """Whether the table holds key."""
        return key in self._data

    def _get(self, key: str) -> Any:
        self._seen.add(key)
        if key not in self._data:
            near = difflib.get_close_matches(key, [k for k in self._data if k != key], n=1)
            hint = f" (is {near[0]!r} a misspelling of it?)" if near else ""
            raise self.error(key, "missing" + hint, at=near[0] if near else None)
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
            sub = self._sub({f"{key}[{i}]": item}, self._section)
            out.append(sub.number(f"{key}[{i}]", unit, lo, hi, lo_open=lo_open))
        return tuple(out)

    def table(self, key: str) -> Table:
        """A sub-table."""
        value = self._get(key)
        if not isinstance(value, dict):
            raise self.error(key, "expected a table")
        return self._sub(value, f"{self._section}.{key}" if self._section else key)

    def tables(self, key: str) -> list[Table]:
        """An array of tables ([[key]] in TOML), at least one."""
        value = self._get(key)
        if not isinstance(value, list) or not value or not all(isinstance(v, dict)
                                                                for v in value):
            raise self.error(key, "expected one or more [[" + key + "]] tables")
        prefix = f"{self._section}.{key}" if self._section else key
        return [self._sub(v, f"{prefix}[{i}]") for i, v in enumerate(value)]

    def optional(self, key: str) -> bool:
        """Whether an optional key is present (marks it as read)."""
        self._seen.add(key)
        return key in self._data

    def boolean(self, key: str) -> bool:
        """true or false."""
        value = self._get(key)
        if not isinstance(value, bool):
            raise self.error(key, f"expected true or false, got {value!r}")
        return value

    def raw(self, key: str) -> Any:
        """The value as written (the caller checks it)."""
        return self._get(key)

    def written_keys(self) -> list[str]:
        """The keys written in this table."""
        return list(self._data)

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
    except UnicodeDecodeError as exc:
        raise ProfileError(f"{path}: not UTF-8 text (TOML is): {exc}") from None
    except OSError as exc:
        raise ProfileError(f"{path}: cannot read: {exc}") from None


_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?")
_KEY = re.compile(r"^\s*([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=")


def key_lines(text: str) -> dict[tuple[str, str], int]:
    """Line numbers of tables and keys: (section, key) -> line, ("section", "") for headers.

    Sections are named as ``Table`` names them: ``track.gradient[1]`` for the second
    ``[[track.gradient]]``. Keys inside inline tables are found through their parent key.
    """
    lines: dict[tuple[str, str], int] = {}
    counts: dict[str, int] = {}
    section = ""
    for number, line in enumerate(text.splitlines(), start=1):
        m = _HEADER.match(line)
        if m:
            brackets, name = m.groups()
            parts = [p.strip().strip('"') for p in name.split(".")]
            # a table inside the newest element of an array of tables
            path = ""
            for i, part in enumerate(parts):
                path = f"{path}.{part}" if path else part
                if i < len(parts) - 1 and path in counts:
                    path = f"{path}[{counts[path] - 1}]"
            if brackets == "[[":
                base = path
                counts[base] = counts.get(base, 0) + 1
                path = f"{base}[{counts[base] - 1}]"
            section = path
            lines.setdefault((section, ""), number)
            continue
        m = _KEY.match(line)
        if m:
            lines.setdefault((section, m.group(1).strip('"')), number)
    return lines


def read_toml_lines(path: Path | str) -> tuple[dict[str, Any], dict[tuple[str, str], int],
                                               str]:
    """Parse a TOML file and locate its keys: (data, key lines, text)."""
    data = read_toml(path)
    text = Path(path).read_text(encoding="utf-8")
    return data, key_lines(text), text
