"""The human answer of ``tristock design``: the spec, the table of designs (or why there is
none), a legend, notes, rank 1's findings, the search and the cautions; lines fit 100
columns (``report.text``) unless ``--wide``; ``quiet`` keeps only the table."""

from __future__ import annotations

from tristock.designs.results import DesignResult
from tristock.report.designtable import (
    TableStyle,
    fixed_table,
    legend,
    trim_table,
    tuning_table,
)
from tristock.report.text import WIDTH, bands_phrase, pct, wrap_all
from tristock.spec.model import Spec
from tristock.stock.units import format_value


def spec_lines(spec: Spec) -> list[str]:
    """The spec in four lines: target, rails and build, limits, ranking."""
    s, f, t, e = spec.supply, spec.frequency, spec.triangle, spec.environment
    rails = (
        f"±{s.positive_v:g} V"
        if s.negative_v == -s.positive_v
        else f"{s.negative_v:g}/{s.positive_v:g} V (reference {s.reference:g} V)"
    )
    lim = spec.limits
    if spec.tuning is not None:
        tu = spec.tuning
        target = (
            f"tuned {format_value(tu.low_hz, 'Hz')}..{format_value(tu.high_hz, 'Hz')} "
            f"({tu.control} control, ranges {tu.ranges}, overlap {tu.overlap_pct:g} %)"
        )
    else:
        assert f is not None
        target = f"{format_value(f.target_hz, 'Hz')} ±{f.tolerance_pct:g} %"
        if spec.trimmed:
            target += " (trimmed)"
    return [
        f"target    {target}, {t.amplitude_vpp:g} Vpp ±{t.tolerance_pct:g} %",
        f"rails     {rails} ±{s.tolerance_pct:g} %, {e.temp_min_c:g}..{e.temp_max_c:g} °C, "
        f"{spec.build.boards} board{'s' if spec.build.boards != 1 else ''}",
        f"limits    guarantee {lim.guarantee}, series {'/'.join(lim.resistor_series or ['any'])}, "
        f"C1 {'/'.join(lim.dielectrics)}, "
        f"R {format_value(lim.resistance_min_ohm, 'Ω')}.."
        f"{format_value(lim.resistance_max_ohm, 'Ω')}"
        + (f", max cost {lim.max_cost:g}" if lim.max_cost else ""),
        f"ranking   {spec.ranking.by}, top {spec.ranking.top}",
    ]


#: Below this Monte Carlo yield of rank 1 the table says so (common practice: a build that
#: rejects more than one board in ten needs a closer look).
LOW_YIELD = 0.90


def _count_and_yield_notes(result: DesignResult) -> list[str]:
    """A line when fewer designs exist than ``top`` asked for, and one when rank 1's yield
    into both bands is below ``LOW_YIELD`` with the spec's nominal guarantee."""
    notes = []
    found, asked = len(result.candidates), result.spec.ranking.top
    if found < asked:
        where = "meet the spec" if result.search.proven_optimal else "found within the time limit"
        what = "distinct design(s)" if result.search.distinct else "design(s)"
        notes.append(f"note: {found} {what} {where}; --top asked for {asked}")
    best = result.candidates[0]
    fixed = result.spec.tuning is None and not result.spec.trimmed
    if fixed and best.yield_fraction < LOW_YIELD and result.spec.limits.guarantee == "nominal":
        notes.append(
            f"note: rank 1 puts {pct(best.yield_fraction)} of boards into "
            f"{bands_phrase(result.spec.circuit.duty_band)}; "
            'guarantee = "yield" (with min_yield) ranks by it, or a [trim] section adds a trimmer'
        )
    return notes


def _table(result: DesignResult, style: TableStyle) -> list[str]:
    if result.spec.tuning is not None:
        return tuning_table(result, style)
    if result.spec.trimmed:
        return trim_table(result, style)
    return fixed_table(result, style)


def _search_line(result: DesignResult) -> str:
    s = result.search
    kind = "distinct designs, variants listed" if s.distinct else "every variant ranked"
    return (
        f"search: {s.engine}, "
        f"{'proven optimal under the full model' if s.proven_optimal else 'NOT proven'}, "
        f"{s.combinations:,} combinations, {s.evaluated:,} rows scored, {s.elapsed_s:.2f} s, "
        f"score resolution {s.score_resolution:g}, {kind}"
    )


def render_design(
    result: DesignResult,
    style: TableStyle | None = None,
    *,
    quiet: bool = False,
    extra: list[str] | None = None,
) -> str:
    """The human answer: the spec, the table of designs (or why there is none), its legend
    and notes, rank 1's findings, the search and the cautions; ``quiet``: the table (or the
    reasons) only. ``extra`` lines (an explanation) go before the search line."""
    style = style or TableStyle()
    s = result.search
    head: list[str] = []
    if not quiet:
        head += ["tristock design", *("  " + x for x in spec_lines(result.spec)), ""]
    table: list[str] = []
    tail: list[str] = []
    if not result.candidates:
        if s.proven_optimal:
            head.append("No design meets the spec:")
        else:
            head.append(
                f"No design found within the time limit of {s.time_limit_s:g} s (not proven "
                "infeasible; a longer --time-limit may find one):"
            )
        head += [f"  - {r}" for r in (result.infeasible.reasons if result.infeasible else [])]
    else:
        table = _table(result, style)
        if not quiet:
            best = result.candidates[0]
            tail += [*legend(result, style), *_count_and_yield_notes(result), ""]
            tail.append("Rank 1 parts: " + ", ".join(f"{k} {v.id}" for k, v in best.parts.items()))
            tail += [f"  {w.severity}: {w.message}" for w in best.warnings]
    if not quiet:
        tail += [*(["", *extra] if extra else []), "", _search_line(result), "", "Cautions:"]
        tail += [f"  - {c}" for c in result.cautions]
    return "\n".join([*wrap_all(head, WIDTH), *table, *wrap_all(tail, WIDTH)])


__all__ = ["LOW_YIELD", "render_design", "spec_lines"]
