"""Which columns a recording keeps: named channel sets and globs.

A channel spec is a list of set names and globs over the column names (``y.*`` the
measurements as sent, ``u.*`` the commands as applied, ``p.*`` the plant's own states);
``time_s`` is always kept. ``railrig serve --record-channels default,p.motor.*``.
"""

from __future__ import annotations

import fnmatch

#: the named sets, as globs
CHANNEL_SETS: dict[str, tuple[str, ...]] = {
    "all": ("*",),
    # what a test engineer looks at first: the link both ways, the train, the line, the
    # links' voltages and each motor's speed, torque and adhesion
    "default": ("y.*", "u.*", "p.train.*", "p.line.*", "p.dc_link.voltage_v*",
                "p.motor.speed_rad_s*", "p.motor.torque_nm*",
                "p.motor.adhesion_utilisation*"),
    "line": ("y.line.*", "u.line.*", "y.LC-*", "u.LC-*", "p.line.*", "p.dc_link.*",
             "y.*voltage_v", "y.*overvoltage", "u.*chopper_duty"),
    "motors": ("y.INV-*", "u.INV-*", "p.motor.*", "p.inverter.*", "p.train.*"),
    "link": ("y.*", "u.*"),
}


class ChannelError(ValueError):
    """A channel spec that names no set and matches no column."""


def select_channels(columns: list[str], spec: list[str]) -> list[int]:
    """Indices of the columns a spec keeps, in the columns' order."""
    patterns: list[str] = []
    for item in spec:
        item = item.strip()
        if not item:
            continue
        if item in CHANNEL_SETS:
            patterns += CHANNEL_SETS[item]
            continue
        if not any(fnmatch.fnmatchcase(c, item) for c in columns):
            raise ChannelError(f"channel {item!r} is neither a set "
                               f"({', '.join(CHANNEL_SETS)}) nor a glob matching a column")
        patterns.append(item)
    return [i for i, c in enumerate(columns)
            if c == "time_s" or any(fnmatch.fnmatchcase(c, p) for p in patterns)]


def parse_channels(text: str | None) -> list[str] | None:
    """``"default,p.motor.*"`` -> ["default", "p.motor.*"]; None for none given."""
    if text is None:
        return None
    return [item.strip() for item in text.split(",") if item.strip()]


def parse_decimation(text: str | None) -> dict[str, int]:
    """``"p.motor.*temperature*=100,y.*temperature*=100"`` -> {glob: n}; ChannelError
    for an item that is not GLOB=N with N a whole number >= 1."""
    out: dict[str, int] = {}
    for item in (text or "").split(","):
        item = item.strip()
        if not item:
            continue
        glob, sep, n = item.rpartition("=")
        if not sep or not glob or not n.strip().isdigit() or int(n) < 1:
            raise ChannelError(f"decimation {item!r}: write GLOB=N, N a whole number >= 1 "
                               "(keep every N-th frame)")
        out[glob.strip()] = int(n)
    return out
