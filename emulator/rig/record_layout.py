"""How a recording stores each of the rig's columns, and the unit a column's name says.

Measurements are kept as the integers the telegrams carried ("sent"), commands exactly
as applied ("wire"), plant time and the states that accumulate (positions, energies) as
float64, other plant states as float32 (emulator/recording/blocks.py).
"""

from __future__ import annotations

from emulator.protocol.signal_map import SignalMap

#: recorded plant states with these in their names are kept at float64 (they accumulate)
EXACT_STATE_WORDS = ("position", "energy", "time")
#: the unit a column's name ends in (names carry their units: DESIGN.md)
UNIT_SUFFIXES = (("_rad_s", "rad/s"), ("_mps2", "m/s^2"), ("_mps", "m/s"), ("_kmh", "km/h"),
                 ("_degc", "degC"), ("_nm", "N m"), ("_kn", "kN"), ("_hz", "Hz"),
                 ("_v", "V"), ("_a", "A"), ("_w", "W"), ("_n", "N"), ("_m", "m"),
                 ("_s", "s"), ("_k", "K"), ("_j", "J"), ("_pct", "%"))


def unit_from_name(name: str) -> str:
    """The unit a recorded column's name says (``p.motor.speed_rad_s[3]`` -> rad/s)."""
    base = name.split("[", 1)[0]
    for suffix, unit in UNIT_SUFFIXES:
        if base.endswith(suffix):
            return unit
    return ""


def storage_of(sm: SignalMap, columns: list[str]) -> tuple[list[str], list[float], list[str]]:
    """Per column: storage kind, wire scale (1 where unused) and unit."""
    wire = {f"y.{s.name}": s for s in sm.measurements} | {f"u.{s.name}": s
                                                          for s in sm.commands}
    kinds, scales, units = [], [], []
    for name in columns:
        if name in wire:  # y as the telegram carried it, u exactly as applied
            kinds.append("sent" if name.startswith("y.") else "wire")
            scales.append(wire[name].scale)
            units.append(wire[name].unit)
            continue
        exact = name == "time_s" or any(w in name for w in EXACT_STATE_WORDS)
        kinds.append("f64" if exact else "f32")
        scales.append(1.0)
        units.append(unit_from_name(name))
    return kinds, scales, units
