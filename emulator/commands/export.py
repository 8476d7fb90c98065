"""``railrig export``: a recording to CSV or NPZ beside it."""

from __future__ import annotations

import argparse

from rich.console import Console

console = Console(stderr=True)
HELP = "convert a recording to CSV or NPZ"


def add_arguments(export: argparse.ArgumentParser) -> None:
    """The options of ``railrig export``."""
    export.add_argument("file", help="a recording (.rrec)")
    export.add_argument("--csv", action="store_true", help="write FILE.csv")
    export.add_argument("--npz", action="store_true", help="write FILE.npz (the default)")


def run(args: argparse.Namespace) -> int:
    """Write the exports; 2 if the recording cannot be read."""
    from emulator.recording.recorder import (
        RecordingError,
        export_csv,
        export_npz,
        read_recording,
    )

    try:
        rec = read_recording(args.file)
    except (OSError, RecordingError) as exc:
        console.print(f"[red]error:[/red] {exc}")
        return 2
    if not rec.complete:
        console.print(f"[yellow]note:[/yellow] {rec.note}; exporting the "
                      f"{len(rec.data)} frames before it")
    base = args.file.rsplit(".", 1)[0]
    if args.csv:
        export_csv(rec, base + ".csv")
        console.print(f"wrote {base}.csv")
    if args.npz or not args.csv:
        export_npz(rec, base + ".npz")
        console.print(f"wrote {base}.npz")
    return 0
