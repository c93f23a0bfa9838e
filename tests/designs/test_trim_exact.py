"""The trimmed search against brute force over the FULL circuit model (``trim_reference``:
every combination of a small catalog by ``physics.predict``, the README's rules, the box
coverage from the analysis itself), on a fixed catalog and on random ones; the relaxations
(pair bounds, R3 windows, probe corners) and the resolution bound checked on their own.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from trim_reference import (
    OPAMPS,
    TIME_LIMIT_S,
    Ids,
    accepted_rows,
    box_covers,
    box_frequency,
    reference,
    searched,
    small_catalog,
    small_spec,
)

from tristock.circuits.opamp_schmitt.physics import predict
from tristock.designs.trimmed.context import trim_context
from tristock.designs.trimmed.probes import row_reach
from tristock.designs.trimmed.walk import TrimSearch
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor


def test_search_equals_brute_force_on_the_small_catalog() -> None:
    spec, cat = small_spec(), small_catalog()
    rows = accepted_rows(spec, cat)
    assert len(rows) > 20  # a real ranking, not one row
    want = reference(spec, cat, 10)
    assert len(want) == 10
    got, proven = searched(spec.model_copy(update={"ranking": spec.ranking.model_copy(
        update={"top": 10})}), cat)  # fmt: skip
    assert proven
    assert got == want


def test_a_trimmer_too_small_covers_nowhere_in_the_brute_force_either() -> None:
    spec = small_spec()
    cat = small_catalog()
    tiny = Catalog(cat.path, cat.resistors, cat.capacitors, cat.opamps,
                   (Pot("TV-100", 100.0, 10.0, 100.0, "trimmer", 0.1, 1000),))  # fmt: skip
    assert reference(spec, tiny, 1) == []
    got, proven = searched(spec, tiny)
    assert got == [] and proven


def test_every_covering_row_is_a_candidate_of_the_search() -> None:
    """Completeness of the relaxations (pair bounds, R3 windows, probe corners): every row
    the brute force accepts and the box covers is a candidate the exhausted search listed,
    and every candidate is a row the brute force accepts."""
    spec, cat = small_spec(), small_catalog()
    covering = {tuple(key[3:]) for key, d in accepted_rows(spec, cat) if box_covers(spec, d)}
    accepted = {tuple(key[3:]) for key, _ in accepted_rows(spec, cat)}
    assert len(covering) > 10
    search = TrimSearch(trim_context(spec, cat), time.perf_counter() + TIME_LIMIT_S)
    listed: set[Ids] = set()
    while not search.exhausted:
        rows = search.advance()
        listed |= {search.ids(rows, n) for n in range(len(rows))}
    assert search.bounds_held
    assert covering <= listed <= accepted


def test_probe_corners_lie_inside_the_box_the_final_check_bounds() -> None:
    """Each probe is a corner of the analysis's box: its frequency lies between the box's
    extremes at the same wiper (``trim_reference.box_frequency``)."""
    spec, cat = small_spec(), small_catalog()
    ctx = trim_context(spec, cat)
    rng = np.random.default_rng(7)
    model = ctx.model
    n = 12
    sizes = (len(model.opamps), *[len(model.resistors)] * 3, len(model.capacitors), len(ctx.pots))
    idx = [rng.integers(0, size, n) for size in sizes]
    slow, fast = row_reach(ctx, *(np.asarray(x, dtype=np.int64) for x in idx))
    m = ctx.margin
    for r in range(n):
        d = ctx.design(*(int(x[r]) for x in idx), wiper=0.5)
        near = box_frequency(dataclasses.replace(d, wiper=m), spec)
        far = box_frequency(dataclasses.replace(d, wiper=1 - m), spec)
        assert near[0] * (1 - 1e-12) <= slow[r] <= near[1] * (1 + 1e-12)
        assert far[0] * (1 - 1e-12) <= fast[r] <= far[1] * (1 + 1e-12)


# --------------------------------------------------------------------------------------------
# Random catalogs


@st.composite
def trim_cases(draw: st.DrawFn) -> tuple[Spec, Catalog, int]:
    """A random small stock room and a trimmed spec aimed at one of its combinations: a pair
    with k = R1/R2 in 0.1..0.6, R3 and a trimmer of 0.1..1x R3, wiper at mid-travel, so that
    most examples have covering designs; the rest of the room is random."""
    pool = eseries.values("E24", 1e3, 91e3)  # IEC 60063
    i3 = draw(st.integers(2, len(pool) - 3))
    values = set(draw(st.lists(st.sampled_from(pool), min_size=5, max_size=9)))
    values |= {pool[i3 - 1], pool[i3], pool[i3 + 1]}
    res = tuple(
        Resistor(f"TR-{n}", v, draw(st.sampled_from([1.0, 0.1, 1.0, 5.0])),
                 draw(st.sampled_from([100.0, 25.0, 200.0])), None, 0.1, "0603",
                 draw(st.sampled_from([0.01, 0.02])), draw(st.sampled_from([1000, 1000, 15])))
        for n, v in enumerate(sorted(values))
    )  # fmt: skip
    cvalues = draw(st.lists(st.sampled_from([22e-9, 10e-9, 47e-9, 4.7e-9, 100e-9]), min_size=2,
                            max_size=3, unique=True))  # fmt: skip
    caps = tuple(
        Capacitor(f"TC-{n}", v, "C0G", draw(st.sampled_from([2.0, 1.0, 5.0])), 0.0, None,
                  draw(st.sampled_from([50.0, 50.0, 6.0])), "0805",
                  draw(st.sampled_from([0.05, 0.08])), 1000)
        for n, v in enumerate(sorted(cvalues))
    )  # fmt: skip
    r3 = next(r for r in res if r.value_ohm == pool[i3])
    ratios = draw(st.lists(st.sampled_from([0.5, 1.0, 0.3, 0.2, 0.1]), min_size=1, max_size=3,
                           unique=True))  # fmt: skip
    pots = tuple(
        Pot(f"TV-{n}", round(r3.value_ohm * x, -1), draw(st.sampled_from([10.0, 20.0])),
            draw(st.sampled_from([100.0, 50.0])), "trimmer", draw(st.sampled_from([0.2, 0.5])),
            draw(st.sampled_from([1000, 1000, 5])))
        for n, x in enumerate(sorted(ratios))
    )  # fmt: skip
    ops = tuple(draw(st.lists(st.sampled_from(OPAMPS), min_size=1, max_size=2, unique=True)))
    cat = Catalog(Path("<hypothesis>"), res, caps, ops, pots)
    u = draw(st.sampled_from(ops))
    pairs = [(a, b) for a in res for b in res if 0.1 < a.value_ohm / b.value_ohm < 0.6]
    assume(pairs)
    r1, r2 = draw(st.sampled_from(pairs))
    cap, pot = draw(st.sampled_from(caps)), draw(st.sampled_from(pots))
    vh, vl = 12.0 - u.swing_pos_v, 12.0 - u.swing_neg_v
    aim = predict(r1.value_ohm, r2.value_ohm, r3.value_ohm + 0.5 * pot.value_ohm, cap.value_f,
                  vh, vl, slew_rise=u.slew_v_per_s, slew_fall=u.slew_v_per_s, delay=u.delay_s,
                  gbw=u.gbw_hz, integrator_gbw=u.gbw_hz)  # fmt: skip
    target, amplitude = float(aim.frequency_hz), float(aim.amplitude_vpp)
    assume(20.0 < target < 50e3 and amplitude < 16.0)
    trim: dict[str, Any] = {"margin_pct": draw(st.sampled_from([10.0, 5.0, 20.0]))}
    drift = draw(st.sampled_from([None, None, 0.3, 1.0]))
    if drift is not None:
        trim["drift_after_trim_pct"] = drift
    limits: dict[str, Any] = {"max_timing_share": draw(st.sampled_from([0.1, 0.1, 0.3]))}
    cost = draw(st.sampled_from([None, None, 0.9]))
    if cost is not None:
        limits["max_cost"] = cost
    top = draw(st.integers(1, 5))
    spec = parse_spec({
        "supply": {"positive_v": 12.0, "negative_v": -12.0,
                   "tolerance_pct": draw(st.sampled_from([2.0, 1.0, 5.0]))},
        "frequency": {"target_hz": target, "tolerance_pct": 0.5},
        "triangle": {"amplitude_vpp": amplitude,
                     "tolerance_pct": draw(st.sampled_from([10.0, 5.0, 2.0]))},
        "environment": {"temp_min_c": draw(st.sampled_from([0.0, -20.0, 30.0])),
                        "temp_max_c": 60.0},
        "build": {"boards": draw(st.sampled_from([1, 10]))},
        "limits": limits,
        "trim": trim,
        "ranking": {"top": top},
    })  # fmt: skip
    return spec, cat, top


@settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
@given(trim_cases())
def test_search_equals_brute_force_on_random_catalogs(case: tuple[Spec, Catalog, int]) -> None:
    spec, cat, top = case
    got, proven = searched(spec, cat)
    assert proven
    assert got == reference(spec, cat, top)


@pytest.mark.parametrize("bias", [0.0, 1e-9, 1e-7])
def test_resolution_never_falls_below_its_cell_bound(bias: float) -> None:
    """The bound of ``trim.cells`` (proven there) against the resolution the rows report, on
    every candidate of an exhausted search with an op amp whose bias current is large."""
    spec, cat = small_spec(), small_catalog()
    u = OPAMPS[0]
    heavy = OpAmp(u.id, u.channels, u.supply_min_v, u.supply_max_v, u.swing_pos_v,
                  u.swing_neg_v, u.slew_v_per_us, u.gbw_hz, u.delay_s, 5e-3, bias,
                  u.output_a, u.unit_cost, u.stock)  # fmt: skip
    cat = Catalog(cat.path, cat.resistors, cat.capacitors, (heavy,), cat.pots)
    search = TrimSearch(trim_context(spec, cat), time.perf_counter() + TIME_LIMIT_S)
    seen = 0
    while not search.exhausted:
        rows = search.advance()
        seen += len(rows)
    assert seen > 0
    assert search.bounds_held and search.stats.bound_violations == 0


def test_the_keys_of_the_brute_force_are_distinct() -> None:
    """Sanity of the reference: one key per combination (stock codes end every key)."""
    rows = accepted_rows(small_spec(), small_catalog())
    keys = [k for k, _ in rows]
    assert len(set(keys)) == len(keys)
    assert all(isinstance(x, int) for k in keys for x in k[:3])


def _variant(name: str) -> tuple[Spec, Catalog]:
    """The small room and spec with one less common setting."""
    data = small_spec().model_dump()
    data["ranking"]["top"] = 5
    cat = small_catalog()
    if name == "single supply, mid-rail reference":
        data["supply"].update(positive_v=24.0, negative_v=0.0)
    elif name == "class II capacitors allowed":
        data["limits"]["dielectrics"] = ("C0G", "X7R")
        x7r = tuple(Capacitor(f"TX-{v:g}", v, "X7R", 10.0, None, 15.0, 50.0, "0805", 0.02, 1000)
                    for v in (2.2e-9, 4.7e-9, 10e-9))  # fmt: skip
        cat = Catalog(cat.path, cat.resistors, cat.capacitors + x7r, cat.opamps, cat.pots)
    elif name == "no margin":
        data["trim"]["margin_pct"] = 0.0
    elif name == "one temperature":
        data["environment"].update(temp_min_c=40.0, temp_max_c=40.0)
    elif name == "cost cap":
        data["limits"]["max_cost"] = 0.85
    return parse_spec(data), cat


@pytest.mark.parametrize(
    "name",
    ["single supply, mid-rail reference", "class II capacitors allowed", "no margin",
     "one temperature", "cost cap"],
)  # fmt: skip
def test_search_equals_brute_force_on_less_common_settings(name: str) -> None:
    spec, cat = _variant(name)
    want = reference(spec, cat, 5)
    assert len(want) == 5
    got, proven = searched(spec, cat)
    assert proven and got == want


@settings(
    max_examples=15,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
@given(trim_cases())
def test_every_covering_row_is_a_candidate_on_random_catalogs(
    case: tuple[Spec, Catalog, int],
) -> None:
    """The relaxations on random rooms: the exhausted search lists every row that the brute
    force accepts and the box covers, and lists only rows the brute force accepts."""
    spec, cat, _ = case
    rows = accepted_rows(spec, cat)
    accepted = {tuple(key[3:]) for key, _ in rows}
    covering = {tuple(key[3:]) for key, d in rows if box_covers(spec, d)}
    search = TrimSearch(trim_context(spec, cat), time.perf_counter() + TIME_LIMIT_S)
    listed: set[Ids] = set()
    while not search.exhausted:
        found = search.advance()
        listed |= {search.ids(found, n) for n in range(len(found))}
    assert search.bounds_held
    assert covering <= listed <= accepted
