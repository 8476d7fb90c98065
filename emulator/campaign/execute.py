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

import itertools
import logging
import os
import uuid
from collections.abc import Callable
from typing import Any

from .worker import error_result, execute_run

#: how long to wait for an external scheduler to answer
CONNECT_TIMEOUT_S = 15.0


class ClusterError(RuntimeError):
    """The cluster could not be started or reached."""


def default_workers() -> int:
    """One worker a core, leaving one for the campaign itself and the system."""
    return max(1, (os.cpu_count() or 2) - 1)


def run_all(cases: list[dict[str, Any]], *, timeout_s: Callable[[dict], float],
            on_result: Callable[[dict[str, Any]], None], workers: int = 1,
            scheduler: str | None = None, on_ready: Callable[[str], None] | None = None,
            ) -> str:
    """Run every case; call on_result with each result as it ends. Returns "" when all
    ended, else why not ("interrupted", or what the cluster lost): the runs not ended are
    cancelled and get no result, so ``--resume`` runs them."""
    import dask
    from distributed import Client, KilledWorker, LocalCluster, as_completed

    cluster = client = None
    futures: dict = {}
    token = uuid.uuid4().hex[:8]  # two campaigns on one scheduler never share a task
    try:
        with dask.config.set({"distributed.scheduler.allowed-failures": 1}):
            try:
                if scheduler:
                    client = Client(scheduler, timeout=CONNECT_TIMEOUT_S)
                else:
                    cluster = LocalCluster(n_workers=workers, threads_per_worker=1,
                                           processes=True, dashboard_address=None,
                                           silence_logs=logging.ERROR)
                    client = Client(cluster)
            except (OSError, TimeoutError, ValueError) as exc:
                where = scheduler or "a local cluster"
                raise ClusterError(f"cannot reach {where}: {exc}") from None
            n = len(client.scheduler_info().get("workers", {}))
            if on_ready is not None:
                on_ready(f"{scheduler or 'local cluster'}: {n} worker(s)")
            # a bounded number in flight: a large matrix is not all in the scheduler at once
            window = max(64, 4 * max(n, workers))
            waiting = iter(cases)

            def submit(case: dict[str, Any]):
                fut = client.submit(execute_run, case, timeout_s(case),
                                    key=f"railrig-run-{case['digest'][:32]}-{token}",
                                    pure=False, priority=int(case["duration_s"]))
                futures[fut] = case
                return fut

            running = as_completed([submit(c) for c in itertools.islice(waiting, window)])
            for fut in running:
                case = futures.pop(fut)
                try:
                    result = fut.result()
                except KilledWorker as exc:  # died with it twice: the run's own verdict
                    result = lost_run(case, exc)
                except Exception as exc:  # the cluster lost it, or cannot run railrig
                    return f"the cluster did not run it: {type(exc).__name__}: {exc}"
                on_result(result)
                following = next(waiting, None)
                if following is not None:
                    running.add(submit(following))
        return ""
    except KeyboardInterrupt:
        return "interrupted"
    finally:
        for fut in futures:
            fut.cancel()
        if client is not None:
            client.close(timeout=10)
        if cluster is not None:
            cluster.close(timeout=10)


def lost_run(case: dict[str, Any], exc: BaseException) -> dict[str, Any]:
    """The result of a run whose worker died twice (the scheduler's KilledWorker)."""
    return error_result(case, "the worker running it died, and again on its retry: "
                              f"{type(exc).__name__}: {exc}")
