"""A design as reported: its parts (``part_out``, ``parts_report``), the search's acceptance
and the guarantee (``accepts``, ``passes``), checks (``warnings_for``) and the whole candidate
(``candidate``), shared by every job (fixed, trimmed, tuned, re-optimised)."""

from __future__ import annotations

import math

import numpy as np

from tristock.analysis.bundle import Analysis
from tristock.analysis.memo import Memo, box_key
from tristock.analysis.montecarlo import YieldResult
from tristock.analysis.worstcase import WorstCase
from tristock.circuits.board import AnyBoard, rails_from_supply
from tristock.circuits.checks import Warning
from tristock.designs.results import Candidate, ErrorOut, PartOut, Predicted, WarningOut
from tristock.search.branchrows import row_figures
from tristock.search.rows import RowPrediction
from tristock.spec.model import Spec
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor
from tristock.stock.units import format_value

CAUTIONS = [
    "Check every supply rail against the op amp's absolute maximum ratings, including "
    "start-up and fault conditions.",
    "Capacitor voltage ratings and resistor power ratings are checked against the model's "
    "peaks only; derate them as your own practice requires.",
    "Predictions are models: build and measure a prototype before release. Follow local "
    "codes and licensed practice for anything connected to mains or to people.",
]


def part_out(part: Part, pieces: int) -> PartOut:
    """A part as it appears in a result."""
    if isinstance(part, Resistor):
        kind, value, unit, tol = "resistor", part.value_ohm, "Ω", part.tolerance_pct
    elif isinstance(part, Capacitor):
        kind, value, unit, tol = "capacitor", part.value_f, "F", part.tolerance_pct
    elif isinstance(part, Pot):
        kind, value, unit, tol = "pot", part.value_ohm, "Ω", part.tolerance_pct
    elif isinstance(part, Diode):
        volts = part.vf_v if part.vz_v is None else part.vz_v
        kind, value, unit, tol = "diode", volts, "V", part.tolerance_pct
    elif isinstance(part, Comparator):
        kind, value, unit, tol = "comparator", None, "", None
    else:
        assert isinstance(part, OpAmp)
        kind, value, unit, tol = "opamp", None, "", None
    if isinstance(part, Comparator):
        display = f"{part.id} ({part.output})"
    elif isinstance(part, OpAmp):
        ch = "dual" if part.channels >= 2 else "single, two used" if pieces > 1 else "single"
        display = f"{part.id} ({ch})"
    else:
        assert value is not None
        extra = f" {part.dielectric}" if isinstance(part, Capacitor) else ""
        if isinstance(part, Diode):
            extra = " zener" if part.kind == "zener" else f" {part.kind} (Vf)"
        display = f"{format_value(value, unit)} {tol:g} %{extra}"
    return PartOut(
        id=part.id,
        kind=kind,
        value=value,
        display=display,
        tolerance_pct=tol,
        unit_cost=part.unit_cost,
        pieces_per_board=pieces,
        stock=part.stock,
    )


def value_of(part: Part) -> float:
    """A resistor's or capacitor's value (Ω, F): what a search row holds of it."""
    assert isinstance(part, Resistor | Capacitor)
    return part.value


def warnings_for(design: AnyBoard, spec: Spec) -> list[Warning]:
    """Every design check of ``design`` on the spec's nominal rails (its topology's
    ``check``), remembered per board, supply and environment (``CHECKED``)."""
    key = box_key(design, spec)
    found = CHECKED.get(key)
    if found is None:
        found = tuple(design.topology.check(design, rails_from_supply(spec.supply)))
        CHECKED.put(key, found)
    return list(found)


#: The checks of boards met before in this process: they depend on the board and the rails,
#: not on the bands (``analysis.memo``; its key holds the environment too).
CHECKED: Memo[tuple[Warning, ...]] = Memo(max_items=4096, max_bytes=1 << 30)


def parts_report(design: AnyBoard) -> dict[str, PartOut]:
    """Designator -> part as reported (a single-channel U1 doing both jobs counts two
    pieces; a part in two positions counts one piece in each)."""
    uses = design.uses()
    return {
        name: part_out(part, uses[part.id] if name == "U1" else 1)
        for name, part in design.parts().items()
    }


def accepts(spec: Spec, design: AnyBoard) -> bool:
    """The search's acceptance of one fixed design at nominal values (``search.rows``, or
    ``search.branchrows`` for two integrator elements, duty included): the
    bands, the model's ground (peaks inside the integrator's swing, its slew above the
    triangle's slope, the timing share within the limit) and C1's voltage rating, through
    its topology's search form (a topology without one accepts no design)."""
    form = design.topology.search_form()
    if form is None:
        return False
    stage = form.board_stage(design, spec)
    if isinstance(stage, str):
        return False
    parts = design.parts()
    names = (*form.divider, *form.integrator, form.capacitor)
    values = tuple(np.array([value_of(parts[d])], dtype=np.float64) for d in names)
    u = np.zeros(1, dtype=np.int64)
    by_name = dict(zip(names, values, strict=True))
    c1 = parts[form.capacitor]
    assert isinstance(c1, Capacitor)
    if len(form.integrator) == 2:
        fig = row_figures(spec, form, [stage], u, by_name, np.array([c1.voltage_v]))
        return bool(fig.accepted[0])
    vh, vl = form.row_levels([stage], u, rails_from_supply(spec.supply), by_name)
    rp = RowPrediction(form, [stage], u, values, vh, vl)
    return bool(rp.accepted(spec, np.array([c1.voltage_v]))[0])


def passes(spec: Spec, design: AnyBoard, result: Analysis) -> bool:
    """The full model's verdict: ``accepts`` and the spec's guarantee, from the analysis
    (worst case over the whole spread box, or the Monte Carlo yield)."""
    if not accepts(spec, design):
        return False
    return guarantee_holds(spec, result.worst_case, result.yield_result)


def guarantee_holds(spec: Spec, wc: WorstCase | None, y: YieldResult | None) -> bool:
    (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
    f0, a0 = spec.target.target_hz, spec.triangle.amplitude_vpp

    def inside(f: float, a: float) -> bool:
        return fa <= math.log(f / f0) <= fb and aa <= math.log(a / a0) <= ab

    if spec.limits.guarantee == "worst_case":
        assert wc is not None
        duty = spec.circuit.duty_band
        if duty is not None and not duty[0] <= wc.duty_high[0] <= wc.duty_high[1] <= duty[1]:
            return False
        return inside(wc.frequency_hz[0], wc.amplitude_vpp[0]) and inside(
            wc.frequency_hz[1], wc.amplitude_vpp[1]
        )
    if spec.limits.guarantee == "yield":
        assert y is not None
        return y.fraction >= spec.limits.min_yield
    return True


def candidate(
    spec: Spec,
    design: AnyBoard,
    result: Analysis,
    rank: int,
    score: int,
    warnings: list[Warning] | None = None,
) -> Candidate:
    """One design as reported: parts, prediction, errors, spread, cost and warnings
    (``warnings``: the design's ``warnings_for`` when the caller has them already)."""
    d = result.to_dict()
    parts = parts_report(design)
    if warnings is None:
        warnings = warnings_for(design, spec)
    p = d["predicted"]
    return Candidate(
        rank=rank,
        topology=design.topology.name,
        parts=parts,
        predicted=Predicted(**p),
        error=ErrorOut(
            frequency_pct=100 * (p["frequency_hz"] / spec.target.target_hz - 1),
            amplitude_pct=100 * (p["amplitude_vpp"] / spec.triangle.amplitude_vpp - 1),
        ),
        worst_case=d["worst_case"],
        yield_fraction=d["yield_fraction"],
        yield_detail=d["yield"],
        sensitivity=d["sensitivity"],
        drift=d["drift"],
        cost=round(design.cost_per_board, 6),
        bom_lines=design.bom_lines,
        score=score,
        warnings=[
            WarningOut(code=w.code, severity=w.severity, message=w.message) for w in warnings
        ],
    )
