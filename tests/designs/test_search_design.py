"""design(): the whole search on the demo stock room, as a user or pipeline sees it.

Outside references, named beside each check: the full circuit model
(``tristock.circuits.board.Design.oscillator``, offsets and bias as catalogued) re-run here on each
answer's parts; IEC 60063 E6 values (the ``tristock.stock.eseries`` tables) to find the nearest
R1/R2 ratio independently; the catalog's own stock and price columns for the infeasible cases.
"""

from __future__ import annotations

import json
import math
import re
from functools import cache
from pathlib import Path
from typing import Any

import pytest

from tristock.circuits.board import Design, rails_from_supply
from tristock.designs import design
from tristock.designs.results import DesignResult
from tristock.search.model import build_model
from tristock.spec.loading import SpecError, parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.catalog import Catalog, load_catalog
from tristock.stock.parts import Capacitor, OpAmp, Resistor

REPO = Path(__file__).resolve().parents[2]
SAMPLES = 1000  # Monte Carlo samples per candidate: enough for the fields, quick


@cache
def demo() -> Catalog:
    return load_catalog(REPO / "catalogs" / "demo")


def base(**extra: Any) -> dict[str, Any]:
    data: dict[str, Any] = {
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
        "frequency": {"target_hz": 1500.0, "tolerance_pct": 1.0},
        "triangle": {"amplitude_vpp": 5.0, "tolerance_pct": 5.0},
        "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
        "ranking": {"by": "balanced", "top": 5},
    }
    data.update(extra)
    return data


@cache
def nominal_result(engine: str) -> DesignResult:
    return design(parse_spec(base()), demo(), engine=engine, samples=SAMPLES)


def design_of(result: DesignResult, rank: int) -> Design:
    parts = result.candidates[rank].parts
    cat = demo()

    def get(name: str) -> Any:
        return cat.get(parts[name].id)

    d = Design(get("U1"), get("R1"), get("R2"), get("R3"), get("C1"))
    assert isinstance(d.u1, OpAmp) and isinstance(d.c1, Capacitor)
    assert all(isinstance(r, Resistor) for r in (d.r1, d.r2, d.r3))
    return d


def inside(value: float, target: float, tolerance_pct: float) -> bool:
    """target·(1 - t) <= value <= target·(1 + t), t = tolerance_pct/100 (the spec's band)."""
    t = tolerance_pct / 100
    return target * (1 - t) * (1 - 1e-12) <= value <= target * (1 + t) * (1 + 1e-12)


# --------------------------------------------------------------------------------------------
# A feasible request


@pytest.mark.parametrize("engine", ["cpsat", "enumerate"])
def test_candidates_meet_the_spec_in_the_full_model(engine: str) -> None:
    result = nominal_result(engine)
    spec = result.spec
    assert len(result.candidates) == 5
    for n, cand in enumerate(result.candidates):
        osc = design_of(result, n).oscillator(rails_from_supply(spec.supply))
        assert inside(osc.frequency_hz, 1500.0, 1.0)
        assert inside(osc.amplitude_vpp, 5.0, 5.0)
        assert cand.predicted.frequency_hz == pytest.approx(osc.frequency_hz, rel=1e-12)
        assert cand.predicted.amplitude_vpp == pytest.approx(osc.amplitude_vpp, rel=1e-12)
        assert cand.predicted.duty_high == pytest.approx(osc.duty_high, rel=1e-12)
        assert cand.error.frequency_pct == pytest.approx(100 * (osc.frequency_hz / 1500 - 1))
        assert cand.error.amplitude_pct == pytest.approx(100 * (osc.amplitude_vpp / 5 - 1))


def test_both_engines_return_the_same_designs() -> None:
    ids = [
        [tuple(c.parts[d].id for d in ("U1", "R1", "R2", "R3", "C1")) for c in r.candidates]
        for r in (nominal_result("cpsat"), nominal_result("enumerate"))
    ]
    assert ids[0] == ids[1]
    assert all(
        r.search.proven_optimal for r in (nominal_result("cpsat"), nominal_result("enumerate"))
    )


def test_ranks_count_up_and_scores_do_not_fall() -> None:
    cands = nominal_result("cpsat").candidates
    assert [c.rank for c in cands] == list(range(1, len(cands) + 1))
    assert [c.score for c in cands] == sorted(c.score for c in cands)


def test_cost_and_bom_lines_follow_the_parts() -> None:
    result = nominal_result("cpsat")
    for n, cand in enumerate(result.candidates):
        d = design_of(result, n)
        assert cand.cost == pytest.approx(
            d.u1.unit_cost * d.u1.packages_per_board
            + sum(p.unit_cost for p in (d.r1, d.r2, d.r3, d.c1))
        )
        assert cand.bom_lines == len({d.u1.id, d.r1.id, d.r2.id, d.r3.id, d.c1.id})
        assert cand.parts["U1"].pieces_per_board == d.u1.packages_per_board


def test_json_fields() -> None:
    """The JSON a pipeline reads: every documented field, with plain JSON types."""
    data = json.loads(json.dumps(nominal_result("cpsat").model_dump(mode="json")))
    assert {"spec", "candidates", "infeasible", "search"} <= set(data)
    assert data["infeasible"] is None
    assert data["spec"]["frequency"]["target_hz"] == 1500.0
    search = data["search"]
    assert search["engine"] == "cpsat" and search["proven_optimal"] is True
    assert isinstance(search["elapsed_s"], float) and search["elapsed_s"] >= 0
    model = build_model(parse_spec(base()), demo())
    space = len(model.opamps) * len(model.resistors) ** 3 * len(model.capacitors)
    assert search["combinations"] == space > 10**9
    for cand in data["candidates"]:
        assert {
            "rank", "parts", "predicted", "error", "worst_case", "yield_fraction",
            "sensitivity", "cost", "bom_lines", "warnings",
        } <= set(cand)  # fmt: skip
        assert set(cand["parts"]) == {"U1", "R1", "R2", "R3", "C1"}
        for name, part in cand["parts"].items():
            assert {"id", "value"} <= set(part)
            assert (part["value"] is None) == (name == "U1")
        assert {"frequency_hz", "amplitude_vpp", "duty_high", "offset_v"} <= set(cand["predicted"])
        assert set(cand["error"]) == {"frequency_pct", "amplitude_pct"}
        lo, hi = cand["worst_case"]["frequency_hz"]
        assert lo <= cand["predicted"]["frequency_hz"] <= hi
        assert 0.0 <= cand["yield_fraction"] <= 1.0
        assert isinstance(cand["sensitivity"], dict) and cand["sensitivity"]
        assert isinstance(cand["warnings"], list)


def test_worst_case_guarantee_keeps_every_corner_inside_the_bands() -> None:
    """guarantee = worst_case: the reported worst-case bounds lie inside both bands."""
    spec = parse_spec(
        base(
            frequency={"target_hz": 1500.0, "tolerance_pct": 5.0},
            triangle={"amplitude_vpp": 5.0, "tolerance_pct": 8.0},
            limits={"guarantee": "worst_case"},
            ranking={"by": "balanced", "top": 3},
        )
    )
    result = design(spec, demo(), samples=SAMPLES)
    assert len(result.candidates) == 3
    for cand in result.candidates:
        for f in cand.worst_case["frequency_hz"]:
            assert inside(f, 1500.0, 5.0)
        for a in cand.worst_case["amplitude_vpp"]:
            assert inside(a, 5.0, 8.0)
    # the same request with a nominal guarantee, ranked by error alone, ranks parts whose
    # corners fall outside
    loose = design(spec.model_copy(update={
        "limits": spec.limits.model_copy(update={"guarantee": "nominal"}),
        "ranking": spec.ranking.model_copy(update={"by": "frequency_error", "top": 10}),
    }), demo(), samples=SAMPLES)  # fmt: skip
    assert any(
        not all(inside(f, 1500.0, 5.0) for f in c.worst_case["frequency_hz"])
        or not all(inside(a, 5.0, 8.0) for a in c.worst_case["amplitude_vpp"])
        for c in loose.candidates
    )


# --------------------------------------------------------------------------------------------
# Infeasible requests: no candidates, reasons with numbers


def e6_drawer() -> Catalog:
    """The demo catalog plus a drawer of E6 resistors (invented codes) across 1 kΩ..1 MΩ."""
    cat = demo()
    extra = tuple(
        Resistor(f"R6-{n:02d}", v, 5.0, 200.0, "E6", 0.125, "0805", 0.003, 5000)
        for n, v in enumerate(eseries.values("E6", 1e3, 1e6))
    )
    return Catalog(cat.path, cat.resistors + extra, cat.capacitors, cat.opamps)


def test_amplitude_ratio_out_of_reach_of_e6() -> None:
    """9 Vpp ±0.5 % on ±12 V: the usable op amps need k = R1/R2 between 0.34 and 0.43 (their
    swing and overshoot differ); every E6 ratio (IEC 60063 E6) is at least 3 % from each of
    those. Each reason gives the k needed and the nearest ratio, checked here."""
    spec = parse_spec(
        base(
            triangle={"amplitude_vpp": 9.0, "tolerance_pct": 0.5},
            limits={"resistor_series": ["E6"]},
        )
    )
    result = design(spec, e6_drawer(), samples=SAMPLES)
    assert result.candidates == [] and result.infeasible is not None
    reasons = result.infeasible.reasons
    e6 = eseries.values("E6", 1e3, 1e6)
    ratios = [a / b for a in e6 for b in e6]
    checked = 0
    for reason in reasons:
        found = re.search(r"k = R1/R2 = ([0-9.]+).*nearest ([0-9.]+)", reason)
        assert found is not None, reason
        assert "E6" in reason and "0.5 %" in reason
        k, nearest = float(found.group(1)), float(found.group(2))
        true_nearest = min(ratios, key=lambda r: abs(math.log(r / k)))
        assert nearest == pytest.approx(true_nearest, rel=1e-3)
        assert abs(math.log(nearest / k)) > math.log1p(0.005)
        checked += 1
    assert checked >= 3  # one per usable op amp on ±12 V


def test_dielectric_without_stock_for_the_build() -> None:
    """PP and PET only, 1500 boards: no such capacitor in the demo has 1500 on hand."""
    spec = parse_spec(base(build={"boards": 1500}, limits={"dielectrics": ["PP", "PET"]}))
    assert max(c.stock for c in demo().capacitors if c.dielectric in {"PP", "PET"}) < 1500
    result = design(spec, demo(), samples=SAMPLES)
    assert result.candidates == [] and result.infeasible is not None
    text = " ".join(result.infeasible.reasons)
    assert "PP/PET" in text and "1500" in text


def test_max_cost_below_every_combination() -> None:
    """max_cost 0.12 per board: the cheapest usable U1 on ±12 V already costs more."""
    spec = parse_spec(base(limits={"max_cost": 0.12}))
    usable = build_model(parse_spec(base()), demo()).opamps
    assert min(o.part.cost_per_board for o in usable) > 0.12
    result = design(spec, demo(), samples=SAMPLES)
    assert result.candidates == [] and result.infeasible is not None
    text = " ".join(result.infeasible.reasons)
    assert "max_cost 0.12" in text
    cost = re.search(r"costs ([0-9.]+)", text)
    assert cost is not None and float(cost.group(1)) > 0.12


# --------------------------------------------------------------------------------------------
# Time limit


@pytest.mark.parametrize("engine", ["cpsat", "enumerate"])
def test_tiny_time_limit_is_reported_not_fatal(engine: str) -> None:
    """1e-4 s: the search is cut short and says so; whatever it returns still meets the
    spec in the full model, and an empty answer is never called infeasible."""
    spec = parse_spec(base())
    result = design(spec, demo(), engine=engine, time_limit_s=1e-4, samples=SAMPLES)
    assert result.search.proven_optimal is False
    assert result.search.time_limit_s == 1e-4
    for n in range(len(result.candidates)):
        osc = design_of(result, n).oscillator(rails_from_supply(spec.supply))
        assert inside(osc.frequency_hz, 1500.0, 1.0)
    if not result.candidates:
        assert result.infeasible is None


# --------------------------------------------------------------------------------------------
# Bad specs


def bad(data: dict[str, Any]) -> str:
    with pytest.raises(SpecError) as err:
        parse_spec(data)
    return str(err.value)


def test_unknown_key_names_its_path() -> None:
    data = base()
    data["frequency"] = {"target_hz": 1500.0, "tolerance_pct": 1.0, "tolerence_pct": 2.0}
    assert "frequency.tolerence_pct" in bad(data)


def test_wrong_type_names_its_path() -> None:
    assert "frequency.target_hz" in bad(base(frequency={"target_hz": "fast", "tolerance_pct": 1}))
    assert "build.boards" in bad(base(build={"boards": "many"}))


def test_zero_frequency_names_its_path() -> None:
    assert "frequency.target_hz" in bad(base(frequency={"target_hz": 0, "tolerance_pct": 1}))


def test_amplitude_beyond_the_rails_names_the_field() -> None:
    message = bad(base(triangle={"amplitude_vpp": 30.0, "tolerance_pct": 5.0}))
    assert "triangle.amplitude_vpp" in message and "24" in message


@pytest.mark.parametrize(
    ("section", "values", "field"),
    [
        ("limits", {"resistance_min_ohm": 1e6, "resistance_max_ohm": 1e3}, "resistance_min_ohm"),
        ("environment", {"temp_min_c": 80.0, "temp_max_c": 20.0}, "temp_min_c"),
    ],
)
def test_min_above_max_names_section_and_field(
    section: str, values: dict[str, float], field: str
) -> None:
    message = bad(base(**{section: values}))
    assert message.startswith(section) or f"; {section}" in message
    assert field in message


def test_spec_error_lists_every_bad_field() -> None:
    message = bad(
        base(
            frequency={"target_hz": -1.0, "tolerance_pct": 1.0},
            ranking={"by": "fastest", "top": 0},
        )
    )
    for path in ("frequency.target_hz", "ranking.by", "ranking.top"):
        assert path in message


def test_spec_round_trips_through_the_result() -> None:
    """The result carries the validated spec, equal to what was asked."""
    spec: Spec = parse_spec(base())
    assert nominal_result("cpsat").spec == spec


def test_designs_whose_period_the_op_amps_set_are_refused_with_the_share() -> None:
    """20 kHz on ±15 V with the demo's op amps: their delay, slew and GBW would set over a
    quarter of the period, so by default (limits.max_timing_share 0.10, common practice)
    nothing is offered and the reason says why; allowing 0.4, every answer stays within it
    and reports its share."""
    data = {
        "supply": {"positive_v": 15.0, "negative_v": -15.0},
        "frequency": {"target_hz": 20e3, "tolerance_pct": 5.0},
        "triangle": {"amplitude_vpp": 10.0, "tolerance_pct": 10.0},
        "ranking": {"top": 3},
    }
    strict = design(parse_spec(data), demo(), samples=SAMPLES)
    assert not strict.candidates and strict.search.proven_optimal
    assert strict.infeasible is not None
    assert "max_timing_share" in strict.infeasible.reasons[0]
    data["limits"] = {"max_timing_share": 0.4}
    loose = design(parse_spec(data), demo(), samples=SAMPLES)
    assert loose.candidates
    for c in loose.candidates:
        assert 0.10 < c.predicted.timing_share <= 0.4
