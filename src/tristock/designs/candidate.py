"""A design as reported: its parts (``part_out``, ``parts_report``), the search's acceptance
and the guarantee (``accepts``, ``passes``), checks (``warnings_for``) and the whole candidate
(``candidate``), shared by every job (fixed, trimmed, tuned, re-optimised)."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from tristock.analysis.bundle import Analysis
from tristock.analysis.montecarlo import YieldResult
from tristock.analysis.worstcase import WorstCase
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.checks import Warning
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.opamp_schmitt.searchform import board_stage
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.designs.results import Candidate, ErrorOut, PartOut, Predicted, WarningOut
from tristock.search.rows import RowPrediction
from tristock.spec.model import Spec
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
    else:
        assert isinstance(part, OpAmp)
        kind, value, unit, tol = "opamp", None, "", None
    if value is None:
        ch = "dual" if part.channels >= 2 else "single, two used"  # type: ignore[union-attr]
        display = f"{part.id} ({ch})"
    else:
        extra = f" {part.dielectric}" if isinstance(part, Capacitor) else ""
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


def warnings_for(design: Design, spec: Spec) -> list[Warning]:
    """Every design check of ``design`` on the spec's nominal rails (its topology's
    ``check``)."""
    return design.topology.check(design, rails_from_supply(spec.supply))


def parts_report(design: Design) -> dict[str, PartOut]:
    """Designator -> part as reported (a single-channel U1 counts two pieces)."""
    uses = design.uses()
    return {
        name: part_out(part, uses[part.id] if name == "U1" else 1)
        for name, part in design.parts().items()
    }


def accepts(spec: Spec, design: Design) -> bool:
    """The search's acceptance of one fixed design at nominal values (``search.rows``): the
    bands, the model's ground (peaks inside the integrator's swing, its slew above the
    triangle's slope, the timing share within the limit) and C1's voltage rating."""
    model = OpAmpModel.from_part(design.u1)
    try:
        vh, vl = square_levels(rails_from_supply(spec.supply), model)
    except ValueError:
        return False

    def one(x: float) -> NDArray[np.float64]:
        return np.array([x], dtype=np.float64)

    values = (
        one(design.r1.value),
        one(design.r2.value),
        one(design.r3.value),
        one(design.c1.value),
    )
    stage = board_stage(design.u1, (vh, vl))
    rp = RowPrediction(
        OPAMP_SCHMITT.search_form(), [stage], np.zeros(1, dtype=np.int64), values, one(vh), one(vl)
    )
    return bool(rp.accepted(spec, one(design.c1.voltage_v))[0])


def passes(spec: Spec, design: Design, result: Analysis) -> bool:
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
        return inside(wc.frequency_hz[0], wc.amplitude_vpp[0]) and inside(
            wc.frequency_hz[1], wc.amplitude_vpp[1]
        )
    if spec.limits.guarantee == "yield":
        assert y is not None
        return y.fraction >= spec.limits.min_yield
    return True


def candidate(spec: Spec, design: Design, result: Analysis, rank: int, score: int) -> Candidate:
    """One design as reported: parts, prediction, errors, spread, cost and warnings."""
    d = result.to_dict()
    parts = parts_report(design)
    warnings = warnings_for(design, spec)
    p = d["predicted"]
    return Candidate(
        rank=rank,
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
