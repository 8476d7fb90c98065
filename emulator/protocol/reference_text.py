"""The README's protocol rules, written from header.py (``railrig protocol --readme``).

The README holds this text between two marker lines; tests/boardkit/test_protocol_text.py
fails when it differs from what this module writes, so the words a board developer
reads are the rules the rig runs.
"""

from __future__ import annotations

from emulator.protocol.header import (
    CONTROLLER_FLAGS,
    HEADER_FIELDS,
    LOCKSTEP_PACING,
    PERIOD_RULES,
    PROTOCOL_VERSION,
    REJECTS,
    RIG_FLAGS,
)

BEGIN = "<!-- protocol rules: written by `railrig protocol --readme`, do not edit -->"
END = "<!-- end of the protocol rules -->"


def _bit(value: int) -> str:
    return f"{value.bit_length() - 1} ({value})"


def protocol_rules_markdown() -> str:
    """The header, flags, rejections, period rules and lockstep pacing as Markdown."""
    names = ", ".join(f.name for f in HEADER_FIELDS)
    out = [BEGIN, "", "```", f"[{names}, value_0, value_1, ...]", "```", "",
           f"`protocol_version` is {PROTOCOL_VERSION}. The header fields are integers on "
           "the wire (msgpack int, any width up to int64); a header field sent as a float "
           "is rejected. Values may be integers or floats.", "",
           "| header field | rig → controller | controller → rig | integer width |",
           "|---|---|---|---|"]
    out += [f"| `{f.name}` | {f.rig_to_controller} | {f.controller_to_rig} | {f.width} |"
            for f in HEADER_FIELDS]
    out += ["", "| rig flag bit (value) | meaning (rig → controller) |", "|---|---|"]
    out += [f"| {_bit(f.value)} | {f.meaning} |" for f in RIG_FLAGS]
    out += ["", "| controller flag bit (value) | meaning (controller → rig) |", "|---|---|"]
    out += [f"| {_bit(f.value)} | {f.meaning} |" for f in CONTROLLER_FLAGS]
    out += ["", "A command telegram is rejected (counted by kind, never applied, flag bit 2 "
            "on the next measurement) for:", "", "| kind | reason |", "|---|---|"]
    out += [f"| `{kind}` | {reason} |" for kind, reason in REJECTS.items()]
    out += ["", "`period_us` from the controller, by the rig's timing mode (`--mode`):", ""]
    out += [f"- `{mode}`: {rule}" for mode, rule in PERIOD_RULES.items()]
    out += ["", "Lockstep pacing:", ""]
    out += [f"- {rule}" for rule in LOCKSTEP_PACING]
    out += ["", END]
    return "\n".join(out) + "\n"
