"""``tristock export bom|spice DESIGN --catalog DIR``: a design's bill of materials (CSV or
``--json``) or its ngspice netlist, on stdout or written atomically to ``-o FILE``.

Exit 0 when written; 2 for a bad DESIGN file or option (one line naming the field); 1 when
the catalog does not load or the file cannot be written.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from tristock.circuits.board import Design
from tristock.cli import exits
from tristock.cli.common import catalog_from, design_from_file
from tristock.cli.exits import UsageError
from tristock.cli.output import emit, json_text
from tristock.export.bom import bill_of_materials, bom_csv
from tristock.export.spice import spice_netlist, tuned_at
from tristock.spec.loading import SpecError
from tristock.stock.atomicio import write_atomic


def _target(name: str | None) -> Path | None:
    """The ``-o`` file, checked before any work: a name in a folder that exists."""
    if name is None:
        return None
    path = Path(name)
    if path.is_dir() or not path.parent.is_dir():
        raise UsageError(f"tristock export: --output: cannot write {name!r} (no such folder)")
    return path


def run(args: argparse.Namespace) -> int:
    target = _target(args.output)
    source = Path(args.design)
    spec, design = design_from_file(source, catalog_from(args.catalog))
    if args.action == "bom":
        bom = bill_of_materials(design, args.boards or spec.build.boards)
        text = json_text(bom.to_dict()) + "\n" if args.json else bom_csv(bom)
    else:
        tuned = spec.tuning is not None
        if not tuned and (args.range is not None or args.dial is not None):
            raise UsageError(
                "tristock export spice: --range and --dial set a tuned design's range and "
                "wiper; this design has no [tuning]"
            )
        try:
            if tuned:
                assert isinstance(design, Design)  # a tuned board is an op-amp Schmitt board
                design = tuned_at(
                    design,
                    args.range if args.range is not None else 1,
                    args.dial if args.dial is not None else 0.5,
                )
            text = spice_netlist(spec, design, source=source.name, corner=args.corner)
        except SpecError as err:
            raise SpecError([f"{source}: {line}" for line in err.lines]) from None
    if target is None:
        emit(text.rstrip("\n"))
    else:
        write_atomic(target, text.encode("utf-8"))
    return exits.OK
