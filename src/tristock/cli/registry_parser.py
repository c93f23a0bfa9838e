"""The parser of the registry's commands: ``release``, ``designs ...`` and ``impact``.

Nothing of the registry or the physics is imported here (``--help`` stays quick).
"""

from __future__ import annotations

import argparse
from typing import Any

from tristock.cli.exits import EPILOG
from tristock.cli.options import seconds, text, whole
from tristock.spec import limits

#: Answers kept per re-optimisation in ``impact`` (``--top``).
IMPACT_TOP = (1, 20)


def _count(p: argparse.ArgumentParser, flag: str, bounds: tuple[int, int], helptext: str,
           default: int | None = None) -> None:  # fmt: skip
    shown = f", default {default}" if default is not None else ""
    p.add_argument(
        flag,
        type=whole(*bounds),
        default=default,
        metavar="N",
        help=f"{helptext} ({bounds[0]}..{bounds[1]}{shown})",
    )


def _where(p: argparse.ArgumentParser, *, catalog_needed: bool) -> None:
    need = "the catalog the designs are built from" if catalog_needed else "catalog folder"
    p.add_argument(
        "--catalog",
        type=text("a folder"),
        help=f"{need}; the registry is registry.sqlite beside its tables unless --db or "
        "TRISTOCK_DB says otherwise (default: TRISTOCK_CATALOG)",
    )
    p.add_argument(
        "--db",
        type=text("a database URL"),
        help="registry database: a file path or a URL such as postgresql+psycopg://... "
        "(default: TRISTOCK_DB)",
    )


def _json(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="one JSON object on stdout")


def _command(sub: Any, name: str, helptext: str, *example: str) -> argparse.ArgumentParser:
    epilog = "example:\n" + "".join(f"  {x}\n" for x in example) + "\n" + EPILOG
    parser: argparse.ArgumentParser = sub.add_parser(
        name, help=helptext, epilog=epilog, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    return parser


def _sub(dsub: Any, name: str, helptext: str, example: str) -> argparse.ArgumentParser:
    epilog = f"example:\n  {example}\n\n{EPILOG}"
    parser: argparse.ArgumentParser = dsub.add_parser(
        name, help=helptext, epilog=epilog, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    return parser


def _release(sub: Any) -> None:
    r = _command(
        sub,
        "release",
        "store a design that meets its spec as the next revision",
        "tristock release demo.json --name sweep-ref --boards 100 --catalog shop",
    )
    r.add_argument(
        "design", type=text("a design file"), help="DESIGN file, or a `design --json` answer"
    )
    r.add_argument("--name", required=True, type=text("a name"), help="the design's name")
    _count(r, "--boards", limits.BOARDS, "planned build (default: the spec's build.boards)")
    r.add_argument("--note", type=text("a note"), help="free text kept with it")
    _count(r, "--rank", limits.TOP, "from a `design --json` answer: which candidate (default 1)")
    _where(r, catalog_needed=True)
    _json(r)
    r.set_defaults(handler="registry", action="release")


def _designs(sub: Any) -> None:
    d = _command(
        sub,
        "designs",
        "list, show, compare, plan, retire or accept released designs",
        "tristock designs list",
        "tristock designs diff sweep-ref@1 sweep-ref@2",
    )
    dsub = d.add_subparsers(dest="designs_command", required=True, parser_class=type(d))
    ls = _sub(dsub, "list", "every design with its latest revision", "tristock designs list --all")
    ls.add_argument("--all", action="store_true", help="retired designs too")
    show = _sub(
        dsub, "show", "one revision (default: the latest)", "tristock designs show sweep-ref@1"
    )
    show.add_argument("ref", type=text("NAME or NAME@REV"), metavar="NAME[@REV]")
    show.add_argument(
        "--design-file", action="store_true", help="print the revision as a DESIGN file (JSON)"
    )
    diff = _sub(
        dsub,
        "diff",
        "what changed between two revisions",
        "tristock designs diff sweep-ref@1 sweep-ref@2",
    )
    diff.add_argument("before", type=text("NAME@REV"), metavar="NAME@A")
    diff.add_argument("after", type=text("NAME@REV"), metavar="NAME@B")
    plan = _sub(
        dsub,
        "plan",
        "set the planned build (a new revision) and check stock",
        "tristock designs plan sweep-ref --boards 300 --catalog shop",
    )
    plan.add_argument("name", type=text("a name"), metavar="NAME")
    plan.add_argument(
        "--boards", required=True, type=whole(*limits.BOARDS), metavar="N",
        help=f"planned build ({limits.BOARDS[0]}..{limits.BOARDS[1]})",
    )  # fmt: skip
    retire = _sub(
        dsub,
        "retire",
        "retire a design: its builds no longer count",
        "tristock designs retire sweep-ref",
    )
    retire.add_argument("name", type=text("a name"), metavar="NAME")
    accept = _sub(
        dsub,
        "accept",
        "record an impact proposal's change as a revision",
        "tristock designs accept sweep-ref --proposal proposal.json --catalog shop",
    )
    accept.add_argument("name", type=text("a name"), metavar="NAME")
    accept.add_argument(
        "--proposal", required=True, type=text("a file"), help="`tristock impact --json` output"
    )
    for p, action in ((ls, "list"), (show, "show"), (diff, "diff"), (plan, "plan"),
                      (retire, "retire"), (accept, "accept")):  # fmt: skip
        _where(p, catalog_needed=action in ("plan", "accept"))
        _json(p)
        p.set_defaults(handler="registry", action=action)


def _impact(sub: Any) -> None:
    i = _command(
        sub,
        "impact",
        "over-subscribed stock, affected designs, the fewest changes",
        "tristock impact --catalog shop --what-if stock-change.csv --json > proposal.json",
    )
    _where(i, catalog_needed=True)
    i.add_argument(
        "--what-if",
        type=text("a file"),
        metavar="FILE",
        help="CSV of hypothetical stock: header id,stock or id,delta (the tables stay as they are)",
    )
    _count(i, "--workers", limits.WORKERS, "a local Dask cluster of N worker processes")
    i.add_argument(
        "--scheduler",
        type=text("an address"),
        help="an existing Dask scheduler, tcp://HOST:PORT (default: TRISTOCK_SCHEDULER)",
    )
    i.add_argument(
        "--time-limit",
        type=seconds(limits.TIME_LIMIT_MAX_S),
        default=limits.DEFAULT_TIME_LIMIT_S,
        metavar="S",
        help="seconds for each design's re-optimisation and for each joint solve "
        f"(default {limits.DEFAULT_TIME_LIMIT_S:g})",
    )
    _count(i, "--top", IMPACT_TOP, "answers kept from each re-optimisation", 5)
    i.add_argument(
        "--quiet", "-q", action="store_true", help="no progress (shown on a terminal only)"
    )
    _json(i)
    i.set_defaults(handler="impact")


def add_registry_commands(sub: Any) -> None:
    """``release``, ``designs`` and ``impact`` on the ``tristock`` parser's subcommands."""
    for add in (_release, _designs, _impact):
        add(sub)
