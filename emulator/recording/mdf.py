"""A recording as an ASAM MDF 4 file, through ``asammdf``.

MDF 4 is the open ASAM standard for measurement data that the trade's analysis tools
open. One channel group with the plant time as its master; every column a channel with
its unit and a comment saying what it is and how railrig stored it; each mark of the
recording an MDF event (a marker at its plant time, named by its label); the scenario's
and the trainset's profile texts, where the recording carries them, as embedded
attachments.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from asammdf import MDF, Signal
from asammdf.blocks import v4_constants as v4c
from asammdf.blocks.v4_blocks import EventBlock

from .recorder import Recording

#: what the name's prefix says a column is
_WHAT = {"y": "measurement as sent to the controller (wire value x scale)",
         "u": "command as applied to the plant (wire value x scale)",
         "p": "plant state"}


def _comment(name: str, kind: str, every: int = 1) -> str:
    what = _WHAT.get(name.split(".", 1)[0], "")
    stored = {"sent": "stored as the wire integer sent", "wire": "stored as the wire "
              "integer (float64 where a controller sent a float)", "f32": "stored as float32",
              "f64": "stored as float64"}.get(kind, "")
    kept = f"kept every {every} frames, held between" if every > 1 else ""
    return "; ".join(x for x in (what, stored, kept) if x)


def export_mdf(rec: Recording, path: str | Path) -> None:
    """Write ``rec`` as an MDF 4.10 file at ``path``."""
    if "time_s" not in rec.columns:
        raise ValueError("a recording without time_s has no master channel for MDF")
    t = rec.column("time_s")
    kinds = rec.kinds or ["f64"] * len(rec.columns)
    units = rec.units or [""] * len(rec.columns)
    every = rec.every or [1] * len(rec.columns)
    signals = []
    for j, name in enumerate(rec.columns):
        if name == "time_s":
            continue
        samples = rec.data[:, j]
        if kinds[j] == "f32" and not np.any(np.abs(samples) > np.finfo(np.float32).max):
            samples = samples.astype(np.float32)  # what was stored, no wider (a block
            # kept at float64 for a value past float32 keeps the column float64)
        signals.append(Signal(samples=samples, timestamps=t, name=name, unit=units[j],
                              comment=_comment(name, kinds[j], every[j])))
    mdf = MDF(version="4.10")
    mdf.append(signals, comment=f"railrig recording: {rec.meta.get('name', '')}".strip())
    for mark in rec.marks or []:
        at = mark.get("t")
        if not isinstance(at, (int, float)):
            continue
        event = EventBlock(event_type=v4c.EVENT_TYPE_MARKER, sync_type=v4c.EVENT_SYNC_TYPE_S,
                           sync_base=1, sync_factor=float(at), cause=v4c.EVENT_CAUSE_TOOL)
        event.name = str(mark.get("label", "mark"))
        event.comment = json.dumps({k: v for k, v in mark.items() if k != "t"},
                                   default=str)
        mdf.events.append(event)
    for key in ("scenario", "trainset"):
        item = rec.meta.get(key)
        if isinstance(item, dict) and isinstance(item.get("text"), str):
            name = Path(str(item.get("path", key))).name or f"{key}.toml"
            mdf.attach(item["text"].encode("utf-8"), file_name=name,
                       comment=f"the {key} profile of the run", mime="text/plain",
                       embedded=True)
    mdf.save(path, overwrite=True)
    mdf.close()
