"""The per-design work on Dask: the same report in-process, on a 2-worker LocalCluster
(``workers=2``) and on an existing cluster reached by its scheduler's address."""

from __future__ import annotations

from typing import Any

import pytest
from distributed import LocalCluster
from test_registry_impact import SCENARIOS, TIME_LIMIT_S, released, small_catalog

from tristock.registry import runner
from tristock.registry.impact import ImpactSettings, impact
from tristock.registry.impact_report import ImpactReport
from tristock.registry.records import RevisionOut
from tristock.registry.release import with_stock
from tristock.registry.runner import SchedulerUnavailable, run_all

__all__ = ["released"]  # the module fixture, shared


def comparable(report: ImpactReport) -> dict[str, Any]:
    """The report without what depends on the clock or on where it ran."""
    data = report.model_dump(mode="json", exclude={"elapsed_s", "scheduler", "work"})
    assert data["proposal"] is not None
    data["proposal"].pop("solve_s")
    data["proposal"].pop("bound_s")
    return data


def test_identical_results_whichever_scheduler_runs_them(released: list[RevisionOut]) -> None:
    catalog = with_stock(small_catalog(), SCENARIOS["two codes short at once"])
    limits: dict[str, Any] = {"time_limit_s": TIME_LIMIT_S, "joint_time_limit_s": TIME_LIMIT_S}
    here = impact(released, catalog, ImpactSettings(**limits))
    local = impact(released, catalog, ImpactSettings(workers=2, **limits))
    assert local.scheduler == "dask LocalCluster, 2 worker processes"
    assert comparable(local) == comparable(here)
    with LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        remote = impact(
            released, catalog, ImpactSettings(scheduler=cluster.scheduler_address, **limits)
        )
    assert remote.scheduler.startswith("dask cluster at tcp://")
    assert comparable(remote) == comparable(here)
    assert [w.name for w in remote.work] == [w.name for w in here.work]


def test_an_unreachable_scheduler_is_one_error(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(runner, "CONNECT_TIMEOUT_S", 1.0)
    with pytest.raises(SchedulerUnavailable, match=r"tcp://127\.0\.0\.1:9"):
        run_all(lambda task, catalog: task, [1], small_catalog(), scheduler="tcp://127.0.0.1:9")
