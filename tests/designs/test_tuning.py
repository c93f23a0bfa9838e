"""Panel-tuned designs (``tristock.designs.tuned``): dial law, ranges, coverage, limits, JSON, CLI.

Outside references, named beside each check:

- the textbook frequency of the ideal symmetric oscillator, f = R2/(4·R1·R3·C1) (Sedra &
  Smith, *Microelectronic Circuits*, bistable multivibrator with integrator; from memory),
  with the pot in the timing path: series R3 -> R3 + α·RV, so f(α) = f0/(1 + α·RV/R3), and
  divider: the wiper is a Thévenin source β·V of resistance R_th, β = (R4 + α·RV)/(R4 + RV),
  R_th = (1 - α)·RV ∥ (R4 + α·RV) (common practice);
- a corner brute force of the full model written here (every corner of the analysis's
  spread variables, evaluated one by one through ``Design.oscillator``) at both ends of every
  range;
- the catalog's own prices for the cost of a design.

The exactness of the search (brute force over whole catalogs, bounds, chains, the dial's
certified checks) is in ``test_tuning_exact.py``.
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

from tristock import cli
from tristock.circuits.board import Control, Design, rails_from_supply
from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, OFFSET_BOUND, SLEW_SPREAD
from tristock.circuits.rails import Rails
from tristock.designs import design
from tristock.designs.results import Candidate, DesignResult
from tristock.designs.tuned import DIAL_POINTS, design_tuned, dial_law
from tristock.spec.loading import parse_spec, read_mapping
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

REPO = Path(__file__).resolve().parents[2]
DEMO_DIR = REPO / "catalogs" / "demo"
EXAMPLES = REPO / "src" / "tristock" / "examples"
P = TypeVar("P", Resistor, Capacitor, OpAmp, Pot)


def resistor(value: float, cost: float = 0.01) -> Resistor:
    return Resistor(f"TR-{value:g}", value, 1.0, 100.0, "E12", 0.25, "0603", cost, 10000)


def capacitor(value: float, cost: float = 0.02) -> Capacitor:
    return Capacitor(f"TC-{value:g}", value, "C0G", 5.0, 0.0, None, 50.0, "0603", cost, 10000)


def opamp() -> OpAmp:
    """A JFET-input dual: 13 V/µs, 3 MHz, 1.2 µs comparator delay, 1.5 V headroom."""
    return OpAmp("TU-1", 2, 3.0, 40.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.3, 10000)


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
            "tuning": {"low_hz": 300.0, "high_hz": 3e3, "control": "series", **tuning},
            "ranking": {"top": 3},
        }
    )


def textbook_hz(r1: float, r2: float, r3: float, c1: float) -> float:
    """f = R2/(4·R1·R3·C1), ideal op amps, equal swings (Sedra & Smith, from memory)."""
    return r2 / (4 * r1 * r3 * c1)


WIPERS = (0.0, 0.1, 0.25, 0.5, 0.8, 1.0)


# --------------------------------------------------------------------------------------------
# Dial law with an ideal op amp


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
    assert worst_linear > 0.1  # the linear-in-β shortcut is far off here


def test_wiper_outside_its_travel_is_rejected_naming_the_field() -> None:
    with pytest.raises(ValueError, match="wiper"):
        dataclasses.replace(_divider(1e6, 10e3, 1e3), wiper=1.5)


# --------------------------------------------------------------------------------------------
# A small stock room (series control) and the bundled example (divider)

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
    return design(example_spec(), demo(), time_limit_s=60.0)


@cache
def bench_result() -> DesignResult:
    return design_tuned(bench_spec(), bench_catalog(), time_limit_s=60.0)


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


def corner_frequencies(d: Design, spec: Spec, wiper: float) -> list[float]:
    """The full model at every corner of the spread box, one Design.oscillator per corner:
    every part's tolerance, each rail, the temperature ends, slew ±20 %, delay ±30 %, the
    offsets at ± the typical value and the bias current at 0 or twice it (the spread the
    analysis states; common practice for a worst case)."""
    out = []
    env, supply = spec.environment, spec.supply
    parts = [("r1", d.r1), ("r2", d.r2), ("r3", d.r3), ("c", d.timing_capacitor)]
    parts += [("rv1", d.rv1)] + ([("r4", d.r4)] if d.r4 is not None else [])
    tol_v = supply.tolerance_pct / 100
    temps = sorted({env.temp_min_c, env.temp_max_c})
    for zs in itertools.product((-1, 1), repeat=len(parts)):
        scaled: dict[str, Any] = {}
        for (name, part), z in zip(parts, zs, strict=True):
            scaled[name] = dataclasses.replace(part, **_scaled_value(part, z))  # type: ignore[arg-type]
        for zp, zn, t, zs_, zd, zo, zb in itertools.product(
            (-1, 1), (-1, 1), temps, (-1, 1), (-1, 1), (-1, 1), (-1, 1)
        ):
            u = d.u1
            slew = u.slew_v_per_us * (1 + SLEW_SPREAD * zs_)
            op = dataclasses.replace(
                u,
                slew_v_per_us=slew,
                delay_s=u.delay_s * (1 + DELAY_SPREAD * zd),
                offset_v=abs(u.offset_v) * OFFSET_BOUND * zo,
                bias_a=u.bias_a * (1 + zb),
            )
            at = dataclasses.replace(
                d,
                u1=op,
                r1=scaled["r1"],
                r2=scaled["r2"],
                r3=scaled["r3"],
                c1=scaled["c"],
                range_caps=(),
                selected=0,
                rv1=scaled["rv1"],
                r4=scaled.get("r4"),
                wiper=wiper,
            )
            rails = Rails(
                supply.positive_v * (1 + tol_v * zp), supply.negative_v * (1 + tol_v * zn)
            )
            try:
                osc = at.oscillator(rails, t)
                # the comparator offset stays 0 (it moves neither period nor amplitude)
                osc = dataclasses.replace(
                    osc, opamp=dataclasses.replace(osc.opamp, comparator_offset_v=0.0)
                )
                out.append(float(osc.frequency_hz))
            except ValueError:
                out.append(math.nan)
    return out


def _scaled_value(part: Any, z: int) -> dict[str, float]:
    field = "value_f" if isinstance(part, Capacitor) else "value_ohm"
    return {field: getattr(part, field) * (1 + part.tolerance_pct / 100 * z)}


@pytest.mark.parametrize("case", sorted(CASES))
def test_every_range_is_guaranteed_by_corner_brute_force_and_the_chain_covers(case: str) -> None:
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    tu = spec.tuning
    assert tu is not None
    assert result.candidates, result.infeasible
    assert result.search.proven_optimal
    lo_end, hi_end = _ends(tu.control)
    for c in result.candidates[:2]:
        assert c.tuning is not None
        d = design_of(c, catalog, tu.control)
        guaranteed = []
        for s, r in enumerate(c.tuning.ranges):
            at = dataclasses.replace(d, c1=d.capacitors[s], range_caps=(), selected=0)
            # corner brute force (reference): every board reaches down to the highest low
            # corner and up to the lowest high one. The reported range is the box bound
            # (worstcase.box_extremes): at least as wide as every corner, and only second-order
            # wider (interior rails and offsets)
            g_low = max(corner_frequencies(at, spec, lo_end))
            g_high = min(corner_frequencies(at, spec, hi_end))
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
        assert values == sorted(values, reverse=True) and len(set(values)) == len(values)
        law = c.tuning.dial_law
        assert law["wiper"] == pytest.approx([i / (DIAL_POINTS - 1) for i in range(DIAL_POINTS)])
        for s, r in enumerate(rs):
            at = dataclasses.replace(d, selected=s)
            f_lo = float(dataclasses.replace(at, wiper=lo_end).oscillator(rails).frequency_hz)
            f_hi = float(dataclasses.replace(at, wiper=hi_end).oscillator(rails).frequency_hz)
            assert (r.low_hz, r.high_hz) == pytest.approx((f_lo, f_hi), rel=1e-12)
            curve = law[r.capacitor]
            assert sorted((curve[0], curve[-1])) == pytest.approx([f_lo, f_hi], rel=1e-12)
            steps = np.diff(curve)
            assert np.all(steps < 0) if tu.control == "series" else np.all(steps > 0)


@pytest.mark.parametrize("case", sorted(CASES))
def test_nominal_rules_hold_over_the_whole_dial(case: str) -> None:
    """Amplitude in band, peaks inside the swing, slew above the slope and timing share
    within the limit at 41 wiper positions of every range (the full model at each)."""
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    assert spec.tuning is not None
    rails = rails_from_supply(spec.supply)
    a0, tol = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    for c in result.candidates:
        d = design_of(c, catalog, spec.tuning.control)
        for s in range(len(d.capacitors)):
            for w in np.linspace(0, 1, 41):
                osc = dataclasses.replace(d, selected=s, wiper=float(w)).oscillator(rails)
                p = osc.prediction()
                assert abs(float(p.amplitude_vpp) / a0 - 1) <= tol, (c.rank, s, w)
                vh, vl = float(p.square_high_v), -float(p.square_low_v)
                assert float(p.peak_high_v) < vh and float(p.peak_low_v) > -vl
                m = osc.opamp
                ve = m.offset_v + m.bias_a * osc.r3
                a, b = vh - ve, vl + ve
                rc = osc.r3 * osc.c1
                assert b <= m.slew_rise_v_per_s * rc and a <= m.slew_fall_v_per_s * rc
                ideal = (vh + vl) ** 2 * osc.k * rc / (a * b)
                assert 1 - ideal / float(p.period_s) <= spec.limits.max_timing_share


@pytest.mark.parametrize("case", sorted(CASES))
def test_tuned_json_fields_and_costs(case: str) -> None:
    result_of, spec_of, catalog_of = CASES[case]
    result, spec, catalog = result_of(), spec_of(), catalog_of()
    tu = spec.tuning
    assert tu is not None
    data = json.loads(result.model_dump_json())
    for c, cj in zip(result.candidates, data["candidates"], strict=True):
        parts = cj["parts"]
        pot = catalog.get(parts["RV1"]["id"])
        assert isinstance(pot, Pot) and pot.kind == "panel"
        t = cj["tuning"]
        assert set(t) == {"control", "ranges", "dial_law"} and t["control"] == tu.control
        n = len(t["ranges"])
        assert [k for k in parts if re.fullmatch(r"C\d", k)] == [f"C{s + 1}" for s in range(n)]
        assert ("R4" in parts) == (tu.control == "divider")
        for r in t["ranges"]:
            assert r["low_hz"] <= r["guaranteed_low_hz"] < r["guaranteed_high_hz"] <= r["high_hz"]
        d = design_of(c, catalog, tu.control)
        assert cj["cost"] == pytest.approx(d.cost_per_board, abs=1e-9)  # catalog prices
        assert cj["score"] == round(d.cost_per_board * 1e6)
    # the ranking: range count, then cost
    keys = [(len(c.tuning.ranges), c.cost) for c in result.candidates if c.tuning]
    assert keys == sorted(keys)


# --------------------------------------------------------------------------------------------
# Range counts, infeasible specs with numbers, time limits


def _tuned(spec: Spec, catalog: Catalog, limit: float = 60.0) -> DesignResult:
    return design_tuned(spec, catalog, time_limit_s=limit)


def test_fixed_range_count_is_honoured() -> None:
    auto = bench_result()
    assert {len(c.tuning.ranges) for c in auto.candidates if c.tuning} == {1}
    fixed = _tuned(bench_spec(ranges=2), bench_catalog())
    assert fixed.candidates and fixed.search.proven_optimal
    for c in fixed.candidates:
        assert c.tuning is not None and len(c.tuning.ranges) == 2
        g = [(r.guaranteed_low_hz, r.guaranteed_high_hz) for r in c.tuning.ranges]
        assert g[0][0] <= 300 and g[1][1] >= 3e3 and g[0][1] >= g[1][0] * 1.05


def test_too_few_fixed_ranges_says_how_many_work() -> None:
    """With only the 10 kΩ pot each range spans at most about 7:1 at every corner, so
    300..4000 Hz needs two. (Under the full model no design reaches 5 kHz here at all: op-amp
    timing passes 10 % of the period first; a brute force over the model agrees.)"""
    values = (1e-9, 2.2e-9, 4.7e-9, 10e-9, 22e-9, 47e-9, 100e-9, 220e-9, 470e-9)
    catalog = dataclasses.replace(
        bench_catalog(), pots=(panel(10e3),), capacitors=tuple(capacitor(v) for v in values)
    )
    auto = _tuned(bench_spec(high_hz=4e3), catalog)
    assert auto.search.proven_optimal
    assert {len(c.tuning.ranges) for c in auto.candidates if c.tuning} == {2}
    result = _tuned(bench_spec(high_hz=4e3, ranges=1), catalog)
    assert not result.candidates and result.infeasible is not None
    text = " ".join(result.infeasible.reasons)
    assert "no set of 1 ranges" in text and "300..4000 Hz" in text and "(x13.3)" in text
    assert "the fewest that work is 2" in text


def test_a_top_beyond_the_timing_limit_is_infeasible_with_the_numbers() -> None:
    """10 kHz at the top of the dial: every demo op amp spends more than 10 % of the period
    on its own timing there, and the reason gives the highest nominal frequency that keeps
    it (limits.max_timing_share)."""
    data = read_mapping(EXAMPLES / "tuned.toml")
    data["tuning"]["high_hz"] = 10e3
    result = design(parse_spec(data), demo())
    assert not result.candidates and result.infeasible is not None
    assert result.search.proven_optimal
    text = " ".join(result.infeasible.reasons)
    match = re.search(r"fastest op amp, (\S+), .* up to about ([0-9.]+) Hz", text)
    assert match, text
    assert match.group(1) == "GA-JF2" and 5e3 < float(match.group(2)) < 10e3
    # and raising the limit finds designs again
    data["limits"] = {"max_timing_share": 0.25}
    assert design(parse_spec(data), demo(), time_limit_s=60.0).candidates


def test_no_usable_capacitor_is_a_reason_not_a_crash() -> None:
    cat = bench_catalog()
    x7r = tuple(dataclasses.replace(c, dielectric="X7R", tempco_ppm=None, temp_band_pct=15.0)
                for c in cat.capacitors)  # fmt: skip
    result = _tuned(bench_spec(), dataclasses.replace(cat, capacitors=x7r))
    assert result.infeasible is not None
    (reason,) = result.infeasible.reasons
    assert "no range capacitor" in reason and "C0G" in reason


def test_a_search_cut_by_its_time_limit_is_unproven_and_never_infeasible() -> None:
    """The bundled example without its boards line (issue: it once ran 7.7 s and then called
    the spec infeasible): with a limit far too short the search stops soon after it (the
    first steps are not split finer than about a tenth of a second), returns what it has,
    says it is not proven and gives no infeasible reason."""
    data = read_mapping(EXAMPLES / "tuned.toml")
    del data["build"]
    spec = parse_spec(data)
    for limit in (0.05, 0.5):
        result = _tuned(spec, demo(), limit)
        assert result.infeasible is None
        assert not result.search.proven_optimal or result.candidates
        assert result.search.elapsed_s <= limit + 1.0
    full = _tuned(spec, demo())
    assert full.search.proven_optimal and full.candidates


def test_worst_case_amplitude_is_held_over_the_box() -> None:
    """Under guarantee = "worst_case" every answer's amplitude over the spread box at both
    ends of every range (the analysis's box) lies in the band."""
    from tristock.analysis.worstcase import box_extremes

    data = bench_spec().model_dump()
    data["limits"]["guarantee"] = "worst_case"
    data["triangle"]["tolerance_pct"] = 20.0
    spec = parse_spec(data)
    result = _tuned(spec, bench_catalog())
    assert result.candidates and result.search.proven_optimal
    a0 = spec.triangle.amplitude_vpp
    for c in result.candidates:
        d = design_of(c, bench_catalog(), "series")
        for s in range(len(d.capacitors)):
            for w in (0.0, 1.0):
                lo, hi = box_extremes(dataclasses.replace(d, selected=s, wiper=w), spec)[
                    "amplitude_vpp"
                ]
                assert a0 * 0.8 <= lo and hi <= a0 * 1.2


# --------------------------------------------------------------------------------------------
# CLI


def test_cli_design_example_tuned_prints_ranges_and_plots_the_dial(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """Without --time-limit: a tuned spec's default (30 s) covers its search (about 5 s of CPU
    time; tests/benchmark_tuning.py), so the example is proven as bundled."""
    png = tmp_path / "dial.png"
    assert cli.main(["design", "--example", "tuned", "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    assert "proven optimal under the full model" in out
    best = example_result().candidates[0]
    assert best.tuning is not None
    assert f"1. {len(best.tuning.ranges)} ranges" in out
    for r in best.tuning.ranges:
        assert re.search(rf"^\s+{r.capacitor} .*nominal .*guaranteed ", out, re.MULTILINE)
    assert "(divider control" in out and f"plot written to {png}" in out
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_cli_cut_search_says_it_was_cut_not_infeasible(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    spec = tmp_path / "tuned.toml"
    text = (EXAMPLES / "tuned.toml").read_text(encoding="utf-8")
    spec.write_text(text.replace("boards = 20", ""), encoding="utf-8")
    cli.main(["design", str(spec), "--catalog", str(DEMO_DIR), "--time-limit", "0.05"])
    out = capsys.readouterr().out
    assert "No design meets the spec" not in out
    assert "time limit" in out or "NOT proven" in out


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


def test_yield_guarantee_holds_at_both_ends_of_every_range() -> None:
    """Under guarantee = "yield" each answer's Monte Carlo amplitude yield (the analysis's
    sampling, seeded; scipy-checked elsewhere) at both ends of every range is at least
    min_yield, counted against a ±50 % window around that end's nominal frequency."""
    from tristock.analysis.montecarlo import monte_carlo
    from tristock.designs.tuned import proxy_spec_at

    data = bench_spec().model_dump()
    data["limits"].update({"guarantee": "yield", "min_yield": 0.95})
    spec = parse_spec(data)
    result = design_tuned(spec, bench_catalog(), time_limit_s=60.0, samples=400)
    assert result.candidates and result.search.proven_optimal
    for c in result.candidates:
        d = design_of(c, bench_catalog(), "series")
        for s in range(len(d.capacitors)):
            for w in (0.0, 1.0):
                at = dataclasses.replace(d, selected=s, wiper=w)
                y = monte_carlo(at, proxy_spec_at(spec, at), samples=400, seed=0)
                assert y.fraction >= 0.95, (c.rank, s, w, y.fraction)
