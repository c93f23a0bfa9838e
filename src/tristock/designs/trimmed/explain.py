"""Plain-words reasons, with numbers, why a trimmed spec has no answer in a catalog."""

from __future__ import annotations

from tristock.designs.trimmed.rows import RowStats
from tristock.designs.trimmed.walk import TrimSearch
from tristock.search.explain import infeasible_reasons
from tristock.stock.catalog import Catalog
from tristock.stock.units import format_value


def _trimmer_reason(boards: int, catalog: Catalog) -> str:
    all_trimmers = [p for p in catalog.pots if p.kind == "trimmer"]
    text = f"no trimmer (pots.csv, kind trimmer) has stock for {boards} boards"
    if all_trimmers:
        best = max(all_trimmers, key=lambda p: (p.stock, p.id))
        text += f" ({len(all_trimmers)} trimmers; the most stocked, {best.id}, has {best.stock})"
    else:
        text += " (the catalog has none)"
    return text


def _total(searches: list[TrimSearch]) -> RowStats:
    out = RowStats()
    for s in searches:
        for name in RowStats.__dataclass_fields__:
            if name == "smallest_drift":
                out.smallest_drift = min(out.smallest_drift, s.stats.smallest_drift)
            else:
                setattr(out, name, getattr(out, name) + getattr(s.stats, name))
    return out


def trimmed_reasons(searches: list[TrimSearch], catalog: Catalog, dropped: int) -> list[str]:
    """Why ``searches`` (each run to its end; re-optimisation runs one per set of changed
    designators, together the whole space) found nothing, most basic cause first."""
    ctx = searches[0].ctx
    model, spec = ctx.model, ctx.spec
    basic = []
    if len(ctx.pots) == 0:
        basic.append(_trimmer_reason(spec.build.boards, catalog))
    if not model.opamps or len(model.resistors) == 0 or len(model.capacitors) == 0:
        basic += infeasible_reasons(model, catalog)
    if basic:
        return basic
    pairs = sum(len(s.pairs) for s in searches)
    listed = sum(s.listed for s in searches)
    m = 100 * ctx.margin
    target = format_value(ctx.target_hz, "Hz")
    travel = f"{m:g}..{100 - m:g} % of travel"
    if pairs == 0:
        ranges = ", ".join(
            f"{o.part.id} {o.k_range[0]:.4g}..{o.k_range[1]:.4g}" for o in model.opamps
        )
        return [
            f"no R1/R2 pair can put the triangle within {spec.triangle.amplitude_vpp:g} Vpp "
            f"±{spec.triangle.tolerance_pct:g} % at {target} with the op-amp timing share at "
            f"most {spec.limits.max_timing_share:g} (k = R1/R2 allowed: {ranges})"
        ]
    rvs = ctx.pots.value
    span = f"{format_value(float(rvs.min()), 'Ω')}..{format_value(float(rvs.max()), 'Ω')}"
    if listed == 0:
        return [
            f"no R3, C1 and trimmer ({len(ctx.pots)} trimmers, {span}) let the nominal board "
            f"and the corners of the spread box reach {target} with the wiper inside {travel} "
            f"({pairs} R1/R2 pairs tried); use larger trimmers, tighter parts or a "
            "smaller margin"
        ]
    st = _total(searches)
    parts = []
    if st.stock_or_cost:
        cost = spec.limits.max_cost
        parts.append(
            f"{st.stock_or_cost} over stock for {spec.build.boards} boards"
            + (f" or max_cost {cost:g}" if cost is not None else "")
        )
    if st.unreached:
        parts.append(f"{st.unreached} whose nominal board does not reach {target} in {travel}")
    if st.not_monotone:
        parts.append(f"{st.not_monotone} whose frequency is not proven to fall with the wiper")
    if st.outside_ground:
        parts.append(
            f"{st.outside_ground} outside the amplitude band ({spec.triangle.amplitude_vpp:g} "
            f"Vpp ±{spec.triangle.tolerance_pct:g} %), the op amps' swing or slew, the timing "
            f"share limit {spec.limits.max_timing_share:g} or C1's rating at the nominal wiper"
        )
    if st.drift:
        limit = 100 * (ctx.drift_limit or 0.0)
        parts.append(
            f"{st.drift} drifting more than ±{limit:g} % after trimming (the least "
            f"{100 * st.smallest_drift:.3g} %)"
        )
    if st.probes:
        parts.append(f"{st.probes} with a corner of the spread box that misses {target}")
    if dropped:
        parts.append(f"{dropped} with a board of the spread box that cannot reach {target}")
    text = f"none of the {st.evaluated} combinations examined meets the spec: " + "; ".join(
        parts or ["no combination reached the full model"]
    )
    return [text]
