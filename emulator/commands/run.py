"""``railrig run``: headless scenario runs with a verdict (JUnit, report, recording).

Exit codes: 0 every check passed, 1 a check failed, 2 the run could not be made (a bad
file, no controller). The progress bar and summary table are shared with ``replay``.
"""

from __future__ import annotations

import argparse
import asyncio
from pathlib import Path

from rich.console import Console
from rich.markup import escape
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from emulator.commands import stderr_console
from emulator.profiles.table import ProfileError
from emulator.scenario.runner import RunError, RunResult, run_scenario
from emulator.scenario.spec import load_scenario

console = stderr_console()
HELP = "run scenario files headless and judge their checks"
EXIT_PASSED, EXIT_FAILED, EXIT_UNRUNNABLE = 0, 1, 2


def progress_bar() -> Progress:
    return Progress(TextColumn("[bold]{task.description}"), BarColumn(),
                    TextColumn("{task.fields[status]}"), TimeElapsedColumn(),
                    console=console, transient=False)


async def run_one(path: Path, args, bar: Progress, record: Path | None,
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
    # names and values as written (escaped: rich would read "[...]" in them as markup)
    table = Table(title=escape(f"{run.scenario.name}: "
                               f"{'passed' if run.passed else 'FAILED'}"))
    for col in ("verdict", "check", "measured", "window"):
        table.add_column(col)
    for r in run.results:
        table.add_row("pass" if r.passed else "[bold red]FAIL[/]", escape(r.spec.name),
                      escape(f"{r.measured} {r.detail}".strip()),
                      f"{r.window[0]:.1f}..{r.window[1]:.1f} s")
    return table


def add_arguments(run: argparse.ArgumentParser) -> None:
    """The options of ``railrig run``."""
    run.add_argument("scenario", nargs="+", help="scenario file(s), e.g. "
                     "profiles/scenarios/four-modes.toml")
    run.add_argument("--controller", default="reference",
                     help="'reference' (in this process) or the link URL of the controller "
                     "under test, e.g. udp://127.0.0.1:5000?peer=127.0.0.1:5001")
    run.add_argument("--mode", choices=("lockstep", "realtime"), default="lockstep")
    run.add_argument("--seed", type=int, default=None,
                     help="seed of the sensor noise and random faults (default: the file's)")
    run.add_argument("--record", default=None, help="write the recording to this file")
    run.add_argument("--junit", default=None, help="write JUnit XML here")
    run.add_argument("--monitor", default=None, metavar="ADDRESS",
                     help="let dashboards watch the run here (socket path or "
                     "127.0.0.1:PORT); the checks' verdicts reach them as events")
    run.add_argument("--report", default=None, help="write PNG plots and index.html here")


def run(args: argparse.Namespace) -> int:
    """railrig run SCENARIO..."""
    paths = [Path(p) for p in args.scenario]
    if args.record and len(paths) > 1:
        console.print("[red]--record takes one scenario at a time[/red]")
        return EXIT_UNRUNNABLE
    runs: list[RunResult] = []
    code = EXIT_PASSED
    with progress_bar() as bar:
        for path in paths:
            try:
                record = Path(args.record) if args.record else None
                runs.append(asyncio.run(run_one(path, args, bar, record)))
            except (ProfileError, RunError, ValueError, OSError) as exc:
                console.print(f"[red]cannot run {escape(str(path))}:[/red] {escape(str(exc))}")
                code = EXIT_UNRUNNABLE
    out = Console(soft_wrap=True)  # paths and names whole, whatever the width
    for result in runs:
        out.print(summary(result))
        if not result.passed and code == EXIT_PASSED:
            code = EXIT_FAILED
        if args.report:
            from emulator.scenario.report import write_report

            where = Path(args.report) / (result.scenario.path.stem if len(paths) > 1 else "")
            try:
                index = write_report(result, where)
                out.print(f"report: {index}")
            except RuntimeError as exc:
                console.print(f"[red]{escape(str(exc))}[/red]")
                code = max(code, EXIT_UNRUNNABLE)
    if args.junit:
        from emulator.scenario.junit import write_junit

        write_junit(runs, args.junit)
        out.print(f"JUnit XML: {args.junit}")
    if args.record and runs:
        out.print(f"recording: {args.record}")
    return code
