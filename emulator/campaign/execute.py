"""Running a campaign's runs through Dask (dask.distributed): one path for both cases.

Without a scheduler address a ``LocalCluster`` of single-threaded worker processes is
started here; with one (``tcp://HOST:PORT``) the runs go to that cluster, whose workers
need railrig installed (the runs carry their texts, not paths). Either way each run is
one task, ``worker.execute_run``, keyed by its digest and given a priority by its
duration (the longest start first, so the pool does not end on one long run).

A worker that dies takes no result with it: the scheduler runs its task again elsewhere
(``distributed.scheduler.allowed-failures``, set to 1 here for the local cluster: one
retry; an external scheduler keeps its own setting), then the run is an ``error`` with
the reason. Ctrl-C cancels what is left; the results written so far stay valid.
"""

from __future__ import annotations

import logging
import os
from collections.abc import Callable
from typing import Any

from .worker import ERROR, execute_run

#: how long to wait for an external scheduler to answer
CONNECT_TIMEOUT_S = 15.0


class ClusterError(RuntimeError):
    """The cluster could not be started or reached."""


def default_workers() -> int:
    """One worker a core, leaving one for the campaign itself and the system."""
    return max(1, (os.cpu_count() or 2) - 1)


def run_all(cases: list[dict[str, Any]], *, timeout_s: Callable[[dict], float],
            on_result: Callable[[dict[str, Any]], None], workers: int | None = None,
            scheduler: str | None = None, on_ready: Callable[[str], None] | None = None,
            ) -> bool:
    """Run every case; call on_result with each result as it ends. True when all ended,
    False when interrupted (Ctrl-C): the runs not ended are cancelled."""
    import dask
    from distributed import Client, LocalCluster, as_completed

    cluster = client = None
    futures: dict = {}
    try:
        with dask.config.set({"distributed.scheduler.allowed-failures": 1}):
            try:
                if scheduler:
                    client = Client(scheduler, timeout=CONNECT_TIMEOUT_S)
                else:
                    cluster = LocalCluster(n_workers=workers or default_workers(),
                                           threads_per_worker=1, processes=True,
                                           dashboard_address=None,
                                           silence_logs=logging.ERROR)
                    client = Client(cluster)
            except (OSError, TimeoutError, ValueError) as exc:
                where = scheduler or "a local cluster"
                raise ClusterError(f"cannot reach {where}: {exc}") from None
            if on_ready is not None:
                n = len(client.scheduler_info().get("workers", {}))
                on_ready(f"{scheduler or 'local cluster'}: {n} worker(s)")
            for case in cases:
                fut = client.submit(execute_run, case, timeout_s(case),
                                    key=f"railrig-run-{case['digest']}", pure=False,
                                    priority=int(case["duration_s"]))
                futures[fut] = case
            for fut in as_completed(list(futures)):
                case = futures.pop(fut)
                try:
                    result = fut.result()
                except Exception as exc:  # KilledWorker after the retry, lost data...
                    result = lost_run(case, exc)
                on_result(result)
        return True
    except KeyboardInterrupt:
        for fut in futures:
            fut.cancel()
        return False
    finally:
        if client is not None:
            client.close(timeout=10)
        if cluster is not None:
            cluster.close(timeout=10)


def lost_run(case: dict[str, Any], exc: BaseException) -> dict[str, Any]:
    """The result of a run the cluster lost (its worker died twice, say)."""
    name = type(exc).__name__
    why = ("the worker running it died, and again on its retry" if name == "KilledWorker"
           else "the cluster lost it")
    return {**{k: case[k] for k in ("run", "digest", "label", "scenario", "trainset",
                                    "seed", "values")},
            "verdict": ERROR, "failed_checks": [], "checks": [], "wall_s": 0.0,
            "sim_s": 0.0, "realtime_factor": 0.0, "recording_digest": "",
            "recording": None, "reason": f"{why}: {name}: {exc}", "worker": ""}
