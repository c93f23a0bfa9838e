"""``tristock reoptimise``: the fewest part changes that bring a design back in spec.

Exit 0 with answers (or when the design passes as it is); 3 when no design meets the spec even
with every position free (the reasons printed, ``--json`` still written); 1 when the search
was cut by its time limit before it found one.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from tristock.cli import exits
from tristock.cli.common import catalog_from, parsed_in, read_file
from tristock.cli.exits import UsageError
from tristock.cli.output import complain, emit, emit_json
from tristock.cli.progress import progress
from tristock.designs.positions import reoptimisable
from tristock.designs.reoptimise import reoptimise
from tristock.designs.results import Predicted, ReoptimiseResult
from tristock.export.designfile import design_ids
from tristock.report.text import pct, value_range, wrap_all
from tristock.spec import limits
from tristock.spec.loading import parse_spec
from tristock.stock.units import format_value


def _figures(predicted: Predicted | None, yield_fraction: float | None, wc: Any) -> list[str]:
    """f, Vpp, yield, worst-case f and duty of one design ("-" where not analysed)."""
    f = format_value(predicted.frequency_hz, "Hz", 5) if predicted else "-"
    a = f"{predicted.amplitude_vpp:.4g} Vpp" if predicted else "- Vpp"
    y = pct(yield_fraction) if yield_fraction is not None else "-"
    band = wc.get("frequency_hz") if isinstance(wc, dict) else None
    w = value_range(band[0], band[1], "Hz", 4) if band else "-"
    d = pct(predicted.duty_high, 2) if predicted else "-"
    return [f, a, y, w, d]


def render_reoptimise(result: ReoptimiseResult, *, quiet: bool = False) -> str:
    """The original design, each answer's changes, and the figures before and after: f, Vpp,
    yield into the spec's bands and worst-case f (and the duty, for a set duty)."""
    o = result.original
    before = _figures(o.predicted, o.yield_fraction, o.worst_case)
    lines = [] if quiet else [
        "tristock reoptimise",
        "  design    " + ", ".join(f"{k} {v}" for k, v in o.parts.items()),
        f"  status    {'passes the spec, nothing to change' if o.passes else 'needs changes'}",
        *(f"            - {r}" for r in o.reasons),
        f"  before    f {before[0]}, {before[1]}, yield {before[2]}, worst-case f {before[3]}",
    ]  # fmt: skip
    if result.shortfall and not quiet:
        lines.append(f"  shortfall for {result.spec.build.boards} boards:")
        lines += [
            f"            {s.designator} {s.id}: need {s.needed}, have {s.stock}, short {s.short}"
            for s in result.shortfall
        ]
    lines += [] if quiet else [""]
    if result.infeasible:
        lines.append("No design meets the spec, even with every position free:")
        lines += [f"  - {r}" for r in result.infeasible.reasons]
    for c in result.candidates:
        after = _figures(c.predicted, c.yield_fraction, c.worst_case)
        lines.append(
            f"{c.rank:>2}. {len(c.changed)} change(s), cost {c.cost:.3f}, "
            f"f {pct(c.error.frequency_pct / 100, 2, sign=True)} from the target"
        )
        for ch in c.changes:
            was, now = ch.from_id or "(none)", ch.to_id or "(none)"
            lines.append(f"      {ch.designator}: {was} -> {now}  ({ch.why})")
        names = ["f", "Vpp", "yield", "worst-case f"]
        names += ["duty"] if result.spec.circuit.duty_band is not None else []
        for name, old, new in zip(names, before, after, strict=False):
            lines.append(f"      {name:<13} {old:>16} -> {new}")
    if quiet:
        return "\n".join(wrap_all(lines))
    s = result.search
    lines += [
        "",
        f"search: fewest changes proven by exhaustive search of each smaller count; "
        f"{'proven' if s.proven_optimal else 'NOT proven (time limit)'}, {s.elapsed_s:.2f} s",
    ]
    return "\n".join(wrap_all(lines))


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
    current, topology = parsed_in(
        path, lambda parts: design_ids(spec, parts, data.get("topology")), data.get("parts")
    )
    parsed_in(path, lambda ids: reoptimisable(spec, ids, topology), current)
    catalog = catalog_from(args.catalog)
    with progress("re-optimising", quiet=args.quiet):
        result = reoptimise(
            spec,
            catalog,
            current,
            without=without,
            boards=args.boards,
            top=args.top,
            time_limit_s=args.time_limit,
            topology=topology,
        )
    code = exit_code(result)
    if args.json:
        emit_json(result.model_dump(mode="json"))
    else:
        emit(render_reoptimise(result, quiet=args.quiet))
    if code == exits.NO_DESIGN and args.json:  # the reasons are in the JSON; say so here too
        reasons = result.infeasible.reasons if result.infeasible else []
        complain("tristock reoptimise: no design meets the spec: " + "; ".join(reasons))
    if code == exits.FAILED:
        complain("tristock reoptimise: the search was cut by its time limit before it found one")
    return code
