"""``railrig export``: a recording to ASAM MDF 4, CSV or NPZ, whole or cut."""

from __future__ import annotations

import argparse

from rich.markup import escape

from emulator.commands import stderr_console

console = stderr_console()
HELP = "convert a recording to MDF 4, CSV or NPZ (channels and a time span may be cut)"


def add_arguments(export: argparse.ArgumentParser) -> None:
    """The options of ``railrig export``."""
    export.add_argument("file", help="a recording (.rrec)")
    export.add_argument("--mdf", default=None, metavar="FILE.mf4",
                        help="write an ASAM MDF 4 file (units, comments, marks as events, "
                        "the profiles as attachments)")
    export.add_argument("--csv", action="store_true", help="write FILE.csv")
    export.add_argument("--npz", action="store_true",
                        help="write FILE.npz (the default when nothing else is asked)")
    export.add_argument("--channels", default=None, metavar="GLOBS",
                        help="only these columns: channel sets and globs, comma-separated "
                        "(time_s is kept), e.g. 'motors' or 'y.INV-A1.*,p.train.*'")
    export.add_argument("--from-s", type=float, default=None, help="from this plant time")
    export.add_argument("--to-s", type=float, default=None, help="up to this plant time")


def run(args: argparse.Namespace) -> int:
    """Write the exports; 2 if the recording cannot be read or the cut selects nothing."""
    from emulator.recording.recorder import (
        RecordingError,
        export_csv,
        export_npz,
        read_recording,
    )

    try:
        rec = read_recording(args.file)
    except (OSError, RecordingError) as exc:
        console.print(f"[red]error:[/red] {escape(str(exc))}")
        return 2
    if not rec.complete:
        console.print(f"[yellow]note:[/yellow] {rec.note}; exporting the "
                      f"{len(rec.data)} frames before it")
    from emulator.recording.channels import ChannelError, parse_channels

    try:
        rec = rec.select(parse_channels(args.channels), args.from_s, args.to_s)
    except ChannelError as exc:
        console.print(f"[red]error:[/red] {escape(str(exc))}")
        return 2
    if len(rec.data) == 0:
        console.print("[red]error:[/red] no frame in that time span")
        return 2
    base = args.file.rsplit(".", 1)[0]
    if args.mdf:
        from emulator.recording.mdf import export_mdf

        export_mdf(rec, args.mdf)
        console.print(f"wrote {args.mdf} ({len(rec.columns) - 1} channels, "
                      f"{len(rec.data)} frames, {len(rec.marks or [])} events)")
    if args.csv:
        export_csv(rec, base + ".csv")
        console.print(f"wrote {base}.csv")
    if args.npz or not (args.csv or args.mdf):
        export_npz(rec, base + ".npz")
        console.print(f"wrote {base}.npz")
    return 0
