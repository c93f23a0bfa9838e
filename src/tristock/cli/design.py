"""``tristock design``: the best designs for a spec, as a table or one JSON object (the
table's text: ``tristock.report.designtext``; ``LOW_YIELD``, ``render_design`` and
``spec_lines`` are re-exported here).

Exit 0 with designs; 3 when no design meets the spec (the reasons printed, ``--json`` still
written); 1 when the search was cut by its time limit before it found one.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from tristock.circuits import TOPOLOGIES
from tristock.cli import exits
from tristock.cli.common import catalog_from, plot_target, spec_from_file, with_ranking
from tristock.cli.exits import UsageError
from tristock.cli.output import complain, emit, emit_json
from tristock.cli.progress import progress
from tristock.designs import design
from tristock.designs.results import DesignResult
from tristock.examples import example_spec_path
from tristock.export.saving import DESIGN_SUFFIXES, write_design
from tristock.report.designtable import TableStyle
from tristock.report.designtext import LOW_YIELD, render_design, spec_lines
from tristock.report.explain import explain
from tristock.stock.catalog import Catalog
from tristock.stock.settings import read_settings


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


def _explained(result: DesignResult, rank: int | None, catalog: Catalog) -> list[str]:
    """``--explain N``: design N's findings, sensitivities and its topology's sketch."""
    if rank is None or not result.candidates:
        return []
    if rank > len(result.candidates):
        raise UsageError(
            f"tristock design: --explain {rank}: only {len(result.candidates)} designs were found"
        )
    c = result.candidates[rank - 1]
    assert c.design_file is not None
    return explain(c, TOPOLOGIES[c.topology].sketch, result.spec.circuit.duty_band)


def _style(args: argparse.Namespace, catalog: Catalog) -> TableStyle:
    return TableStyle(wide=args.wide, currency=read_settings(catalog.path).cost_unit)


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
    with progress(f"searching {len(catalog):,} parts", quiet=args.quiet):
        result = design(
            spec,
            catalog,
            engine=args.engine,
            time_limit_s=args.time_limit,
            distinct=not args.all_variants,
        )
    if plot is not None and result.candidates:
        _plot(result, plot)
    code = exit_code(result)
    notes = _save(result, target, args.save_all) if result.candidates else []
    if args.json:
        emit_json(result.model_dump(mode="json"))
    else:
        extra = _explained(result, args.explain, catalog)
        text = render_design(result, _style(args, catalog), quiet=args.quiet, extra=extra)
        if plot is not None and result.candidates and not args.quiet:
            text += f"\nplot written to {plot}"
        emit("\n".join([text, *([] if args.quiet else notes)]))
    if code == exits.NO_DESIGN and args.json:  # the reasons are in the JSON; say so here too
        reasons = result.infeasible.reasons if result.infeasible else []
        complain("tristock design: no design meets the spec: " + "; ".join(reasons))
    if code == exits.FAILED:
        complain("tristock design: the search was cut by its time limit before it found a design")
    return code


__all__ = ["LOW_YIELD", "exit_code", "render_design", "run", "save_targets", "spec_lines"]
