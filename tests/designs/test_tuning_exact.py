"""The tuned search is exact under the full model: brute force, bounds, chains and the dial.

Outside references, named beside each check:

- the brute force of ``tuned_reference`` (every combination and capacitor set of a small
  random catalog, the full model through ``Design.oscillator`` on a grid of the dial, the
  spread box through ``worstcase.box_extremes``, chains by ``itertools.combinations``),
  written apart from the search's bounds and pruning;
- plain brute force over every subset of capacitors (``itertools``) for the chain functions;
- a dense grid of wiper positions for the dial's certified checks.

The random catalogs use invented stock codes (TR-/TC-/TU-/VP- prefixes).
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path
from typing import Any

import numpy as np
from hypothesis import HealthCheck, given, note, settings
from hypothesis import strategies as st
from numpy.typing import NDArray
from tuned_reference import accepted, reference

from tristock.designs.tuned import design_tuned
from tristock.designs.tuned.bounds import chain_floor, shared_bounds
from tristock.designs.tuned.chains import (
    INF,
    Changes,
    Ranges,
    completion,
    enumerate_chains,
    fewest,
    least_cost,
    least_cost_envelope,
    steps,
)
from tristock.designs.tuned.corners import pair_factors
from tristock.designs.tuned.dial import Limits, check_dial, point_ok
from tristock.designs.tuned.model import build_tuned_model
from tristock.designs.tuned.network import Shared, at_wiper, dial_ends, nominal_board
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

F64 = NDArray[np.float64]
SLOW = settings(max_examples=12, deadline=None, suppress_health_check=list(HealthCheck))
FAST = settings(max_examples=120, deadline=None, suppress_health_check=list(HealthCheck))


# --------------------------------------------------------------------------------------------
# Random small stock rooms


def resistor(v: float, tol: float, tc: float, cost: float) -> Resistor:
    return Resistor(f"TR-{v:g}-{tol:g}", v, tol, tc, "E12", 0.25, "0603", cost, 500)


def capacitor(v: float, tol: float, cost: float) -> Capacitor:
    return Capacitor(f"TC-{v:g}-{tol:g}", v, "C0G", tol, 30.0, None, 50.0, "0603", cost, 500)


@st.composite
def stock_rooms(draw: st.DrawFn) -> tuple[Spec, Catalog]:
    """One op amp, three resistors around the k an amplitude of 6 Vpp needs, four or five
    capacitors, one or two panel pots, and a span the catalog can reach."""
    slew = draw(st.sampled_from([5.0, 13.0, 30.0]))
    delay = draw(st.sampled_from([0.1e-6, 0.5e-6, 1.2e-6]))
    gbw = draw(st.sampled_from([3e6, 10e6, math.inf]))
    offset = draw(st.sampled_from([0.0, 2e-3]))
    bias = draw(st.sampled_from([0.0, 30e-12, 50e-9]))
    op = OpAmp("TU-1", 2, 3.0, 40.0, 1.5, 1.5, slew, gbw, delay, offset, bias, 0.02, 0.3, 500)
    # 1k/3.3k and 3.3k/10k give k near 0.3 (6 Vpp on ±12 V); the fourth value varies R3/R4.
    values = [1e3, 3.3e3, 10e3, draw(st.sampled_from([2.2e3, 4.7e3, 22e3]))]
    res = tuple(
        resistor(
            v,
            draw(st.sampled_from([1.0, 5.0])),
            draw(st.sampled_from([50.0, 200.0])),
            draw(st.sampled_from([0.002, 0.004])),
        )
        for v in values
    )
    base = draw(st.sampled_from([1e-9, 2.2e-9, 4.7e-9]))
    ratio = draw(st.sampled_from([2.2, 3.3, 4.7]))
    caps = tuple(
        capacitor(base * ratio**i, draw(st.sampled_from([2.0, 5.0])), 0.01 + 0.005 * i)
        for i in range(draw(st.integers(3, 5)))
    )
    pots = tuple(
        Pot(f"VP-{v:g}", v, draw(st.sampled_from([10.0, 20.0])), 150.0, "panel", c, 500)
        for v, c in draw(
            st.sampled_from([((10e3, 1.5),), ((47e3, 1.2),), ((10e3, 1.5), (47e3, 1.5))])
        )
    )
    control = draw(st.sampled_from(["series", "divider"]))
    low = draw(st.sampled_from([100.0, 300.0]))
    high = low * draw(st.sampled_from([3.0, 10.0, 30.0]))
    data: dict[str, Any] = {
        "supply": {
            "positive_v": 12.0,
            "negative_v": -12.0,
            "tolerance_pct": draw(st.sampled_from([0.0, 3.0])),
        },
        "triangle": {"amplitude_vpp": 6.6, "tolerance_pct": draw(st.sampled_from([12.0, 25.0]))},
        "environment": draw(st.sampled_from([{}, {"temp_min_c": 0.0, "temp_max_c": 50.0}])),
        "tuning": {
            "low_hz": low,
            "high_hz": high,
            "control": control,
            "overlap_pct": draw(st.sampled_from([0.0, 5.0])),
            "ranges": draw(st.sampled_from(["auto", "auto", 2])),
        },
        "limits": {
            "guarantee": draw(st.sampled_from(["nominal", "worst_case"])),
            "max_timing_share": draw(st.sampled_from([0.1, 0.25])),
        },
        "ranking": {"top": 4},
    }
    return parse_spec(data), Catalog(Path("<memory>"), res, caps, (op,), pots)


def found(spec: Spec, catalog: Catalog) -> list[tuple[Any, ...]]:
    result = design_tuned(spec, catalog, time_limit_s=120.0, samples=200)
    assert result.search.proven_optimal
    out = []
    for c in result.candidates:
        assert c.tuning is not None
        ids = tuple(v.id for k, v in c.parts.items() if k in ("U1", "R1", "R2", "R3"))
        r4 = c.parts["R4"].id if "R4" in c.parts else ""
        caps = tuple(c.parts[f"C{s + 1}"].id for s in range(len(c.tuning.ranges)))
        out.append(
            (len(c.tuning.ranges), round(c.cost * 1e6), (*ids, r4, c.parts["RV1"].id, *caps))
        )
    if not out:
        assert result.infeasible is not None and result.infeasible.reasons
    return out


@SLOW
@given(stock_rooms())
def test_search_equals_brute_force_over_the_full_model(room: tuple[Spec, Catalog]) -> None:
    """Top-k (range count, cost, stock codes) and their order equal the brute force's
    (``tuned_reference``), and the search says it is proven."""
    spec, catalog = room
    ref = reference(spec, catalog)
    got = found(spec, catalog)
    note(f"reference {ref}")
    assert [(n, cost, ids) for n, cost, _, ids in ref] == got


def test_search_equals_brute_force_on_a_case_with_answers() -> None:
    """A fixed case known to have several answers (so the property above is not vacuous):
    divider, two ranges, ties in cost broken by evenness and stock codes."""
    res = tuple(resistor(v, 1.0, 100.0, 0.01) for v in (10e3, 22e3, 33e3, 47e3, 100e3))
    caps = tuple(
        capacitor(v, 5.0, c)
        for v, c in ((1e-9, 0.02), (2.2e-9, 0.021), (4.7e-9, 0.03), (10e-9, 0.04), (22e-9, 0.05))
    )
    op = OpAmp("TU-1", 2, 3.0, 40.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.3, 10000)
    pots = (
        Pot("VP-10K", 10e3, 20.0, 150.0, "panel", 1.5, 1000),
        Pot("VP-50K", 50e3, 20.0, 150.0, "panel", 1.2, 1000),
    )
    catalog = Catalog(Path("<memory>"), res, caps, (op,), pots)
    spec = parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 7.0, "tolerance_pct": 15.0},
            "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
            "tuning": {"low_hz": 300.0, "high_hz": 3e3, "control": "divider"},
            "ranking": {"top": 4},
        }
    )
    ref = reference(spec, catalog)
    assert len(ref) == 4
    assert [(n, cost, ids) for n, cost, _, ids in ref] == found(spec, catalog)


# --------------------------------------------------------------------------------------------
# The bounds hold for every design the brute force accepts


def _shared(spec: Spec, catalog: Catalog, ids: tuple[str, ...]) -> tuple[Any, Shared, list[int]]:
    model = build_tuned_model(spec, catalog)
    res = [p.id for p in model.resistors.parts]
    caps = [p.id for p in model.capacitors.parts]
    u = [o.part.id for o in model.opamps].index(ids[0])
    row = [u, res.index(ids[1]), res.index(ids[2]), res.index(ids[3])]
    row.append(res.index(ids[4]) if ids[4] else -1)
    row.append([p.id for p in model.pots].index(ids[5]))
    sh = Shared(*(np.array([x], dtype=np.int64) for x in row), cost=np.zeros(1, dtype=np.int64))
    return model, sh, [caps.index(c) for c in ids[6:]]


@SLOW
@given(stock_rooms())
def test_bounds_hold_for_every_accepted_design(room: tuple[Spec, Catalog]) -> None:
    """For every design the brute force accepts: its range count is at least the combination's
    fewest-ranges bound, C1 is at least the smallest C1, Cn at most the largest Cn, and the
    chain floor at the pair's k is at most the capacitors' cost (``bounds``)."""
    spec, catalog = room
    for n, _cost, _, ids in accepted(spec, catalog)[:40]:
        model, sh, chain = _shared(spec, catalog, ids)
        res = model.resistors
        k = res.value[sh.i1] / res.value[sh.i2]
        b, c = shared_bounds(model, sh.u, sh.i3, sh.i4, sh.v, pair_factors(model, sh.i1, sh.i2, k))
        note(f"{ids}: fewest {b.fewest}, window {b.c_min}..{b.c_max}")
        assert b.feasible[0]
        assert b.fewest[0] <= n
        values = model.capacitors.value[chain]
        assert b.c_min[0] <= values[0] and values[-1] <= b.c_max[0]
        caps_cost = int(model.capacitor_cost[chain].sum())
        assert chain_floor(model, c, k, k, n)[0] <= caps_cost


# --------------------------------------------------------------------------------------------
# Chains against brute force


@st.composite
def interval_sets(draw: st.DrawFn) -> tuple[F64, F64, NDArray[np.int64], F64, float, float, float]:
    """Ranges [gl, gh] of up to 7 capacitors (values descending with index reversed), costs,
    and a span; strewn so covering chains are common but not certain."""
    n = draw(st.integers(1, 7))
    low = 10 ** draw(st.floats(0.0, 1.0))
    high = low * 10 ** draw(st.floats(0.3, 2.5))
    start = st.floats(math.log10(low) - 0.6, math.log10(high) + 0.1)
    lg = np.sort(np.array([draw(start) for _ in range(n)]))[::-1]  # larger C: lower range
    width = np.array([draw(st.floats(0.3, 2.0)) for _ in range(n)])
    gl = 10.0**lg
    gh = 10.0 ** (lg + width)
    gone = np.array([draw(st.sampled_from([False] * 6 + [True])) for _ in range(n)])
    gl = np.where(gone, np.inf, gl)
    gh = np.where(gone, 0.0, gh)
    cost = np.array(
        [draw(st.sampled_from([100, 200, 500, 1000])) for _ in range(n)], dtype=np.int64
    )
    value = np.arange(1.0, n + 1.0)  # ascending value = descending range
    # reorder to ascending value: the lowest range has the largest value
    order = np.arange(n)[::-1]
    overlap = draw(st.sampled_from([0.0, 0.05, 0.2]))
    return gl[order], gh[order], cost[order], value, low, high, overlap


def chains(
    gl: F64, gh: F64, value: F64, n: int, low: float, high: float, o: float
) -> list[tuple[int, ...]]:
    """Every chain of n by brute force: C1 the largest value, values strictly falling,
    gl(C1) ≤ low, gh(Cn) ≥ high, neighbours overlap, every range reaches into the span."""
    out = []
    for subset in itertools.combinations(range(len(gl)), n):
        c = sorted(subset, key=lambda j: -value[j])
        if any(value[a] <= value[b] for a, b in itertools.pairwise(c)):
            continue
        if not all(
            math.isfinite(gl[j]) and gl[j] < gh[j] and gh[j] >= low and gl[j] <= high for j in c
        ):
            continue
        if gl[c[0]] > low or gh[c[-1]] < high:
            continue
        if all(gh[a] >= gl[b] * (1 + o) for a, b in itertools.pairwise(c)):
            out.append(tuple(c))
    return out


@FAST
@given(interval_sets(), st.integers(1, 4))
def test_least_cost_fewest_and_enumeration_equal_brute_force(case: Any, n: int) -> None:
    gl, gh, cost, value, low, high, o = case
    usable = np.isfinite(gl) & (gl < gh) & (gh >= low) & (gl <= high)
    r = Ranges(usable[None, :], gl[None, :], gh[None, :], cost, value)
    allowed = steps(r, o)
    comp = completion(r, allowed, n, high)
    brute = chains(gl, gh, value, n, low, high, o)
    least = int(least_cost(r, comp, n, low)[0])
    assert least == min((int(cost[list(c)].sum()) for c in brute), default=INF)
    listed = sorted(enumerate_chains(r, 0, allowed, comp, n, low, (-1, 10**9)))
    assert listed == sorted((c, int(cost[list(c)].sum())) for c in brute)
    # a window lists exactly the chains whose cost lies in it
    if brute:
        mid = least + 150
        window = sorted(c for c, _ in enumerate_chains(r, 0, allowed, comp, n, low, (least, mid)))
        assert window == sorted(c for c in brute if least < cost[list(c)].sum() <= mid)
    envelope = int(least_cost_envelope(r.gl, r.gh, cost, value, n, low, high, o)[0])
    assert envelope <= least
    first = next((m for m in range(1, 9) if chains(gl, gh, value, m, low, high, o)), 9)
    assert int(fewest(r, o, low, high, 8)[0]) == first


@FAST
@given(interval_sets(), st.integers(1, 3), st.integers(0, 3))
def test_enumeration_with_a_change_count_equals_brute_force(case: Any, n: int, count: int) -> None:
    """Re-optimisation's chain rule: exactly ``count`` changed slots against an old chain
    (a slot differs when its capacitor does; each range added or removed counts once)."""
    gl, gh, cost, value, low, high, o = case
    usable = np.isfinite(gl) & (gl < gh) & (gh >= low) & (gl <= high)
    r = Ranges(usable[None, :], gl[None, :], gh[None, :], cost, value)
    old = tuple(int(j) for j in np.argsort(-value)[:2])
    allowed = steps(r, o)
    comp = completion(r, allowed, n, high)
    got = sorted(
        c
        for c, _ in enumerate_chains(r, 0, allowed, comp, n, low, (-1, 10**9), Changes(old, count))
    )

    def changed(c: tuple[int, ...]) -> int:
        return sum(c[s] != old[s] for s in range(min(len(c), len(old)))) + abs(len(c) - len(old))

    assert got == sorted(c for c in chains(gl, gh, value, n, low, high, o) if changed(c) == count)


# --------------------------------------------------------------------------------------------
# The dial: certified checks against a dense grid


@SLOW
@given(stock_rooms())
def test_dial_check_passes_only_when_every_grid_position_passes(room: tuple[Spec, Catalog]) -> None:
    """``check_dial`` accepts a range only if the exact rules hold at 401 wiper positions
    (a dense grid; the certified enclosure covers the rest)."""
    spec, catalog = room
    model = build_tuned_model(spec, catalog)
    assert spec.tuning is not None
    control = spec.tuning.control
    rows = [
        (0, i1, i2, i3, i4 if control == "divider" else -1, v)
        for i1, i2, i3, i4 in itertools.product(range(len(model.resistors)), repeat=4)
        for v in range(len(model.pots))
    ][:60]
    if not model.opamps or not rows:
        return
    nc = len(model.capacitors)
    cols = [np.repeat(np.array([r[f] for r in rows], dtype=np.int64), nc) for f in range(6)]
    sh = Shared(*cols, cost=np.zeros(len(cols[0]), dtype=np.int64))
    j = np.tile(np.arange(nc, dtype=np.int64), len(rows))
    board = nominal_board(model, sh, j)
    limits = Limits.of(spec)
    rating = model.capacitors.voltage[j]
    result = check_dial(board, control, dial_ends(control), limits, rating)
    grid_ok = np.ones(len(j), dtype=bool)
    for alpha in np.linspace(0.0, 1.0, 401):
        grid_ok &= point_ok(board, at_wiper(board, float(alpha), control), limits, rating)
    assert not np.any(result.ok & ~grid_ok)
