"""``tristock release`` and ``tristock designs list|show|diff|plan|retire|accept``.

Exit codes: 0 done; 1 the registry's database cannot be reached (one line naming it);
2 bad input (an unknown name or revision, a retired design, a stale proposal, a bad DESIGN
file); 3 a release (or an accepted change) whose design does not meet its spec, the reasons
printed.
"""

from __future__ import annotations

import argparse
import json
import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from tristock.cli import exits
from tristock.cli.common import CATALOG_ENV, catalog_from, parsed_in, read_file
from tristock.cli.exits import UsageError, WorkFailed
from tristock.cli.output import complain, emit, emit_json
from tristock.registry import (
    Registry,
    RegistryUnavailable,
    ReleaseRefused,
    RetiredDesign,
    StaleProposal,
    UnknownDesign,
    check_name,
    parse_ref,
)
from tristock.registry.records import DesignSummary, PlanOut, RevisionDiff, RevisionOut
from tristock.registry.release import design_mapping, draft_from
from tristock.registry.revise import accept, diff, plan
from tristock.registry.runner import SchedulerUnavailable
from tristock.registry.whatif import WhatIfError
from tristock.report.text import pct
from tristock.stock.units import format_value


class Refused(Exception):
    """A release refused: its reasons were printed; exit 3."""


@contextmanager
def registry_failures(command: str) -> Iterator[None]:
    """The registry's errors as the CLI's: one line, the documented exit code."""
    try:
        yield
    except (RegistryUnavailable, SchedulerUnavailable) as err:
        raise WorkFailed(f"tristock {command}: {err}") from None
    except (UnknownDesign, RetiredDesign, StaleProposal, WhatIfError, ValueError) as err:
        if type(err).__name__ == "SpecError":  # the caller's own one-line report
            raise
        raise UsageError(f"tristock {command}: {err}") from None
    except ReleaseRefused as err:
        complain(f"tristock {command}: {err}")
        raise Refused() from None


def catalog_dir(args: argparse.Namespace) -> str | None:
    value: str | None = args.catalog or os.environ.get(CATALOG_ENV) or None
    return value


def open_registry(args: argparse.Namespace) -> Registry:
    return Registry.open(catalog_dir(args), args.db)


def needed_catalog(args: argparse.Namespace, command: str) -> str:
    found = catalog_dir(args)
    if found is None:
        raise UsageError(f"tristock {command}: --catalog DIR is required (or TRISTOCK_CATALOG)")
    return found


def render_summary(rows: list[DesignSummary]) -> str:
    if not rows:
        return "no released designs"
    lines = [f"{'name':<20} {'rev':>4} {'kind':<8} {'boards':>7} {'frequency':>12} {'yield':>7}"]
    for r in rows:
        freq = format_value(r.frequency_hz, "Hz", 5) if r.frequency_hz else "-"
        y = pct(r.yield_fraction) if r.yield_fraction is not None else "-"
        flag = "  (retired)" if r.retired else ""
        lines.append(
            f"{r.name:<20} {r.revision:>4} {r.kind:<8} {r.boards:>7} {freq:>12} {y:>7}{flag}"
        )
    return "\n".join(lines)


def render_revision(r: RevisionOut) -> str:
    p = r.analysis.get("predicted", {})
    lines = [
        f"{r.name}@{r.revision}  {r.kind}, {r.boards} boards, {r.source} by {r.created_by} "
        f"at {r.created_at}{'  (retired)' if r.retired else ''}",
        "  parts     " + ", ".join(f"{k} {v}" for k, v in r.parts.items()),
        f"  predicted {format_value(p.get('frequency_hz', 0.0), 'Hz', 5)}, "
        f"{p.get('amplitude_vpp', 0.0):.4g} Vpp, yield {pct(r.analysis.get('yield_fraction', 0))}, "
        f"cost {r.analysis.get('cost', 0):.3f}",
        f"  catalog   {r.catalog_fingerprint}",
    ]
    if r.note:
        lines.append(f"  note      {r.note}")
    return "\n".join(lines)


def render_diff(d: RevisionDiff) -> str:
    lines = [f"{d.name}@{d.before} -> {d.name}@{d.after}"]
    for title, changes in (("parts", d.parts), ("spec", d.spec), ("figures", d.analysis)):
        lines += [f"  {title:<8} {c.field}: {c.before} -> {c.after}" for c in changes]
    if d.boards is not None:
        lines.append(f"  boards   {d.boards.before} -> {d.boards.after}")
    lines.append(f"  catalog  {'same' if d.same_catalog else 'different'} fingerprint")
    if len(lines) == 2:
        lines.insert(1, "  no differences")
    return "\n".join(lines)


def render_plan(p: PlanOut) -> str:
    r = p.revision
    lines = [f"{r.name}@{r.revision}: planned build {r.boards} boards"]
    lines.append(f"  {'id':<14} {'where':<10} {'needed':>8} {'others':>8} {'stock':>8}")
    for n in p.needs:
        stock = "-" if n.stock is None else str(n.stock)
        mark = "" if n.covered else "  SHORT"
        where = ",".join(n.designators)
        lines.append(f"  {n.id:<14} {where:<10} {n.needed:>8} {n.others:>8} {stock:>8}{mark}")
    lines.append("  stock covers it beside the other planned builds" if p.covered else
                 "  stock does NOT cover every part: see `tristock impact`")  # fmt: skip
    return "\n".join(lines)


def _show(data: object, text: str, as_json: bool) -> None:
    emit_json(data) if as_json else emit(text)


def _release(args: argparse.Namespace) -> int:
    path = Path(args.design)
    check_name(args.name)
    catalog = catalog_from(needed_catalog(args, "release"))
    data = parsed_in(path, lambda d: design_mapping(d, args.rank), read_file(path))
    draft = parsed_in(
        path,
        lambda d: draft_from(args.name, d, catalog, boards=args.boards, note=args.note or ""),
        data,
    )
    rev = open_registry(args).write(draft, source="release")
    _show(rev.model_dump(mode="json"), render_revision(rev), args.json)
    return exits.OK


def _accept(args: argparse.Namespace) -> int:
    path = Path(args.proposal)
    try:
        proposal = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as err:
        raise UsageError(f"tristock designs accept: {path}: not JSON ({err})") from None
    if not isinstance(proposal, dict):
        raise UsageError(f"tristock designs accept: {path}: expected `tristock impact --json`")
    catalog = catalog_from(needed_catalog(args, "designs accept"))
    registry = open_registry(args)
    rev = parsed_in(path, lambda p: accept(registry, args.name, p, catalog), proposal)
    _show(rev.model_dump(mode="json"), render_revision(rev), args.json)
    return exits.OK


def _dispatch(args: argparse.Namespace) -> int:
    action = args.action
    if action == "release":
        return _release(args)
    if action == "accept":
        return _accept(args)
    if action == "plan":
        check_name(args.name)
        catalog = catalog_from(needed_catalog(args, "designs plan"))
        out = plan(open_registry(args), args.name, args.boards, catalog)
        _show(out.model_dump(mode="json"), render_plan(out), args.json)
        return exits.OK
    registry = open_registry(args)
    if action == "list":
        rows = registry.designs(include_retired=args.all)
        _show([r.model_dump(mode="json") for r in rows], render_summary(rows), args.json)
    elif action == "show":
        rev = registry.revision(*parse_ref(args.ref))
        if args.design_file:
            emit_json(rev.design_file())
        else:
            _show(rev.model_dump(mode="json"), render_revision(rev), args.json)
    elif action == "diff":
        (a, ra), (b, rb) = parse_ref(args.before), parse_ref(args.after)
        if a != b or ra is None or rb is None:
            raise UsageError(
                "tristock designs diff: give two revisions of one design, NAME@A NAME@B"
            )
        d = diff(registry.revision(a, ra), registry.revision(b, rb))
        _show(d.model_dump(mode="json"), render_diff(d), args.json)
    elif action == "retire":
        row = registry.retire(check_name(args.name))
        _show(row.model_dump(mode="json"), f"{row.name}: retired", args.json)
    return exits.OK


def run(args: argparse.Namespace) -> int:
    command = "release" if args.action == "release" else f"designs {args.action}"
    try:
        with registry_failures(command):
            return _dispatch(args)
    except Refused:
        return exits.NO_DESIGN
