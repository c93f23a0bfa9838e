"""Panel-tuned designs (``tristock.tuning``): dial law, range chains, coverage, JSON and CLI.

Outside references, named beside each check:

- the textbook frequency of the ideal symmetric oscillator, f = R2/(4·R1·R3·C1) (Sedra &
  Smith, *Microelectronic Circuits*, bistable multivibrator with integrator; from memory),
  with the pot in the timing path: series R3 -> R3 + α·RV, so f(α) = f0/(1 + α·RV/R3), and
  divider: the wiper is a Thévenin source β·V of resistance R_th, β = (R4 + α·RV)/(R4 + RV),
  R_th = (1 - α)·RV ∥ (R4 + α·RV) (common practice);
- plain brute force over every subset of capacitors written here (itertools.combinations)
  for the range-chain functions;
- the corner brute force of the full model from ``test_trim.corner_frequencies`` at both
  ends of every range;
- the catalog's own prices for the cost of a chain.
"""

from __future__ import annotations

import dataclasses
import itertools
import json
import math
import re
from functools import cache
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.typing import NDArray

from test_trim import capacitor, design_corners, opamp, resistor
from tristock import cli
from tristock.catalog import Catalog, load_catalog
from tristock.design import Control, Design, rails_from_supply
from tristock.parts import Capacitor, OpAmp, Pot, Resistor
from tristock.results import Candidate, DesignResult
from tristock.search import design
from tristock.spec import Spec, parse_spec, read_mapping
from tristock.tuning import (
    _BIG,
    DIAL_POINTS,
    MAX_RANGES,
    _cheapest_chain,
    _choose_caps,
    _Combos,
    _fewest_ranges,
    design_tuned,
    dial_law,
)

REPO = Path(__file__).resolve().parent.parent
DEMO_DIR = REPO / "catalogs" / "demo"
EXAMPLES = REPO / "src" / "tristock" / "examples"

FloatArray = NDArray[np.float64]
P = TypeVar("P", Resistor, Capacitor, OpAmp, Pot)


# --------------------------------------------------------------------------------------------
# Dial law with an ideal op amp


def ideal_opamp() -> OpAmp:
    """No slew limit, delay, GBW limit, offset or bias; 1 V headroom both sides (VH = VL)."""
    return OpAmp("UT-ID", 2, 3.0, 40.0, 1.0, 1.0, math.inf, math.inf, 0.0, 0.0, 0.0, 0.02, 0.5, 10)


def panel(value: float, cost: float = 1.5) -> Pot:
    return Pot(f"VP-{value:g}", value, 20.0, 150.0, "panel", cost, 1000)


def bench_spec(**tuning: Any) -> Spec:
    return parse_spec(
        {
            "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
            "triangle": {"amplitude_vpp": 4.7, "tolerance_pct": 10.0},
            "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
            "tuning": {"low_hz": 300.0, "high_hz": 10e3, "control": "series", **tuning},
            "ranking": {"top": 3},
        }
    )


def textbook_hz(r1: float, r2: float, r3: float, c1: float) -> float:
    """f = R2/(4·R1·R3·C1), ideal op amps, equal swings (Sedra & Smith, from memory)."""
    return r2 / (4 * r1 * r3 * c1)


WIPERS = (0.0, 0.1, 0.25, 0.5, 0.8, 1.0)


def test_series_dial_law_is_f0_over_one_plus_alpha_rv_over_r3() -> None:
    r1, r2, r3, c1, rv = 10e3, 47e3, 4.7e3, 10e-9, 50e3
    d = Design(
        ideal_opamp(), resistor(r1), resistor(r2), resistor(r3), capacitor(c1), rv1=panel(rv)
    )
    rails = rails_from_supply(bench_spec().supply)
    f0 = textbook_hz(r1, r2, r3, c1)
    for a in WIPERS:
        f = float(dataclasses.replace(d, wiper=a).oscillator(rails).frequency_hz)
        # closed form f0/(1 + α·RV/R3) (common practice), f0 textbook (Sedra & Smith)
        assert f == pytest.approx(f0 / (1 + a * rv / r3), rel=1e-12), a
    law = dial_law(d, bench_spec())
    assert law["wiper"] == pytest.approx([i / (DIAL_POINTS - 1) for i in range(DIAL_POINTS)])
    assert law["C1"] == pytest.approx([f0 / (1 + a * rv / r3) for a in law["wiper"]], rel=1e-12)


def _divider(r3: float, rv: float, r4: float) -> Design:
    return Design(
        ideal_opamp(),
        resistor(10e3),
        resistor(47e3),
        resistor(r3),
        capacitor(10e-9),
        rv1=panel(rv),
        control="divider",
        r4=resistor(r4),
    )


def test_divider_dial_is_linear_in_beta_when_r3_dominates() -> None:
    r3, rv, r4 = 1e6, 10e3, 1e3
    d = _divider(r3, rv, r4)
    rails = rails_from_supply(bench_spec().supply)
    f_top = textbook_hz(10e3, 47e3, r3, 10e-9)  # α = 1: β = 1, R_th = 0
    law = dial_law(d, bench_spec())
    assert law["C1"][-1] == pytest.approx(f_top, rel=1e-12)
    # f/f_top = β·R3/(R3 + R_th) with R_th <= (RV + R4)/4: linear in β to that fraction
    bound = (rv + r4) / (4 * r3)
    for a, f_law in zip(law["wiper"], law["C1"], strict=True):
        f = float(dataclasses.replace(d, wiper=a).oscillator(rails).frequency_hz)
        assert f_law == pytest.approx(f, rel=1e-12)
        beta = (r4 + a * rv) / (r4 + rv)
        assert abs(f / (f_top * beta) - 1) <= bound, a
    # the low end of the dial is R4/(R4 + RV) of the top (common practice: end-stop ratio)
    assert law["C1"][0] / law["C1"][-1] == pytest.approx(r4 / (r4 + rv), rel=bound)


def test_divider_dial_is_the_thevenin_form_when_r3_is_comparable_to_rv() -> None:
    r3, rv, r4 = 10e3, 10e3, 2.2e3
    d = _divider(r3, rv, r4)
    rails = rails_from_supply(bench_spec().supply)
    f_top = textbook_hz(10e3, 47e3, r3, 10e-9)
    worst_linear = 0.0
    for a in (*WIPERS, 0.37):
        f = float(dataclasses.replace(d, wiper=a).oscillator(rails).frequency_hz)
        beta = (r4 + a * rv) / (r4 + rv)
        top, bottom = (1 - a) * rv, r4 + a * rv
        r_th = top * bottom / (top + bottom)  # Thévenin resistance at the wiper
        # the integrator sees β·V through R3 + R_th: f = β·R2/(4·R1·(R3 + R_th)·C1)
        assert f == pytest.approx(beta * textbook_hz(10e3, 47e3, r3 + r_th, 10e-9), rel=1e-12)
        worst_linear = max(worst_linear, abs(f / (f_top * beta) - 1))
    # and here the linear-in-β shortcut is far off, so the exact check above means something
    assert worst_linear > 0.1


def test_wiper_outside_its_travel_is_rejected_naming_the_field() -> None:
    d = _divider(1e6, 10e3, 1e3)
    with pytest.raises(ValueError, match="wiper"):
        dataclasses.replace(d, wiper=1.5)


# --------------------------------------------------------------------------------------------
# Range chains against brute force


def chains(
    gl: FloatArray,
    gh: FloatArray,
    n: int,
    low: float,
    high: float,
    overlap: float,
    *,
    every_range_meets_span: bool,
) -> list[tuple[int, ...]]:
    """Every set of ``n`` capacitors that covers low..high, as index tuples lowest range first.

    A chain c1..cn (sorted by guaranteed top gh) covers when every gl is finite (the range
    exists), gl(c1) <= low, gh(cn) >= high, and each neighbour overlaps:
    gh(ci) >= gl(ci+1)·(1 + overlap) with gh(ci+1) > gh(ci). With ``every_range_meets_span``
    a range wholly outside low..high (gh < low or gl > high) is not allowed: it adds nothing
    (``_choose_caps`` docstring), and a minimal chain never has one.
    """
    out = []
    for subset in itertools.combinations(range(len(gl)), n):
        c = sorted(subset, key=lambda j: gh[j])
        if not all(math.isfinite(gl[j]) for j in c):
            continue
        if every_range_meets_span and not all(gh[j] >= low and gl[j] <= high for j in c):
            continue
        if gl[c[0]] > low or gh[c[-1]] < high:
            continue
        if all(gh[b] > gh[a] and gh[a] >= gl[b] * (1 + overlap) for a, b in itertools.pairwise(c)):
            out.append(tuple(c))
    return out


@st.composite
def ranges(draw: st.DrawFn) -> tuple[FloatArray, FloatArray, FloatArray, float, float, float]:
    """Guaranteed range ends (Hz) and costs of up to 7 capacitors, and a span to cover; the
    ranges are strewn over the span so that covering chains are common but not certain."""
    low = 10 ** draw(st.floats(0.0, 1.0))
    high = low * 10 ** draw(st.floats(0.3, 2.5))
    n = draw(st.integers(1, 7))
    start = st.floats(math.log10(low) - 0.6, math.log10(high) + 0.1)
    lg = np.array([draw(start) for _ in range(n)])
    width = np.array([draw(st.floats(0.3, 2.0)) for _ in range(n)])
    gl = 10.0**lg
    gh = 10.0 ** (lg + width)
    gone = [draw(st.sampled_from([False] * 6 + [True])) for _ in range(n)]
    gl = np.where(gone, np.inf, gl)
    cost = np.array([draw(st.sampled_from([0.01, 0.02, 0.05, 0.1, 0.2])) for _ in range(n)])
    overlap = draw(st.sampled_from([0.0, 0.05, 0.2]))
    return gl, gh, cost, low, high, overlap


Ranges = tuple[FloatArray, FloatArray, FloatArray, float, float, float]
BOUNDED = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@BOUNDED
@given(ranges(), st.integers(1, 4))
def test_cheapest_chain_equals_brute_force(case: Ranges, n: int) -> None:
    gl, gh, cost, low, high, overlap = case
    found = chains(gl, gh, n, low, high, overlap, every_range_meets_span=True)
    brute = min((sum(cost[j] for j in c) for c in found), default=math.inf)
    dp = _cheapest_chain(gl, gh, cost, n, low, high, overlap)
    assert dp == pytest.approx(brute, rel=1e-12) if math.isfinite(brute) else dp == math.inf


def _combos(gl: FloatArray, gh: FloatArray) -> _Combos:
    rows = gl.shape[0]
    z = np.zeros(rows, dtype=np.int64)
    return _Combos(z, z, z, z, z - 1, z, np.zeros(rows), gl, gh)


@BOUNDED
@given(st.lists(ranges(), min_size=1, max_size=3))
def test_fewest_ranges_equals_brute_force_minimal_count(cases: list[Ranges]) -> None:
    """Rows of one _Combos share the span and the capacitor count; each row its own ends."""
    n_caps = min(len(c[0]) for c in cases)
    gl = np.stack([c[0][:n_caps] for c in cases])
    gh = np.stack([c[1][:n_caps] for c in cases])
    _, _, _, low, high, overlap = cases[0]
    count = _fewest_ranges(_combos(gl, gh), low, high, overlap)
    for row in range(len(cases)):
        brute = next(
            (
                n
                for n in range(1, n_caps + 1)
                if chains(gl[row], gh[row], n, low, high, overlap, every_range_meets_span=False)
            ),
            MAX_RANGES + 1,
        )
        assert int(count[row]) == brute, row
        # the fewest count is the first n with a cheapest chain, nothing shorter has one
        if brute <= n_caps:
            assert math.isfinite(
                _cheapest_chain(gl[row], gh[row], np.ones(n_caps), brute, low, high, overlap)
            )
        for shorter in range(1, min(brute, n_caps + 1)):
            assert _cheapest_chain(
                gl[row], gh[row], np.ones(n_caps), shorter, low, high, overlap
            ) == (math.inf)


def test_fewest_ranges_with_no_capacitor_is_none() -> None:
    empty = np.zeros((2, 0))
    count = _fewest_ranges(_combos(empty, empty), 10.0, 100.0, 0.05)
    assert count.tolist() == [MAX_RANGES + 1] * 2


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ranges(), st.integers(1, 3))
def test_choose_caps_is_the_cheapest_then_most_even_chain(case: Ranges, n: int) -> None:
    """CP-SAT's choice against brute force: a covering chain, at the dynamic programme's cost
    (in 1e-4 currency steps), and among those the smallest largest excess overlap, excess
    of a neighbour pair = floor(1e4·ln(gh(a)/(gl(b)·(1 + overlap))))."""
    gl, gh, cost, low, high, overlap = case
    dp = _cheapest_chain(gl, gh, cost, n, low, high, overlap)
    bound = dp + 1e-9 if math.isfinite(dp) else float(cost.sum())  # no chain costs more
    got = _choose_caps(gl, gh, cost, n, low, high, overlap, 5.0, bound)
    found = chains(gl, gh, n, low, high, overlap, every_range_meets_span=True)
    if not found:
        assert got is None and dp == math.inf
        return
    assert got is not None
    caps, objective = got
    assert tuple(caps) in found
    cents = [round(c / 1e-4) for c in cost]

    def worst(c: tuple[int, ...]) -> int:
        return max(
            (
                min(int(1e4 * math.log(gh[a] / (gl[b] * (1 + overlap)))), 100_000)
                for a, b in itertools.pairwise(c)
            ),
            default=0,
        )

    best_cost = min(sum(cents[j] for j in c) for c in found)
    assert sum(cents[j] for j in caps) == best_cost
    best_even = min(worst(c) for c in found if sum(cents[j] for j in c) == best_cost)
    assert objective == _BIG * best_cost + best_even


# --------------------------------------------------------------------------------------------
# Tuned designs: a small stock room (series control) and the demo example (divider)

E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)


@cache
def bench_catalog() -> Catalog:
    """E12 resistors 1 kΩ..1 MΩ, seven C0G capacitors 1 nF..100 nF, two panel pots."""
    return Catalog(
        Path("<memory>"),
        (*(resistor(m * 10**e) for e in (3, 4, 5) for m in E12), resistor(1e6)),
        tuple(capacitor(v) for v in (1e-9, 2.2e-9, 4.7e-9, 10e-9, 22e-9, 47e-9, 100e-9)),
        (opamp(),),
        (panel(10e3, 1.5), panel(50e3, 1.2)),
    )


@cache
def demo() -> Catalog:
    return load_catalog(DEMO_DIR)


def example_spec() -> Spec:
    return parse_spec(read_mapping(EXAMPLES / "tuned.toml"))


@cache
def example_result() -> DesignResult:
    """The bundled tuned example on the demo catalog, through ``design()``'s dispatch."""
    return design(example_spec(), demo())


@cache
def bench_result() -> DesignResult:
    return design_tuned(bench_spec(), bench_catalog(), time_limit_s=10.0)


CASES = {
    "bench-series": (bench_result, bench_spec, bench_catalog),
    "demo-divider": (example_result, example_spec, demo),
}


def _get(catalog: Catalog, c: Candidate, name: str, kind: type[P]) -> P:
    part = catalog.get(c.parts[name].id)
    assert isinstance(part, kind), (name, part)
    return part


def design_of(c: Candidate, catalog: Catalog, control: Control) -> Design:
    """The Design of a tuned candidate (C1..Cn, R4 for the divider), from its stock codes."""
    assert c.tuning is not None
    caps = [_get(catalog, c, f"C{s + 1}", Capacitor) for s in range(len(c.tuning.ranges))]
    return Design(
        _get(catalog, c, "U1", OpAmp),
        _get(catalog, c, "R1", Resistor),
        _get(catalog, c, "R2", Resistor),
        _get(catalog, c, "R3", Resistor),
        caps[0],
        rv1=_get(catalog, c, "RV1", Pot),
        control=control,
        r4=_get(catalog, c, "R4", Resistor) if "R4" in c.parts else None,
        range_caps=tuple(caps[1:]),
    )


def _ends(control: str) -> tuple[float, float]:
    """Wiper at the low and the high end of a range (circuit.timing_network)."""
    return (1.0, 0.0) if control == "series" else (0.0, 1.0)


@pytest.mark.parametrize("case", sorted(CASES))
def test_every_range_is_guaranteed_by_corner_brute_force_and_the_chain_covers(case: str) -> None:
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    tu = spec.tuning
    assert tu is not None
    assert result.candidates, result.infeasible
    lo_end, hi_end = _ends(tu.control)
    for c in result.candidates:
        assert c.tuning is not None
        d = design_of(c, catalog, tu.control)
        guaranteed = []
        for s, r in enumerate(c.tuning.ranges):
            at = dataclasses.replace(d, selected=s)
            # corner brute force (reference): the slowest setting any board needs at the low
            # end is the highest low corner; the top every board reaches is the lowest high one.
            # The reported range is the box bound (worstcase.box_extremes): at least as wide as
            # every corner, and only second-order wider (interior rails and offsets)
            g_low = float(design_corners(at, spec, lo_end).max())
            g_high = float(design_corners(at, spec, hi_end).min())
            low, high = r.guaranteed_low_hz, r.guaranteed_high_hz
            assert g_low * (1 - 1e-12) <= low <= g_low * (1 + 1e-3), (c.rank, s)
            assert g_high * (1 - 1e-3) <= high <= g_high * (1 + 1e-12), (c.rank, s)
            assert low < high
            guaranteed.append((low, high))
        assert guaranteed[0][0] <= tu.low_hz
        assert guaranteed[-1][1] >= tu.high_hz
        for (_, top), (bottom, _) in itertools.pairwise(guaranteed):
            assert top >= bottom * (1 + tu.overlap_pct / 100), c.rank


@pytest.mark.parametrize("case", sorted(CASES))
def test_ranges_run_low_to_high_with_nominal_ends_and_dial_law(case: str) -> None:
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    tu = spec.tuning
    assert tu is not None
    rails = rails_from_supply(spec.supply)
    lo_end, hi_end = _ends(tu.control)
    for c in result.candidates:
        assert c.tuning is not None
        d = design_of(c, catalog, tu.control)
        rs = c.tuning.ranges
        assert [r.capacitor for r in rs] == [f"C{s + 1}" for s in range(len(rs))]
        assert all(a.low_hz < b.low_hz and a.high_hz < b.high_hz for a, b in itertools.pairwise(rs))
        values = [cap.value_f for cap in d.capacitors]
        assert values == sorted(values, reverse=True)  # C1 the largest: the lowest range
        law = c.tuning.dial_law
        assert law["wiper"] == pytest.approx([i / (DIAL_POINTS - 1) for i in range(DIAL_POINTS)])
        for s, r in enumerate(rs):
            at = dataclasses.replace(d, selected=s)
            f_lo = float(dataclasses.replace(at, wiper=lo_end).oscillator(rails).frequency_hz)
            f_hi = float(dataclasses.replace(at, wiper=hi_end).oscillator(rails).frequency_hz)
            assert (r.low_hz, r.high_hz) == pytest.approx((f_lo, f_hi), rel=1e-12)
            curve = law[r.capacitor]
            assert len(curve) == DIAL_POINTS
            assert sorted((curve[0], curve[-1])) == pytest.approx([f_lo, f_hi], rel=1e-12)
            steps = np.diff(curve)
            assert np.all(steps < 0) if tu.control == "series" else np.all(steps > 0)


@pytest.mark.parametrize("case", sorted(CASES))
def test_tuned_json_fields(case: str) -> None:
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    tu = spec.tuning
    assert tu is not None
    data = json.loads(result.model_dump_json())
    for c, cj in zip(result.candidates, data["candidates"], strict=True):
        parts = cj["parts"]
        assert parts["RV1"]["kind"] == "pot"
        pot = catalog.get(parts["RV1"]["id"])
        assert isinstance(pot, Pot) and pot.kind == "panel"
        t = cj["tuning"]
        assert set(t) == {"control", "ranges", "dial_law"}
        assert t["control"] == tu.control
        n = len(t["ranges"])
        assert [k for k in parts if re.fullmatch(r"C\d", k)] == [f"C{s + 1}" for s in range(n)]
        assert ("R4" in parts) == (tu.control == "divider")
        for r in t["ranges"]:
            assert set(r) == {
                "capacitor",
                "low_hz",
                "high_hz",
                "guaranteed_low_hz",
                "guaranteed_high_hz",
            }
            assert parts[r["capacitor"]]["kind"] == "capacitor"
            assert r["low_hz"] <= r["guaranteed_low_hz"] < r["guaranteed_high_hz"] <= r["high_hz"]
        assert set(t["dial_law"]) == {"wiper", *(f"C{s + 1}" for s in range(n))}
        d = design_of(c, catalog, tu.control)
        assert cj["cost"] == pytest.approx(d.cost_per_board, abs=1e-9)  # catalog prices
    # costs ascend (the ranking of the tuned search)
    costs = [c.cost for c in result.candidates]
    assert costs == sorted(costs)


def test_triangle_amplitude_stays_in_band_across_every_range() -> None:
    spec = example_spec()
    tu = spec.tuning
    assert tu is not None
    rails = rails_from_supply(spec.supply)
    a0, tol = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    for c in example_result().candidates:
        d = design_of(c, demo(), tu.control)
        for s in range(len(d.capacitors)):
            for w in (0.0, 1.0):
                osc = dataclasses.replace(d, selected=s, wiper=w).oscillator(rails)
                assert abs(float(osc.amplitude_vpp) / a0 - 1) <= tol, (c.rank, s, w)


# --------------------------------------------------------------------------------------------
# Range count, infeasible specs


def _tuned(spec: Spec, catalog: Catalog) -> DesignResult:
    return design_tuned(spec, catalog, time_limit_s=10.0)


def test_fixed_range_count_is_honoured() -> None:
    auto = _tuned(bench_spec(low_hz=1e3, high_hz=3e3), bench_catalog())
    assert auto.candidates
    assert {len(c.tuning.ranges) for c in auto.candidates if c.tuning} == {1}
    spec = bench_spec(low_hz=1e3, high_hz=3e3, ranges=2)
    fixed = _tuned(spec, bench_catalog())
    assert fixed.candidates
    for c in fixed.candidates:
        assert c.tuning is not None and len(c.tuning.ranges) == 2
        g = [(r.guaranteed_low_hz, r.guaranteed_high_hz) for r in c.tuning.ranges]
        assert g[0][0] <= 1e3 and g[1][1] >= 3e3 and g[0][1] >= g[1][0] * 1.05


def test_too_few_fixed_ranges_says_how_many_work() -> None:
    result = _tuned(bench_spec(ranges=1), bench_catalog())
    fewest = bench_result().candidates[0].tuning
    assert fewest is not None and len(fewest.ranges) > 1
    assert not result.candidates and result.infeasible is not None
    (reason,) = result.infeasible.reasons
    assert "no set of 1 ranges" in reason and "300..10000 Hz" in reason and "(x33.3)" in reason
    assert f"the fewest that work is {len(fewest.ranges)}" in reason


def test_one_range_from_1_hz_to_1_mhz_is_infeasible_with_numbers() -> None:
    data = read_mapping(EXAMPLES / "tuned.toml")
    data["tuning"].update({"low_hz": 1.0, "high_hz": 1e6, "ranges": 1})
    result = design(parse_spec(data), demo())
    assert not result.candidates and result.infeasible is not None
    (reason,) = result.infeasible.reasons
    # no demo op amp has an operating point at 1 MHz on these rails: the reason says where
    assert "1e+06 Hz" in reason and "UA-JF2" in reason
    # on the bench stock room the op amp is usable: the range count is what fails
    data = {**bench_spec().model_dump(), "tuning": {"low_hz": 1.0, "high_hz": 1e4, "ranges": 1}}
    result = _tuned(parse_spec(data), bench_catalog())
    assert result.infeasible is not None
    (reason,) = result.infeasible.reasons
    assert "1..10000 Hz (x1e+04)" in reason and "5 % overlap" in reason


def test_no_usable_capacitor_is_a_reason_not_a_crash() -> None:
    cat = bench_catalog()
    x7r = tuple(dataclasses.replace(c, dielectric="X7R", tempco_ppm=None, temp_band_pct=15.0)
                for c in cat.capacitors)  # fmt: skip
    result = _tuned(bench_spec(), dataclasses.replace(cat, capacitors=x7r))
    assert result.infeasible is not None
    (reason,) = result.infeasible.reasons
    assert "no range capacitor" in reason and "C0G" in reason


# --------------------------------------------------------------------------------------------
# CLI


def test_cli_design_example_tuned_prints_ranges_and_plots_the_dial(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    png = tmp_path / "dial.png"
    assert cli.main(["design", "--example", "tuned", "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    best = example_result().candidates[0]
    assert best.tuning is not None
    assert f"1. {len(best.tuning.ranges)} ranges" in out
    for r in best.tuning.ranges:
        assert re.search(rf"^\s+{r.capacitor} .*nominal .*guaranteed ", out, re.MULTILINE)
    assert "(divider control" in out and f"plot written to {png}" in out
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def _tuned_file(path: Path, selected: str, wiper: float = 0.5) -> Path:
    c = example_result().candidates[0]
    data = {
        "spec": read_mapping(EXAMPLES / "tuned.toml"),
        "parts": {k: v.id for k, v in c.parts.items()},
        "wiper": wiper,
        "range": selected,
    }
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def test_cli_analyse_and_simulate_a_tuned_design_file_on_one_range(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _tuned_file(tmp_path / "tuned.json", "C2", wiper=0.3)
    argv = ["--catalog", str(DEMO_DIR), "--json"]
    assert cli.main(["analyse", str(path), *argv, "--samples", "500"]) == 0
    data = json.loads(capsys.readouterr().out)
    spec = example_spec()
    assert spec.tuning is not None
    d = dataclasses.replace(
        design_of(example_result().candidates[0], demo(), spec.tuning.control),
        selected=1,
        wiper=0.3,
    )
    f = float(d.oscillator(rails_from_supply(spec.supply)).frequency_hz)
    assert data["predicted"]["frequency_hz"] == pytest.approx(f, rel=1e-12)
    assert {"R4", "RV1", "C1", "C2"} <= set(data["parts"])
    assert cli.main(["simulate", str(path), *argv, "--periods", "4"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert sim["predicted"]["frequency_hz"] == pytest.approx(f, rel=1e-12)
    assert sim["measured"]["frequency_hz"] == pytest.approx(
        sim["predicted"]["frequency_hz"], rel=1e-3
    )


@pytest.mark.parametrize("command", ["analyse", "simulate"])
def test_cli_unknown_range_exits_2_with_one_line(
    command: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _tuned_file(tmp_path / "bad.json", "C9")
    assert cli.main([command, str(path), "--catalog", str(DEMO_DIR)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and "range" in lines[0] and "C9" in lines[0]
