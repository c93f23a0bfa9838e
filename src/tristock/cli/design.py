"""``tristock design``: the best designs for a spec, as a table or one JSON object.

Exit 0 with designs; 3 when no design meets the spec (the reasons printed, ``--json`` still
written); 1 when the search was cut by its time limit before it found one.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from tristock.cli import exits
from tristock.cli.common import catalog_from, plot_target, spec_from_file, with_ranking
from tristock.cli.exits import UsageError
from tristock.cli.output import complain, emit, emit_json
from tristock.designs import design
from tristock.designs.candidate import CAUTIONS
from tristock.designs.results import Candidate, DesignResult
from tristock.examples import example_spec_path
from tristock.export.saving import DESIGN_SUFFIXES, write_design
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


def _ohms(c: Candidate, designator: str) -> str:
    return format_value(c.parts[designator].value or 0.0, "Ω")


def _capacitor(c: Candidate, designator: str = "C1") -> str:
    return c.parts[designator].display.replace(" %", "%")


def spec_is_fixed(result: DesignResult) -> bool:
    return result.spec.tuning is None and not result.spec.trimmed


def _fixed_table(result: DesignResult) -> list[str]:
    head = (
        f"{'#':>2}  {'U1':<9} {'R1':>9} {'R2':>9} {'R3':>9} {'C1':>14}  "
        f"{'f':>10} {'err':>7} {'Vpp':>6} {'timing':>6} {'worst-case f':>17} {'yield':>6} "
        f"{'cost':>6}"
    )
    lines = [head, "-" * len(head)]
    for c in result.candidates:
        wc = c.worst_case["frequency_hz"]
        lines.append(
            f"{c.rank:>2}  {c.parts['U1'].id:<9} {_ohms(c, 'R1'):>9} {_ohms(c, 'R2'):>9} "
            f"{_ohms(c, 'R3'):>9} {_capacitor(c):>14}  "
            f"{format_value(c.predicted.frequency_hz, 'Hz', 5):>10} "
            f"{c.error.frequency_pct:>+6.2f}% {c.predicted.amplitude_vpp:>6.3f} "
            f"{c.predicted.timing_share:>6.1%} "
            f"{format_value(wc[0], '', 4):>8}..{format_value(wc[1], 'Hz', 4):<8} "
            f"{c.yield_fraction:>6.1%} {c.cost:>6.3f}"
        )
    return lines


def _trim_table(result: DesignResult) -> list[str]:
    head = (
        f"{'#':>2}  {'U1':<9} {'R1':>9} {'R2':>9} {'R3':>9} {'RV1':>9} {'C1':>14}  "
        f"{'wiper':>6} {'trim span':>21} {'res %/%':>8} {'drift':>7} {'cost':>6}"
    )
    lines = [head, "-" * len(head)]
    for c in result.candidates:
        t = c.trim
        assert t is not None
        lines.append(
            f"{c.rank:>2}  {c.parts['U1'].id:<9} {_ohms(c, 'R1'):>9} {_ohms(c, 'R2'):>9} "
            f"{_ohms(c, 'R3'):>9} {_ohms(c, 'RV1'):>9} {_capacitor(c):>14}  "
            f"{t.wiper_nominal:>6.1%} "
            f"{format_value(t.range_hz[0], '', 4):>9}..{format_value(t.range_hz[1], 'Hz', 4):<10}"
            f" {t.resolution_pct_per_pct:>8.3f} {t.drift_after_trim_pct:>6.3f}% {c.cost:>6.3f}"
        )
    best = result.candidates[0].trim
    assert best is not None
    lines.append(
        f"\nEvery board reaches {format_value(best.reach_hz[0], 'Hz', 5)}.."
        f"{format_value(best.reach_hz[1], 'Hz', 5)} inside the wiper margins of "
        f"{best.margin_pct:g} % (rank 1)."
    )
    return lines


def _tuning_table(result: DesignResult) -> list[str]:
    lines = []
    for c in result.candidates:
        t = c.tuning
        assert t is not None
        shared = ", ".join(
            f"{k} {v.id}" for k, v in c.parts.items() if not (k.startswith("C") and k[1:].isdigit())
        )
        lines.append(f"{c.rank:>2}. {len(t.ranges)} ranges, cost {c.cost:.3f}: {shared}")
        for r in t.ranges:
            lines.append(
                f"      {r.capacitor} {c.parts[r.capacitor].display:<16} "
                f"nominal {format_value(r.low_hz, 'Hz', 4):>9}.."
                f"{format_value(r.high_hz, 'Hz', 4):<9}"
                f"  guaranteed {format_value(r.guaranteed_low_hz, 'Hz', 4):>9}.."
                f"{format_value(r.guaranteed_high_hz, 'Hz', 4)}"
            )
    return lines


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
        notes.append(f"note: {found} design(s) {where}; --top asked for {asked}")
    best = result.candidates[0]
    fixed = result.spec.tuning is None and not result.spec.trimmed
    if fixed and best.yield_fraction < LOW_YIELD and result.spec.limits.guarantee == "nominal":
        notes.append(
            f"note: rank 1 puts {best.yield_fraction:.1%} of boards into both bands; "
            'guarantee = "yield" (with min_yield) ranks by it, or a [trim] section adds a trimmer'
        )
    return notes


def render_design(result: DesignResult) -> str:
    """The human answer: the spec, the table of designs (or why there is none), the search."""
    lines = ["tristock design", *("  " + x for x in spec_lines(result.spec)), ""]
    s = result.search
    if not result.candidates:
        if s.proven_optimal:
            lines.append("No design meets the spec:")
        else:
            lines.append(
                f"No design found within the time limit of {s.time_limit_s:g} s (not proven "
                "infeasible; a longer --time-limit may find one):"
            )
        lines += [f"  - {r}" for r in (result.infeasible.reasons if result.infeasible else [])]
    else:
        if result.spec.tuning is not None:
            lines += _tuning_table(result)
        elif result.spec.trimmed:
            lines += _trim_table(result)
        else:
            lines += _fixed_table(result)
        lines += _count_and_yield_notes(result)
        lines.append("")
        best = result.candidates[0]
        lines.append("Rank 1 parts: " + ", ".join(f"{k} {v.id}" for k, v in best.parts.items()))
        if spec_is_fixed(result):
            lines.append(
                "timing: the share of the period set by op-amp delay, slew and GBW "
                f"(at most {result.spec.limits.max_timing_share:.0%}, limits.max_timing_share)"
            )
        for w in best.warnings:
            lines.append(f"  {w.severity}: {w.message}")
    lines += [
        "",
        f"search: {s.engine}, "
        f"{'proven optimal under the full model' if s.proven_optimal else 'NOT proven'}"
        f", {s.combinations:,} combinations, {s.evaluated:,} rows "
        f"scored, {s.elapsed_s:.2f} s, score resolution {s.score_resolution:g}",
        "",
        "Cautions:",
        *(f"  - {c}" for c in CAUTIONS),
    ]
    return "\n".join(lines)


def exit_code(result: DesignResult) -> int:
    """0 with designs; 3 when the search proved there is none; 1 when it was cut short."""
    if result.candidates:
        return exits.OK
    return exits.NO_DESIGN if result.search.proven_optimal else exits.FAILED


def _plot(result: DesignResult, path: Path) -> None:
    """Rank 1's dial law (tuned designs)."""
    from tristock.report.plot import plot_dial_law

    best = result.candidates[0]
    assert best.tuning is not None
    plot_dial_law(best.tuning.dial_law, path, title=f"dial law, {best.parts['RV1'].id}")


def save_targets(save: list[str] | None, save_all: str | None) -> tuple[int, Path] | None:
    """``--save N FILE`` checked before the search: N a rank from 1, FILE a .toml or .json
    name in a folder that exists; ``--save-all DIR``: a folder that exists."""
    if save_all is not None and not Path(save_all).is_dir():
        raise UsageError(f"tristock design: --save-all: folder {save_all!r} does not exist")
    if save is None:
        return None
    rank_text, name = save
    if not rank_text.isdigit() or int(rank_text) < 1:
        raise UsageError(f"tristock design: --save: N must be a rank from 1, got {rank_text!r}")
    path = Path(name)
    if path.suffix.lower() not in DESIGN_SUFFIXES:
        raise UsageError(
            f"tristock design: --save: {name!r} must end in .toml or .json (the file's format)"
        )
    if not path.parent.is_dir() or path.is_dir():
        raise UsageError(f"tristock design: --save: cannot write {name!r} (no such folder)")
    return int(rank_text), path


def _save(result: DesignResult, target: tuple[int, Path] | None, folder: str | None) -> list[str]:
    """Write the asked DESIGN files; the lines saying where they went."""
    notes = []
    if target is not None:
        rank, path = target
        if rank > len(result.candidates):
            raise UsageError(
                f"tristock design: --save {rank}: only {len(result.candidates)} designs were found"
            )
        saved = result.candidates[rank - 1].design_file
        assert saved is not None
        write_design(path, saved)
        notes.append(f"design {rank} saved to {path}")
    if folder is not None:
        for c in result.candidates:
            assert c.design_file is not None
            write_design(Path(folder) / f"rank-{c.rank}.toml", c.design_file)
        notes.append(f"{len(result.candidates)} designs saved to {folder}/rank-N.toml")
    return notes


def run(args: argparse.Namespace) -> int:
    target = save_targets(args.save, args.save_all)
    if args.example and args.spec is not None:
        raise UsageError("tristock design: give a SPEC file or --example, not both")
    if args.example:
        spec = spec_from_file(example_spec_path(args.example))
    elif args.spec is None:
        raise UsageError("tristock design: give a SPEC file or --example (see --help)")
    else:
        spec = spec_from_file(Path(args.spec))
    spec = with_ranking(spec, args.top, args.by)
    plot = None
    if args.plot is not None:
        if spec.tuning is None:
            raise UsageError(
                "tristock design: --plot draws a tuned design's dial law; this spec has no "
                "[tuning] (use simulate --plot for waveforms)"
            )
        plot = plot_target("--plot", args.plot)
    catalog = catalog_from(args.catalog, example=bool(args.example))
    result = design(spec, catalog, engine=args.engine, time_limit_s=args.time_limit)
    if plot is not None and result.candidates:
        _plot(result, plot)
    code = exit_code(result)
    notes = _save(result, target, args.save_all) if result.candidates else []
    if args.json:
        emit_json(result.model_dump(mode="json"))
    else:
        text = render_design(result)
        if plot is not None and result.candidates:
            text += f"\nplot written to {plot}"
        emit("\n".join([text, *notes]))
    if code == exits.NO_DESIGN and args.json:  # the reasons are in the JSON; say so here too
        reasons = result.infeasible.reasons if result.infeasible else []
        complain("tristock design: no design meets the spec: " + "; ".join(reasons))
    if code == exits.FAILED:
        complain("tristock design: the search was cut by its time limit before it found a design")
    return code
