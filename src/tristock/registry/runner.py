"""Where the per-design work runs: Dask, in this process by default.

- no workers, no scheduler: Dask's synchronous scheduler in this process;
- ``workers=N``: a ``LocalCluster`` of N single-threaded worker processes, started for the
  run and closed after it;
- ``scheduler="tcp://host:port"`` (or ``TRISTOCK_SCHEDULER``): an existing Dask cluster,
  whose workers need tristock installed at the same version.

The catalog goes to the workers once (scattered); each task is one design. The results come
back in the order of the tasks, and each is computed by the same deterministic function, so
the answer does not depend on where it ran.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

from dask.base import compute
from dask.delayed import delayed as delay

from tristock.stock.catalog import Catalog

T = TypeVar("T")
R = TypeVar("R")

SCHEDULER_ENV = "TRISTOCK_SCHEDULER"
#: Seconds to wait for an existing scheduler to answer.
CONNECT_TIMEOUT_S = 10.0


class SchedulerUnavailable(RuntimeError):
    """The Dask scheduler named cannot be reached (CLI exit 1, HTTP 503)."""


def describe(workers: int | None, scheduler: str | None) -> str:
    scheduler = scheduler or os.environ.get(SCHEDULER_ENV) or None
    if scheduler:
        return f"dask cluster at {scheduler}"
    if workers:
        return f"dask LocalCluster, {workers} worker process{'es' if workers > 1 else ''}"
    return "in-process (dask synchronous)"


def run_all(
    function: Callable[[T, Catalog], R],
    tasks: Sequence[T],
    catalog: Catalog,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
) -> list[R]:
    """``[function(task, catalog) for task in tasks]``, computed where the options say."""
    if not tasks:
        return []
    scheduler = scheduler or os.environ.get(SCHEDULER_ENV) or None
    if scheduler is None and not workers:
        shared = delay(catalog, pure=False)  # one node, not one copy per task
        graph = [delay(function, pure=False)(task, shared) for task in tasks]
        return list(compute(*graph, scheduler="synchronous"))  # type: ignore[no-untyped-call]
    from distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=CONNECT_TIMEOUT_S)  # type: ignore[no-untyped-call]
        except (OSError, TimeoutError) as err:
            raise SchedulerUnavailable(f"dask scheduler {scheduler}: {err}") from None
        with client:
            return _on(client, function, tasks, catalog)
    with (
        LocalCluster(  # type: ignore[no-untyped-call]
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            silence_logs=40,
        ) as cluster,
        Client(cluster) as client,  # type: ignore[no-untyped-call]
    ):
        return _on(client, function, tasks, catalog)


def _on(
    client: Any, function: Callable[[T, Catalog], R], tasks: Sequence[T], catalog: Catalog
) -> list[R]:
    shared = client.scatter(catalog, broadcast=True)
    futures = client.map(function, list(tasks), [shared] * len(tasks), pure=False)
    results: list[R] = client.gather(futures)
    return results
