"""``tristock sketch [--circuit NAME]``: a registered topology's ASCII sketch, naming every
designator (``tristock.circuits.TOPOLOGIES``); an unknown name is bad input (exit 2) and
lists the names."""

from __future__ import annotations

import argparse

from tristock.circuits import TOPOLOGIES
from tristock.cli import exits
from tristock.cli.exits import UsageError
from tristock.cli.output import emit


def sketch_text(name: str | None) -> str:
    """The sketch of topology ``name`` (default: the first registered) with its roles."""
    names = list(TOPOLOGIES)
    chosen = name if name is not None else names[0]
    if chosen not in TOPOLOGIES:
        raise UsageError(
            f"tristock sketch: --circuit: unknown circuit {chosen!r} (known: {', '.join(names)})"
        )
    topology = TOPOLOGIES[chosen]
    roles: list[tuple[list[str], str]] = []  # designators sharing one role, in order
    for d, role in topology.describe().items():
        if roles and roles[-1][1] == role:
            roles[-1][0].append(d)
        else:
            roles.append(([d], role))
    lines = [f"  {g[0] if len(g) == 1 else g[0] + '..' + g[-1]:<7} {role}" for g, role in roles]
    return "\n".join([f"{chosen}", topology.sketch.strip("\n"), "", *lines])


def run(args: argparse.Namespace) -> int:
    emit(sketch_text(args.circuit))
    return exits.OK
