"""``tristock impact``: over-subscribed stock codes, the designs they affect, and the joint
fewest-changes proposal with its proof.

Exit 0 when nothing is over-subscribed or a proposal was found (``proven`` says whether its
minimality is proven); 3 when no proposal exists (proven); 1 when none was found within the
time limits, or the registry or the Dask scheduler cannot be reached; 2 bad input.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from tristock.cli import exits
from tristock.cli.common import catalog_from
from tristock.cli.exits import UsageError
from tristock.cli.output import complain, emit, emit_json
from tristock.cli.progress import progress
from tristock.cli.registry import needed_catalog, open_registry, registry_failures
from tristock.registry.impact import ImpactSettings, impact
from tristock.registry.impact_report import ImpactReport
from tristock.registry.whatif import apply_what_if, parse_what_if
from tristock.report.text import pct
from tristock.spec.limits import SPEC_FILE_MAX_BYTES
from tristock.stock.units import format_value


def _freq(value: float | None) -> str:
    return format_value(value, "Hz", 5) if value else "-"


def _yield(value: float | None) -> str:
    return pct(value) if value is not None else "-"


def render_impact(r: ImpactReport) -> str:
    lines = [f"tristock impact: {r.active_designs} active design(s); {r.message}"]
    for w in r.what_if:
        lines.append(f"  what-if   {w.id}: stock {w.stock_before} -> {w.stock_after}")
    if not r.over_subscribed:
        return "\n".join(lines)
    lines.append("over-subscribed:")
    for o in r.over_subscribed:
        users = ", ".join(f"{d.name} {d.needed}" for d in o.designs)
        lines.append(f"  {o.id:<14} stock {o.stock}, needed {o.needed} (short {o.short}): {users}")
    lines.append("affected designs:")
    for a in r.affected:
        codes = ", ".join(f"{c.id} needs {c.needed} of {c.stock}" for c in a.codes)
        lines.append(f"  {a.name}@{a.revision} ({a.kind}, {a.boards} boards): {codes}")
    p = r.proposal
    if p is None:
        lines.append(f"no proposal: {r.no_proposal_reason}")
        return "\n".join(lines)
    proof = "proven minimal" if p.proven else f"NOT proven (lower bound {p.lower_bound})"
    lines.append(f"proposal: {p.total_changes} changed designator(s) in total, {proof}")
    for d in p.designs:
        what = ", ".join(f"{c.designator} {c.from_id} -> {c.to_id}" for c in d.changes)
        lines.append(f"  {d.name}@{d.revision}: {what or 'no change'}")
        lines.append(
            f"      {_freq(d.before.frequency_hz)} -> {_freq(d.after.frequency_hz)}, "
            f"yield {_yield(d.before.yield_fraction)} -> {_yield(d.after.yield_fraction)}"
        )
    lines.append("allocation of the over-subscribed and changed codes:")
    shown = {o.id for o in r.over_subscribed} | {
        c.to_id for d in p.designs for c in d.changes if c.to_id
    }
    for line in p.allocation:
        if line.id in shown:
            given = ", ".join(f"{n} {v}" for n, v in line.allocated.items())
            lines.append(f"  {line.id:<14} stock {line.stock}: {given}; spare {line.spare}")
    lines.append(
        f"{len(r.work)} design(s) re-solved ({r.scheduler}), joint solve {p.solve_s:.3f} s + "
        f"bound {p.bound_s:.3f} s, {r.elapsed_s:.2f} s in all"
    )
    return "\n".join(lines)


def exit_code(report: ImpactReport) -> int:
    if not report.over_subscribed or report.proposal is not None:
        return exits.OK
    if report.no_proposal_reason and report.no_proposal_reason.startswith("no proposal exists"):
        return exits.NO_DESIGN
    return exits.FAILED


def run(args: argparse.Namespace) -> int:
    with registry_failures("impact"):
        catalog = catalog_from(needed_catalog(args, "impact"))
        overrides = None
        if args.what_if:
            path = Path(args.what_if)
            if path.stat().st_size > SPEC_FILE_MAX_BYTES:
                raise UsageError(
                    f"tristock impact: {path}: larger than {SPEC_FILE_MAX_BYTES} bytes"
                )
            text = path.read_text(encoding="utf-8", errors="strict")
            overrides = apply_what_if(catalog, parse_what_if(text, str(path)))
        active = open_registry(args).active()
        settings = ImpactSettings(
            top=args.top,
            time_limit_s=args.time_limit,
            joint_time_limit_s=args.time_limit,
            workers=args.workers,
            scheduler=args.scheduler,
        )
        with progress(f"re-solving the designs affected ({len(active)} active)", quiet=args.quiet):
            report = impact(active, catalog, settings, overrides)
    code = exit_code(report)
    if args.json:
        emit_json(report.model_dump(mode="json"))
    else:
        emit(render_impact(report))
    if code != exits.OK:
        complain(f"tristock impact: {report.no_proposal_reason}")
    return code
