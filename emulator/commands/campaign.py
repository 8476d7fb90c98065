"""``railrig campaign``: many scenario runs on this machine or on a Dask cluster.

Exit codes as ``railrig run``: 0 every run passed, 1 a run failed, errored or timed out,
2 the campaign could not be made (a bad file, no cluster, an --out that holds another
campaign's results) or was interrupted before its end (``--resume`` runs the rest).
"""

from __future__ import annotations

import argparse
import contextlib
import signal
import time
from collections import Counter
from pathlib import Path

from rich.console import Console
from rich.markup import escape
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)
from rich.table import Table

from emulator.campaign.execute import ClusterError, default_workers, run_all
from emulator.campaign.report import write_index
from emulator.campaign.results import (
    CHECKS,
    JUNIT,
    RESULTS,
    ResultsFileError,
    ResultsWriter,
    read_rows,
    write_junit,
)
from emulator.campaign.spec import CampaignError, load_campaign
from emulator.commands import stderr_console
from emulator.commands.run import EXIT_FAILED, EXIT_PASSED, EXIT_UNRUNNABLE

HELP = "run a campaign of scenario runs (a matrix of sweeps and seeds) through Dask"
console = stderr_console()


def add_arguments(p: argparse.ArgumentParser) -> None:
    """The options of ``railrig campaign``."""
    p.add_argument("campaign", help="campaign file, e.g. profiles/campaigns/wet-start-and-dip"
                   ".toml")
    p.add_argument("--workers", type=int, default=None,
                   help=f"worker processes of the local cluster (default: cores - 1, here "
                   f"{default_workers()})")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run on this Dask cluster instead, e.g. tcp://10.0.0.5:8786 (its "
                   "workers need railrig installed)")
    p.add_argument("--out", default=None, help="folder of the results (default: "
                   "campaign-NAME in the current folder, NAME the file's)")
    p.add_argument("--resume", action="store_true",
                   help="keep the results in --out and run only the runs without one")
    p.add_argument("--record", choices=("failed", "all", "none"), default=None,
                   help="which runs' recordings to keep in --out/recordings (default: the "
                   "file's record, else failed)")
    p.add_argument("--timeout-s", type=float, default=None,
                   help="wall time a run may take (default: 60 s + 10 x its duration in "
                   "lockstep, 60 s + 2 x in real time)")


MAX_WORKERS = 512


def run(args: argparse.Namespace) -> int:
    """railrig campaign FILE"""
    try:
        campaign = load_campaign(args.campaign)
    except (CampaignError, OSError, UnicodeDecodeError) as exc:
        say = str(exc) if not isinstance(exc, UnicodeDecodeError) else (
            f"{args.campaign}: not UTF-8 text: {exc}")
        console.print(f"[red]{escape(say)}[/red]")
        return EXIT_UNRUNNABLE
    if args.workers is not None and not 1 <= args.workers <= MAX_WORKERS:
        console.print(f"[red]--workers takes 1 to {MAX_WORKERS}[/red]")
        return EXIT_UNRUNNABLE
    if args.timeout_s is not None and not args.timeout_s > 0:
        console.print("[red]--timeout-s takes a positive number of seconds[/red]")
        return EXIT_UNRUNNABLE
    per_run = campaign.controller.per_run
    workers = args.workers or (default_workers() if per_run else 1)
    if not per_run and (args.scheduler or workers != 1):
        console.print(escape(f"the controller at {campaign.controller.url} is one for the "
                             "whole campaign, so its runs go one at a time: give --workers 1 "
                             "(and no --scheduler), or a URL with {rig} and {bind} and a "
                             "controller_command"), style="red")
        return EXIT_UNRUNNABLE
    out = Path(args.out) if args.out else Path(f"campaign-{campaign.path.stem}")
    if (not args.resume and out.is_dir() and any(out.iterdir())
            and not (out / RESULTS).exists()):
        console.print(escape(f"{out} holds other files: give an empty or new folder as "
                             "--out"), style="red")
        return EXIT_UNRUNNABLE
    fresh = not (out / RESULTS).exists()
    try:
        writer = ResultsWriter(out, campaign.addresses, resume=args.resume)
    except (FileExistsError, ResultsFileError, OSError) as exc:
        console.print(escape(str(exc)), style="red")
        return EXIT_UNRUNNABLE
    if writer.cut:
        console.print(f"{writer.cut} row(s) cut short by an interruption dropped from "
                      f"{out}: their runs run again")
    done = writer.done
    record = args.record or campaign.record
    todo = [dict(r.as_dict(), record=record) for r in campaign.runs
            if r.digest not in done]
    console.print(escape(f"campaign {campaign.name!r}: {len(campaign.runs)} runs, "
                         f"{len(campaign.runs) - len(todo)} with results in {out}, "
                         f"{len(todo)} to run"))

    def timeout_s(case: dict) -> float:
        if args.timeout_s is not None:
            return args.timeout_s
        return 60.0 + case["duration_s"] * (10.0 if campaign.mode == "lockstep" else 2.0)

    counts: Counter = Counter()
    walls: list[float] = []
    t0 = time.perf_counter()
    stopped = ""
    bar = Progress(TextColumn("[bold]{task.description}"), BarColumn(), MofNCompleteColumn(),
                   TextColumn("{task.fields[failed]} not passed"), TimeElapsedColumn(),
                   TextColumn("left"), TimeRemainingColumn(), console=console)
    with bar, _sigterm_as_interrupt():
        task = bar.add_task(escape(campaign.name), total=len(todo), failed=0)

        def on_result(result: dict) -> None:
            writer.add(result)
            counts[result["verdict"]] += 1
            walls.append(result["wall_s"])
            bar.update(task, advance=1, failed=sum(v for k, v in counts.items()
                                                   if k != "pass"))
            if result["verdict"] != "pass":
                what = "; ".join(result["failed_checks"]) or (
                    result["reason"].splitlines() or [""])[0]
                bar.console.print(escape(f"run {result['run']} {result['label']}: "
                                         f"{result['verdict']}: {what}"))

        try:
            if todo:
                stopped = run_all(todo, timeout_s=timeout_s, on_result=on_result,
                                  workers=workers, scheduler=args.scheduler,
                                  on_ready=lambda s: bar.console.print(escape(s)))
        except ClusterError as exc:
            writer.close()
            console.print(escape(str(exc)), style="red")
            if fresh and not writer.rows:  # nothing ran: leave no half-made results
                writer.remove()
            return EXIT_UNRUNNABLE
        finally:
            writer.close()
    elapsed = time.perf_counter() - t0
    return _finish(campaign, out, writer.rows, counts, walls, elapsed, stopped)


@contextlib.contextmanager
def _sigterm_as_interrupt():
    """SIGTERM (a CI job cancelled, a kill) ends the campaign as Ctrl-C does: what ended
    is written, the rest is cancelled."""
    def interrupt(signum, frame):
        raise KeyboardInterrupt
    try:
        before = signal.signal(signal.SIGTERM, interrupt)
    except ValueError:  # not the main thread
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, before)


def _finish(campaign, out: Path, rows: list[dict], counts: Counter, walls: list[float],
            elapsed: float, stopped: str) -> int:
    ran = sum(counts.values())
    speed = ""
    if ran and elapsed > 0:
        speed = (f"{ran} run(s) in {elapsed:.1f} s: {ran / elapsed * 3600:.0f} runs an hour; "
                 f"their own wall times add up to {sum(walls):.1f} s (one after another: "
                 f"x{sum(walls) / elapsed:.2f} the time this took)")
    labels = {r.digest: r.label for r in campaign.runs}
    mine = [r for r in rows if r["digest"] in labels]
    others = len(rows) - len(mine)
    verdicts = Counter(r["verdict"] for r in mine)
    summary = (", ".join(f"{verdicts[v]} {v}" for v in ("pass", "fail", "error", "timeout")
                         if verdicts[v]) or "no runs") + f" of {len(campaign.runs)} runs"
    write_junit(campaign.name, mine, labels, out / JUNIT)
    try:
        checks, _ = read_rows(out / CHECKS, ("run", "digest", "check"))
    except ResultsFileError as exc:  # edited under our feet: the page goes without plots
        console.print(escape(str(exc)), style="yellow")
        checks = []
    index = write_index(out, campaign.name, campaign.addresses, mine, checks, campaign.plot,
                        f"{summary}. {speed}")
    table = Table(title=escape(f"campaign {campaign.name}"))
    for col in ("verdict", "runs"):
        table.add_column(col)
    for v in ("pass", "fail", "error", "timeout"):
        table.add_row(v, str(verdicts[v]))
    table.add_row("no result yet", str(len(campaign.runs) - len(mine)))
    result = Console(soft_wrap=True)  # paths and names whole, whatever the width
    result.print(table)
    if speed:
        result.print(speed)
    if others:
        result.print(f"{others} row(s) in {out / RESULTS} are of runs this campaign file no "
                     "longer has (kept; not counted here)")
    result.print(f"results: {out / RESULTS}\nJUnit XML: {out / JUNIT}\nreport: {index}")
    if stopped:
        console.print(escape(f"{stopped}: {len(mine)} of {len(campaign.runs)} runs have "
                             f"results; railrig campaign {campaign.path} --out {out} "
                             "--resume runs the rest"), style="yellow")
        return EXIT_UNRUNNABLE
    if any(r["verdict"] != "pass" for r in mine):
        return EXIT_FAILED
    return EXIT_PASSED if len(mine) == len(campaign.runs) else EXIT_UNRUNNABLE
