"""Boards of the variant topologies built from the demo stock room's parts, and a runner
that measures them in ngspice from each topology's own netlist and holds the model to it
(shared by the variants' ngspice tests: ``measured_fixture`` and ``check_case``)."""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any

import pytest

from ngspice_harness import NgspiceError, require_ngspice, run_ngspice
from tristock.circuits.board import Board, resolve_board
from tristock.circuits.rails import Rails
from tristock.circuits.spicelines import MEASURES
from tristock.circuits.topology import Topology
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import load_catalog


@dataclass(frozen=True)
class Case:
    """One board on its rails at a temperature."""

    topology: Topology
    board: Board
    rails: Rails
    temp_c: float = 25.0

    def oscillator(self) -> Any:
        return self.topology.oscillator(self.board, self.rails, self.temp_c)


def case(
    topology: Topology, ids: Mapping[str, str], rails: tuple[float, float], temp_c: float = 25.0
) -> Case:
    catalog = load_catalog(demo_catalog_dir())
    return Case(topology, resolve_board(topology, dict(ids), catalog), Rails(*rails), temp_c)


def board_case(
    topology: Topology,
    designators: tuple[str, ...],
    codes: str,
    diodes: Mapping[str, str],
    rails: tuple[float, float],
    temp_c: float = 25.0,
) -> Case:
    """A case from the stock codes of ``designators`` (space-separated, in that order) and
    the diodes' by designator."""
    ids = dict(zip(designators, codes.split(), strict=True))
    return case(topology, {**ids, **diodes}, rails, temp_c)


def measure(case: Case) -> dict[str, float] | NgspiceError:
    """The ngspice measurements of the case's netlist (3 periods after start-up)."""
    try:
        meas = run_ngspice(case.topology.netlist(case.oscillator(), periods=3), timeout_s=600.0)
    except NgspiceError as exc:
        return exc
    missing = [m for m in MEASURES if m not in meas]
    if missing:
        return NgspiceError(f"ngspice reported no {', '.join(missing)}")
    return meas


def measure_all(cases: Mapping[str, Case]) -> dict[str, dict[str, float] | NgspiceError]:
    """Every case, concurrently (one ngspice process per case, at most 2 at a time)."""
    workers = min(2, os.cpu_count() or 1)
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = {name: pool.submit(measure, c) for name, c in cases.items()}
        return {name: fut.result() for name, fut in futures.items()}


def errors(case: Case, meas: dict[str, float]) -> dict[str, float]:
    """Model against ngspice: relative frequency and amplitude errors, duty difference."""
    p = case.oscillator().prediction()
    vpp = meas["vtmax"] - meas["vtmin"]
    return {
        "frequency": float(p.frequency_hz) * meas["per"] - 1.0,
        "amplitude": float(p.amplitude_vpp) / vpp - 1.0,
        "duty": float(p.duty_high) - meas["duty"],
    }


Measured = dict[str, dict[str, float] | NgspiceError]

#: The model against ngspice (issue 13): frequency and amplitude (relative), duty (points).
FREQUENCY_LIMIT = 3e-3
AMPLITUDE_LIMIT = 3e-3
DUTY_LIMIT = 5e-3


def measured_fixture(cases: Mapping[str, Case]) -> Callable[[], Measured]:
    """A module fixture ``measured``: every case run once in ngspice (``measure_all``)."""

    @pytest.fixture(scope="module")
    def measured() -> Measured:
        require_ngspice()
        return measure_all(cases)

    return measured


def check_case(
    name: str,
    cases: Mapping[str, Case],
    measured: Measured,
    record_property: Callable[[str, object], None],
) -> None:
    """The model of case ``name`` against its ngspice run: the errors printed (``pytest -s``)
    and recorded as properties, each held to its limit."""
    meas = measured[name]
    if isinstance(meas, NgspiceError):
        pytest.fail(f"{name}: {meas}")
    err = errors(cases[name], meas)
    print(f"{name}: " + ", ".join(f"{k} {v:+.2e}" for k, v in err.items()))
    for key, value in err.items():
        record_property(key, value)
    # reference: ngspice transient run of the case's own netlist (``Topology.netlist``)
    assert abs(err["frequency"]) <= FREQUENCY_LIMIT
    assert abs(err["amplitude"]) <= AMPLITUDE_LIMIT
    assert abs(err["duty"]) <= DUTY_LIMIT
