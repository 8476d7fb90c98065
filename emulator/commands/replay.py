"""``railrig replay``: run a recorded scenario again from what the recording holds.

Exit codes: 0 the checks passed and the run repeated bit for bit, 1 it differs, 2 the
recording cannot be replayed (unreadable, not from ``railrig run``, not lockstep).
"""

from __future__ import annotations

import argparse
import asyncio
import tempfile
from pathlib import Path

import numpy as np
from rich.console import Console
from rich.markup import escape

from emulator.commands.run import (
    EXIT_FAILED,
    EXIT_PASSED,
    EXIT_UNRUNNABLE,
    console,
    progress_bar,
    run_one,
    summary,
)
from emulator.profiles.table import ProfileError
from emulator.recording.recorder import RecordingError, read_recording
from emulator.scenario.runner import RunError, judge
from emulator.scenario.texts import UnsafeTextsError, rebuild

HELP = "run a recorded scenario again and compare"


def add_arguments(replay: argparse.ArgumentParser) -> None:
    """The options of ``railrig replay``."""
    replay.add_argument("recording", help="a recording made by railrig run --record")
    replay.set_defaults(controller="reference", mode="lockstep", seed=None)


def run(args: argparse.Namespace) -> int:
    """railrig replay RECORDING: run again from what the recording holds; compare."""
    try:
        old = read_recording(args.recording)
    except (RecordingError, OSError) as exc:
        console.print(f"[red]{escape(str(exc))}[/red]")
        return EXIT_UNRUNNABLE
    meta = old.meta
    if "scenario" not in meta:
        console.print("[red]this recording was not made by `railrig run` (no scenario)[/red]")
        return EXIT_UNRUNNABLE
    if meta.get("controller") != "reference" or meta.get("mode") != "lockstep":
        console.print("[red]only lockstep runs with the reference controller repeat bit for "
                      f"bit; this one ran {meta.get('mode')} with {meta.get('controller')}[/red]")
        return EXIT_UNRUNNABLE
    with tempfile.TemporaryDirectory() as tmp:
        try:
            scenario_path, trainset = rebuild(meta, Path(tmp))
            seed = meta["seed"]
            if isinstance(seed, bool) or not isinstance(seed, int):
                raise UnsafeTextsError(f"the recording's seed is not a whole number: "
                                           f"{seed!r}")
        except (UnsafeTextsError, KeyError, TypeError, AttributeError) as exc:
            what = f"the recording has no {exc}" if isinstance(exc, KeyError) else exc
            console.print(f"[red]cannot replay: {escape(str(what))}[/red]")
            return EXIT_UNRUNNABLE
        args.controller, args.mode, args.seed = "reference", "lockstep", seed
        try:
            with progress_bar() as bar:
                new = asyncio.run(run_one(scenario_path, args, bar, None, trainset))
        except (ProfileError, RunError, ValueError, OSError) as exc:
            console.print(f"[red]cannot replay: {escape(str(exc))}[/red]")
            return EXIT_UNRUNNABLE
    same, note = compare(old, new.recording)
    out = Console(soft_wrap=True)  # paths and names whole, whatever the width
    out.print(summary(judge(new.scenario, old)))
    out.print(f"replay: {note}")
    return EXIT_PASSED if same else EXIT_FAILED


def compare(a, b) -> tuple[bool, str]:
    """Whether two recordings hold the same frames bit for bit, and where they part. A
    recording of format 1 (every column float64) is compared at the precision the new
    one stores each column with (emulator/recording/blocks.py)."""
    from emulator.recording.recorder import at_stored_precision

    if a.columns != b.columns:
        return False, "the recordings have different columns"
    if a.format != b.format and b.kinds is not None:
        a = at_stored_precision(a, b.kinds, b.scales)
    n = min(len(a.data), len(b.data))
    diff = np.flatnonzero((a.data[:n].view(np.uint64) != b.data[:n].view(np.uint64)).any(1))
    if diff.size:
        k = int(diff[0])
        col = a.columns[int(np.flatnonzero(a.data[k] != b.data[k])[0])]
        return False, f"differs from frame {k} (t={a.data[k, 0]:.3f} s), first in {col}"
    if len(a.data) != len(b.data):
        return False, f"same first {n} frames, lengths {len(a.data)} and {len(b.data)}"
    return True, f"identical, bit for bit: {n} frames of {len(a.columns)} columns"
