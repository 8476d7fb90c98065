"""Values of a scenario that a campaign sweeps: their addresses, and setting them.

An address names a value by what it is in the scenario, not by where it is written, so a
sweep reads as the trade says it and survives edits of the file around it:

``fault[LABEL].PARAM``
    a parameter of the fault labelled LABEL (``fault[dip].voltage_pu``), or its ``at_s``,
    ``at_m`` (as written) or ``until_s``;
``adhesion[LABEL].KEY``
    the low-adhesion zone labelled LABEL: ``factor``, ``rail``, ``from_m``, ``to_m`` or
    ``cleaning_per_axle``;
``driver[STEP].KEY``
    a value written in the driver step named STEP (``driver[start].to_kmh``);
``line.voltage_pu``, ``line.frequency_hz``
    the catenary as the train meets it from the first frame (a ``catenary-dip`` or
    ``line-frequency`` fault from 0 s added to the scenario; the trainset's nominal
    values, which its controller is set up for, stay as they are);
``scenario.initial_speed_kmh``, ``scenario.duration_s``.

A label is what the scenario's own checks use after ``after =``: a fault's ``label``
(by default ``NAME@TARGET``), a zone's ``label`` (by default ``low adhesion N``), a
step's ``name``.
"""

from __future__ import annotations

import copy
import re
from dataclasses import dataclass
from typing import Any

import tomli_w

from emulator.faults.catalogue import CATALOGUE

_ADDRESS = re.compile(r"(fault|adhesion|driver)\[([^\[\]]+)\]\.([a-z][a-z0-9_]*)"
                      r"|(line)\.(voltage_pu|frequency_hz)"
                      r"|(scenario)\.(initial_speed_kmh|duration_s)")
FORMS = ("fault[LABEL].PARAM, adhesion[LABEL].factor, driver[STEP].KEY, line.voltage_pu, "
         "line.frequency_hz, scenario.initial_speed_kmh, scenario.duration_s")
ZONE_KEYS = ("factor", "rail", "from_m", "to_m", "cleaning_per_axle")
#: the catenary faults a ``line.`` address adds, and their labels
LINE_FAULTS = {"voltage_pu": ("catenary-dip", "line voltage (campaign)"),
               "frequency_hz": ("line-frequency", "line frequency (campaign)")}


class NotInScenarioError(LookupError):
    """The scenario has no value at this address (the message says what it has)."""


@dataclass(frozen=True)
class Address:
    """A parsed address: kind (fault, adhesion, driver, line, scenario), label, key."""

    kind: str
    label: str | None
    key: str

    def __str__(self) -> str:
        return f"{self.kind}[{self.label}].{self.key}" if self.label else f"{self.kind}.{self.key}"


def parse_address(text: str) -> Address:
    """An Address, or ValueError naming the forms an address takes."""
    m = _ADDRESS.fullmatch(text.strip()) if isinstance(text, str) else None
    if m is None:
        raise ValueError(f"{text!r} is not an address of a scenario value; the forms: {FORMS}")
    if m.group(1):
        return Address(m.group(1), m.group(2).strip(), m.group(3))
    if m.group(4):
        return Address("line", None, m.group(5))
    return Address("scenario", None, m.group(7))


def _by_label(items: list[dict], label: str, default, what: str) -> dict:
    labels = [item.get("label", item.get("name")) if what != "fault" else
              item.get("label", f"{item.get('name')}@{item.get('target')}") for item in items]
    labels = [lab if lab is not None else default(i) for i, lab in enumerate(labels)]
    if label not in labels:
        have = ", ".join(repr(x) for x in labels if x) or "none"
        raise NotInScenarioError(f"no {what} labelled {label!r} (it has: {have})")
    return items[labels.index(label)]


def locate(data: dict[str, Any], address: Address) -> tuple[dict, str]:
    """The table holding the addressed value and its key in it (for a fault parameter
    not written, the fault's ``params`` to be); NotInScenarioError if there is none."""
    kind, key = address.kind, address.key
    if kind == "fault":
        fault = _by_label(data.get("fault", []), address.label, lambda i: None, "fault")
        if key in ("at_s", "at_m"):
            if key not in fault:
                raise NotInScenarioError(f"fault {address.label!r} is not triggered by {key}")
            return fault, key
        if key == "until_s":
            return fault, key
        params = CATALOGUE[fault["name"]].params if fault.get("name") in CATALOGUE else {}
        if key not in params:
            raise NotInScenarioError(f"a {fault.get('name')} fault has no parameter {key!r} (it "
                                f"has: {', '.join(params) or 'none'})")
        return fault.setdefault("params", {}), key
    if kind == "adhesion":
        zones = data.get("track", {}).get("low_adhesion", [])
        zone = _by_label(zones, address.label, lambda i: f"low adhesion {i + 1}",
                         "low-adhesion zone")
        if key not in ZONE_KEYS:
            raise NotInScenarioError(f"a low-adhesion zone has no {key!r} (it has: "
                                f"{', '.join(ZONE_KEYS)})")
        return zone, key
    if kind == "driver":
        steps = data.get("driver", {}).get("step", [])
        step = _by_label(steps, address.label, lambda i: None, "driver step")
        if key not in step or key == "name":
            raise NotInScenarioError(f"driver step {address.label!r} has no {key!r} written "
                                f"(it has: {', '.join(k for k in step if k != 'name')})")
        return step, key
    if kind == "scenario":
        return data.setdefault("scenario", {}), key
    return {}, key  # line: a fault added by ``apply``


def apply(data: dict[str, Any], changes: list[tuple[Address, Any]]) -> dict[str, Any]:
    """A copy of the scenario's TOML data with each addressed value set."""
    out = copy.deepcopy(data)
    for address, value in changes:
        if address.kind == "line":
            name, label = LINE_FAULTS[address.key]
            out.setdefault("fault", []).insert(0, {
                "name": name, "target": "catenary", "params": {address.key: value},
                "at_s": 0.0, "label": label})
            continue
        table, key = locate(out, address)
        table[key] = value
    return out


def scenario_text(data: dict[str, Any], note: str) -> str:
    """The TOML text of a varied scenario, opening with a comment that says how it was
    made (the source file's comments do not survive: its values do)."""
    lines = "".join(f"# {line}\n" for line in note.splitlines())
    return lines + tomli_w.dumps(data)
