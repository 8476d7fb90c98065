"""``railrig campaign``: many scenario runs on this machine or on a Dask cluster.

Exit codes as ``railrig run``: 0 every run passed, 1 a run failed, errored or timed out,
2 the campaign could not be made (a bad file, no cluster, an --out that holds another
campaign's results) or was interrupted before its end (``--resume`` runs the rest).
"""

from __future__ import annotations

import argparse
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
from emulator.campaign.results import CHECKS, JUNIT, RESULTS, ResultsWriter, read_rows, write_junit
from emulator.campaign.spec import CampaignError, load_campaign
from emulator.commands.run import EXIT_FAILED, EXIT_PASSED, EXIT_UNRUNNABLE

HELP = "run a campaign of scenario runs (a matrix of sweeps and seeds) through Dask"
console = Console(stderr=True)


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


def run(args: argparse.Namespace) -> int:
    """railrig campaign FILE"""
    try:
        campaign = load_campaign(args.campaign)
    except (CampaignError, OSError) as exc:
        console.print(f"[red]{escape(str(exc))}[/red]")
        return EXIT_UNRUNNABLE
    if args.workers is not None and args.workers < 1:
        console.print("[red]--workers takes 1 or more[/red]")
        return EXIT_UNRUNNABLE
    if args.timeout_s is not None and not args.timeout_s > 0:
        console.print("[red]--timeout-s takes a positive number of seconds[/red]")
        return EXIT_UNRUNNABLE
    if not campaign.controller.per_run and (args.scheduler or (args.workers or 1) != 1):
        console.print(f"[red]the controller at {campaign.controller.url} is one for the whole "
                      "campaign, so its runs go one at a time: give --workers 1 (and no "
                      "--scheduler), or a URL with {rig} and {bind} and a controller_command"
                      "[/red]")
        return EXIT_UNRUNNABLE
    out = Path(args.out) if args.out else Path(f"campaign-{campaign.path.stem}")
    try:
        writer = ResultsWriter(out, campaign.addresses, resume=args.resume)
    except (FileExistsError, OSError) as exc:
        console.print(f"[red]{exc}[/red]")
        return EXIT_UNRUNNABLE
    if writer.cut:
        console.print(f"{writer.cut} row(s) cut short by an interruption dropped from "
                      f"{out}: their runs run again")
    done = writer.done
    record = args.record or campaign.record
    todo = [dict(r.as_dict(), record=record) for r in campaign.runs
            if r.digest not in done]
    console.print(f"campaign {campaign.name!r}: {len(campaign.runs)} runs, "
                  f"{len(campaign.runs) - len(todo)} with results in {out}, {len(todo)} to run")

    def timeout_s(case: dict) -> float:
        if args.timeout_s is not None:
            return args.timeout_s
        return 60.0 + case["duration_s"] * (10.0 if campaign.mode == "lockstep" else 2.0)

    counts: Counter = Counter()
    walls: list[float] = []
    t0 = time.perf_counter()
    finished = True
    bar = Progress(TextColumn("[bold]{task.description}"), BarColumn(), MofNCompleteColumn(),
                   TextColumn("{task.fields[failed]} not passed"), TimeElapsedColumn(),
                   TextColumn("left"), TimeRemainingColumn(), console=console)
    with bar:
        task = bar.add_task(campaign.name, total=len(todo), failed=0)

        def on_result(result: dict) -> None:
            writer.add(result)
            counts[result["verdict"]] += 1
            walls.append(result["wall_s"])
            bar.update(task, advance=1, failed=sum(v for k, v in counts.items()
                                                   if k != "pass"))
            if result["verdict"] != "pass":
                what = "; ".join(result["failed_checks"]) or result["reason"].splitlines()[0]
                bar.console.print(escape(f"run {result['run']} {result['label']}: "
                                         f"{result['verdict']}: {what}"))

        try:
            if todo:
                finished = run_all(todo, timeout_s=timeout_s, on_result=on_result,
                                   workers=args.workers, scheduler=args.scheduler,
                                   on_ready=lambda s: bar.console.print(s))
        except ClusterError as exc:
            console.print(f"[red]{exc}[/red]")
            finished = False
        finally:
            writer.close()
    elapsed = time.perf_counter() - t0
    return _finish(campaign, out, writer.rows, counts, walls, elapsed, finished)


def _finish(campaign, out: Path, rows: list[dict], counts: Counter, walls: list[float],
            elapsed: float, finished: bool) -> int:
    ran = sum(counts.values())
    speed = ""
    if ran and elapsed > 0:
        speed = (f"{ran} run(s) in {elapsed:.1f} s: {ran / elapsed * 3600:.0f} runs an hour; "
                 f"their own wall times add up to {sum(walls):.1f} s (one after another: "
                 f"x{sum(walls) / elapsed:.2f} the time this took)")
    labels = {r.digest: r.label for r in campaign.runs}
    verdicts = Counter(r["verdict"] for r in rows)
    summary = (", ".join(f"{verdicts[v]} {v}" for v in ("pass", "fail", "error", "timeout")
                         if verdicts[v]) or "no runs") + f" of {len(campaign.runs)} runs"
    write_junit(campaign.name, rows, labels, out / JUNIT)
    checks, _ = read_rows(out / CHECKS)
    index = write_index(out, campaign.name, campaign.addresses, rows, checks, campaign.plot,
                        f"{summary}. {speed}")
    table = Table(title=f"campaign {campaign.name}")
    for col in ("verdict", "runs"):
        table.add_column(col)
    for v in ("pass", "fail", "error", "timeout"):
        table.add_row(v, str(verdicts[v]))
    table.add_row("no result yet", str(len(campaign.runs) - len(rows)))
    result = Console()
    result.print(table)
    if speed:
        result.print(speed)
    result.print(f"results: {out / RESULTS}\nJUnit XML: {out / JUNIT}\nreport: {index}")
    if not finished:
        console.print(f"[yellow]interrupted: {len(rows)} of {len(campaign.runs)} runs have "
                      f"results; railrig campaign {campaign.path} --out {out} --resume runs "
                      "the rest[/yellow]")
        return EXIT_UNRUNNABLE
    if any(r["verdict"] != "pass" for r in rows):
        return EXIT_FAILED
    return EXIT_PASSED if len(rows) == len(campaign.runs) else EXIT_UNRUNNABLE
