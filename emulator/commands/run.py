"""``railrig run`` and ``railrig replay``: headless scenario runs with a verdict.

Exit codes: 0 every check passed (replay: and the run repeated bit for bit), 1 a check
failed (or the replay differs), 2 the run could not be made (a bad file, no controller).
"""

from __future__ import annotations

import asyncio
import tempfile
from pathlib import Path

import numpy as np
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from emulator.profiles.table import ProfileError
from emulator.recording.recorder import RecordingError, read_recording
from emulator.scenario.runner import RunError, RunResult, judge, run_scenario
from emulator.scenario.spec import load_scenario

console = Console(stderr=True)
EXIT_PASSED, EXIT_FAILED, EXIT_UNRUNNABLE = 0, 1, 2


def _progress() -> Progress:
    return Progress(TextColumn("[bold]{task.description}"), BarColumn(),
                    TextColumn("{task.fields[status]}"), TimeElapsedColumn(),
                    console=console, transient=False)


async def _run_one(path: Path, args, bar: Progress, record: Path | None,
                   trainset: Path | None = None) -> RunResult:
    scenario = load_scenario(path, trainset=trainset)
    task = bar.add_task(path.stem, total=scenario.duration_s, status="starting")

    def progress(t: float, total: float, kmh: float, x: float, phase: str) -> None:
        bar.update(task, completed=t, status=f"t={t:6.1f} s  v={kmh:6.1f} km/h  "
                                             f"x={x:7.0f} m  {phase}")

    result = await run_scenario(scenario, controller=args.controller, mode=args.mode,
                                monitor=getattr(args, "monitor", None),
                                seed=args.seed, record=record, progress=progress)
    bar.update(task, completed=scenario.duration_s)
    return result


def summary(run: RunResult) -> Table:
    """The checks of a run as a table (verdict in words: readable without colour)."""
    table = Table(title=f"{run.scenario.name}: {'passed' if run.passed else 'FAILED'}")
    for col in ("verdict", "check", "measured", "window"):
        table.add_column(col)
    for r in run.results:
        table.add_row("pass" if r.passed else "[bold red]FAIL[/]", r.spec.name,
                      f"{r.measured} {r.detail}".strip(),
                      f"{r.window[0]:.1f}..{r.window[1]:.1f} s")
    return table


def cmd_run(args) -> int:
    """railrig run SCENARIO..."""
    paths = [Path(p) for p in args.scenario]
    if args.record and len(paths) > 1:
        console.print("[red]--record takes one scenario at a time[/red]")
        return EXIT_UNRUNNABLE
    runs: list[RunResult] = []
    code = EXIT_PASSED
    with _progress() as bar:
        for path in paths:
            try:
                record = Path(args.record) if args.record else None
                runs.append(asyncio.run(_run_one(path, args, bar, record)))
            except (ProfileError, RunError, ValueError, OSError) as exc:
                console.print(f"[red]cannot run {path}:[/red] {exc}")
                code = EXIT_UNRUNNABLE
    out = Console()
    for run in runs:
        out.print(summary(run))
        if not run.passed and code == EXIT_PASSED:
            code = EXIT_FAILED
        if args.report:
            from emulator.scenario.report import write_report

            where = Path(args.report) / (run.scenario.path.stem if len(paths) > 1 else "")
            try:
                index = write_report(run, where)
                out.print(f"report: {index}")
            except RuntimeError as exc:
                console.print(f"[red]{exc}[/red]")
                code = max(code, EXIT_UNRUNNABLE)
    if args.junit:
        from emulator.scenario.junit import write_junit

        write_junit(runs, args.junit)
        out.print(f"JUnit XML: {args.junit}")
    if args.record and runs:
        out.print(f"recording: {args.record}")
    return code


def _rebuild(meta: dict, where: Path) -> tuple[Path, Path]:
    """Write the recorded scenario, trainset and machine texts: (scenario, trainset)."""
    machine = meta.get("machine")
    depth = machine["relative"].count("..") + 1 if machine else 1
    trainset = where.joinpath(*["t"] * depth, Path(meta["trainset"]["path"]).name)
    trainset.parent.mkdir(parents=True)
    trainset.write_text(meta["trainset"]["text"], encoding="utf-8")
    if machine:
        target = (trainset.parent / machine["relative"]).resolve()
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(machine["text"], encoding="utf-8")
    scenario = where / Path(meta["scenario"]["path"]).name
    scenario.write_text(meta["scenario"]["text"], encoding="utf-8")
    return scenario, trainset


def cmd_replay(args) -> int:
    """railrig replay RECORDING: run again from what the recording holds; compare."""
    try:
        old = read_recording(args.recording)
    except (RecordingError, OSError) as exc:
        console.print(f"[red]{exc}[/red]")
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
        scenario_path, trainset = _rebuild(meta, Path(tmp))
        args.controller, args.mode, args.seed = "reference", "lockstep", meta["seed"]
        try:
            with _progress() as bar:
                new = asyncio.run(_run_one(scenario_path, args, bar, None, trainset))
        except (ProfileError, RunError, ValueError, OSError) as exc:
            console.print(f"[red]cannot replay: {exc}[/red]")
            return EXIT_UNRUNNABLE
    same, note = compare(old, new.recording)
    out = Console()
    out.print(summary(judge(new.scenario, old)))
    out.print(f"replay: {note}")
    return EXIT_PASSED if same else EXIT_FAILED


def compare(a, b) -> tuple[bool, str]:
    """Whether two recordings hold the same frames bit for bit, and where they part."""
    if a.columns != b.columns:
        return False, "the recordings have different columns"
    n = min(len(a.data), len(b.data))
    diff = np.flatnonzero((a.data[:n].view(np.uint64) != b.data[:n].view(np.uint64)).any(1))
    if diff.size:
        k = int(diff[0])
        col = a.columns[int(np.flatnonzero(a.data[k] != b.data[k])[0])]
        return False, f"differs from frame {k} (t={a.data[k, 0]:.3f} s), first in {col}"
    if len(a.data) != len(b.data):
        return False, f"same first {n} frames, lengths {len(a.data)} and {len(b.data)}"
    return True, f"identical, bit for bit: {n} frames of {len(a.columns)} columns"
