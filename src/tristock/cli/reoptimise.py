"""``tristock reoptimise``: the fewest part changes that bring a design back in spec.

Exit 0 with answers (or when the design passes as it is); 3 when no design meets the spec even
with every position free (the reasons printed, ``--json`` still written); 1 when the search
was cut by its time limit before it found one.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from tristock.circuits.board import part_ids
from tristock.cli import exits
from tristock.cli.common import catalog_from, parsed_in, read_file
from tristock.cli.exits import UsageError
from tristock.cli.output import complain, emit, emit_json
from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import ReoptimiseResult
from tristock.spec import limits
from tristock.spec.loading import parse_spec
from tristock.stock.units import format_value


def render_reoptimise(result: ReoptimiseResult) -> str:
    o = result.original
    lines = [
        "tristock reoptimise",
        "  design    " + ", ".join(f"{k} {v}" for k, v in o.parts.items()),
        f"  status    {'passes the spec, nothing to change' if o.passes else 'needs changes'}",
        *(f"            - {r}" for r in o.reasons),
    ]
    if result.shortfall:
        lines.append(f"  shortfall for {result.spec.build.boards} boards:")
        lines += [
            f"            {s.designator} {s.id}: need {s.needed}, have {s.stock}, short {s.short}"
            for s in result.shortfall
        ]
    lines.append("")
    if result.infeasible:
        lines.append("No design meets the spec, even with every position free:")
        lines += [f"  - {r}" for r in result.infeasible.reasons]
    for c in result.candidates:
        lines.append(
            f"{c.rank:>2}. {len(c.changed)} change(s): "
            f"{format_value(c.predicted.frequency_hz, 'Hz', 5)} ({c.error.frequency_pct:+.2f} %), "
            f"{c.predicted.amplitude_vpp:.4g} Vpp, yield {c.yield_fraction:.1%}, cost {c.cost:.3f}"
        )
        for ch in c.changes:
            lines.append(f"      {ch.designator}: {ch.from_id} -> {ch.to_id}  ({ch.why})")
    s = result.search
    lines += [
        "",
        f"search: fewest changes proven by exhaustive search of each smaller count; "
        f"{'proven' if s.proven_optimal else 'NOT proven (time limit)'}, {s.elapsed_s:.2f} s",
    ]
    return "\n".join(lines)


def exit_code(result: ReoptimiseResult) -> int:
    """0 with answers or a design that passes as it is; 3 when none exists; 1 when cut short."""
    if result.candidates or (result.original.passes and not result.shortfall):
        return exits.OK
    if result.infeasible is not None and result.search.proven_optimal:
        return exits.NO_DESIGN
    return exits.FAILED


def run(args: argparse.Namespace) -> int:
    without = args.without or []
    if len(without) > limits.WITHOUT_MAX:
        raise UsageError(
            f"tristock reoptimise: --without: at most {limits.WITHOUT_MAX} stock codes, "
            f"got {len(without)}"
        )
    path = Path(args.design)
    data = read_file(path)
    spec = parsed_in(path, parse_spec, data.get("spec", {}))
    current = parsed_in(path, part_ids, data.get("parts"))
    catalog = catalog_from(args.catalog)
    result = reoptimise(
        spec,
        catalog,
        current,
        without=without,
        boards=args.boards,
        top=args.top,
        time_limit_s=args.time_limit,
    )
    code = exit_code(result)
    if args.json:
        emit_json(result.model_dump(mode="json"))
    else:
        emit(render_reoptimise(result))
    if code == exits.NO_DESIGN and args.json:  # the reasons are in the JSON; say so here too
        reasons = result.infeasible.reasons if result.infeasible else []
        complain("tristock reoptimise: no design meets the spec: " + "; ".join(reasons))
    if code == exits.FAILED:
        complain("tristock reoptimise: the search was cut by its time limit before it found one")
    return code
