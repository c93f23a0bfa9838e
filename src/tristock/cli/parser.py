"""The ``tristock`` argument parser: options, their ranges and help; nothing of the physics.

Each command sets ``handler`` to the name of the module in ``tristock.cli`` that runs it (its
``run(args)`` function); ``tristock.cli.app`` imports that module only when it is needed, so
``--help`` and bad arguments answer without loading the search.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any, NoReturn, TypeAlias

from tristock import __version__
from tristock.cli.exits import EPILOG, UsageError
from tristock.cli.options import finite, fraction, seconds, text, whole
from tristock.cli.output import write_quietly
from tristock.cli.registry_parser import add_registry_commands
from tristock.examples import EXAMPLES
from tristock.spec import limits

# The type argparse gives add_subparsers' result (generic only in the type stubs).
Subparsers: TypeAlias = "argparse._SubParsersAction[_Parser]"

RANKINGS = ("balanced", "frequency_error", "cost", "yield")
ENGINES = ("cpsat", "enumerate")


class _Parser(argparse.ArgumentParser):
    """Errors become a UsageError (one line, exit 2); help survives a closed pipe."""

    def error(self, message: str) -> NoReturn:
        raise UsageError(f"{self.prog}: {message} (see --help)")

    def _print_message(self, message: str, file: Any = None) -> None:
        if message:
            write_quietly(message, file or sys.stderr)


def _add_count(
    p: argparse.ArgumentParser,
    flag: str,
    bounds: tuple[int, int],
    helptext: str,
    default: int | None = None,
) -> None:
    """A whole-number option (or positional) with its range in the help."""
    least, most = bounds
    shown = f", default {default}" if default is not None else ""
    p.add_argument(
        flag,
        type=whole(least, most),
        default=default,
        metavar="N" if flag.startswith("-") else flag.upper(),
        help=f"{helptext} ({least}..{most}{shown})",
    )


def examples(*lines: str) -> str:
    """An epilog: the examples, then the exit codes."""
    return "example:\n" + "".join(f"  {x}\n" for x in lines) + "\n" + EPILOG


def _command(sub: Subparsers, name: str, helptext: str, *example: str) -> argparse.ArgumentParser:
    return sub.add_parser(
        name,
        help=helptext,
        epilog=examples(*example) if example else EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )


def _quiet(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--quiet",
        "-q",
        action="store_true",
        help="print only the result: no progress, no notes (progress shows on a terminal only)",
    )


def _time_limit(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--time-limit",
        type=seconds(limits.TIME_LIMIT_MAX_S),
        default=None,
        metavar="S",
        help=f"seconds for the whole search, above 0, at most {limits.TIME_LIMIT_MAX_S:g} "
        f"(default {limits.DEFAULT_TIME_LIMIT_S:g}, {limits.DEFAULT_TUNED_TIME_LIMIT_S:g} for "
        "a tuned spec); the full-model re-check comes on top",
    )


def _design(sub: Subparsers) -> None:
    d = _command(
        sub,
        "design",
        "search the catalog for the best designs for a spec",
        "tristock design --example --save 1 rank1.toml",
        "tristock design spec.toml --catalog shop --top 5 --by cost --explain 2",
    )
    d.add_argument("spec", nargs="?", type=text("a spec file"), help="spec file (TOML or JSON)")
    d.add_argument(
        "--example",
        nargs="?",
        const=EXAMPLES[0],
        choices=EXAMPLES,
        help="a bundled example spec on the demo catalog: demo (default), trimmed, tuned, "
        "comparator, clamped",
    )
    d.add_argument(
        "--plot", type=text("a file name"), help="tuned designs: rank 1's dial law (.png/.svg)"
    )
    d.add_argument(
        "--catalog", type=text("a folder"), help="catalog folder (default with --example: the demo)"
    )
    _add_count(d, "--top", limits.TOP, "designs wanted; overrides ranking.top")
    d.add_argument("--by", choices=RANKINGS, help="ranking (overrides ranking.by)")
    d.add_argument(
        "--engine", choices=ENGINES, default="enumerate", help="search engine (both are exact)"
    )
    _time_limit(d)
    d.add_argument("--json", action="store_true", help="one JSON object on stdout")
    d.add_argument(
        "--save",
        nargs=2,
        metavar=("N", "FILE"),
        help="write design N (its rank) as a DESIGN file, TOML or JSON by the suffix "
        "(.toml or .json), for analyse, simulate, reoptimise and export",
    )
    d.add_argument(
        "--save-all",
        type=text("a folder"),
        metavar="DIR",
        help="write every design as DIR/rank-N.toml (DIR must exist)",
    )
    d.add_argument(
        "--all-variants",
        action="store_true",
        help="rank every variant on its own (default: the top are distinct designs, each "
        "with an 'also:' line of its variants: R1/R2 scaled, U1 in another package, a part "
        "of equal value, tolerance and tempco under another code)",
    )
    d.add_argument("--wide", action="store_true", help="the table with units and timing share")
    d.add_argument(
        "--explain",
        type=whole(1, limits.TOP[1]),
        metavar="N",
        help="also print design N's findings, sensitivities and the circuit's sketch",
    )
    _quiet(d)
    d.set_defaults(handler="design")


def _one_design(sub: Subparsers) -> None:
    a = _command(
        sub,
        "analyse",
        "nominal, worst case, yield, sensitivities of one design",
        "tristock analyse rank1.toml --catalog catalogs/demo --samples 50000",
    )
    s = _command(
        sub,
        "simulate",
        "time-domain simulation of one design against the model",
        "tristock simulate rank1.toml --catalog catalogs/demo --plot wave.png",
    )
    for p in (a, s):
        _quiet(p)
        p.add_argument("design", type=text("a design file"), help="DESIGN file: spec + parts")
        p.add_argument(
            "--catalog", type=text("a folder"), help="catalog folder (default: TRISTOCK_CATALOG)"
        )
        p.add_argument("--json", action="store_true", help="one JSON object on stdout")
    _add_count(a, "--samples", limits.SAMPLES, "Monte Carlo samples", 20000)
    _add_count(a, "--seed", limits.SEED, "Monte Carlo seed", 0)
    a.add_argument(
        "--distribution",
        choices=["normal", "uniform"],
        default="normal",
        help="part spread: normal (tolerance = 3σ, truncated) or uniform",
    )
    a.set_defaults(handler="analyse")
    s.add_argument("--plot", type=text("a file name"), help="write the waveforms (.png or .svg)")
    _add_count(s, "--periods", limits.PERIODS, "settled periods measured", 10)
    _add_count(s, "--max-points", limits.MAX_POINTS, "--json: samples per waveform", 4000)
    s.set_defaults(handler="simulate")


def _reoptimise(sub: Subparsers) -> None:
    r = _command(
        sub,
        "reoptimise",
        "fewest part changes that bring a design back in spec",
        "tristock reoptimise rank1.toml --catalog shop --without CPPG-2N20 --boards 200",
    )
    _quiet(r)
    r.add_argument("design", type=text("a design file"), help="DESIGN file: spec + parts")
    r.add_argument(
        "--catalog", type=text("a folder"), help="catalog folder (default: TRISTOCK_CATALOG)"
    )
    r.add_argument(
        "--without",
        action="append",
        type=text("a stock code"),
        metavar="ID",
        help=f"part now unavailable (repeat, at most {limits.WITHOUT_MAX})",
    )
    _add_count(r, "--boards", limits.BOARDS, "planned build; overrides build.boards")
    _add_count(r, "--top", limits.TOP, "designs wanted; overrides ranking.top")
    _time_limit(r)
    r.add_argument("--json", action="store_true", help="one JSON object on stdout")
    r.set_defaults(handler="reoptimise")


def _catalog(sub: Subparsers) -> None:
    c = _command(
        sub,
        "catalog",
        "check, generate or update part tables",
        "tristock catalog check catalogs/demo",
    )
    csub = c.add_subparsers(dest="catalog_command", required=True, parser_class=_Parser)
    ck = csub.add_parser(
        "check",
        help="validate every table of a catalog folder (and its catalog.toml)",
        epilog=examples("tristock catalog check catalogs/demo"),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    ck.add_argument("dir", type=text("a folder"))
    ck.set_defaults(handler="catalog", action="check")

    g = csub.add_parser(
        "generate",
        help="write a resistor or capacitor table for an E-series",
        epilog=examples(
            "tristock catalog generate --kind resistor --series E96 --from 10 --to 1M "
            "--tolerance 1 --tempco 100 -o resistors.csv"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    g.add_argument("--kind", choices=["resistor", "capacitor"], required=True)
    g.add_argument("--series", required=True, type=text("a series"), help="E3 .. E192")
    g.add_argument("--from", dest="low", required=True, help="lowest value (e.g. 10, 4k7, 10p)")
    g.add_argument("--to", dest="high", required=True, help="highest value (e.g. 1M, 10u)")
    g.add_argument("--tolerance", type=finite, required=True, help="± %%")
    g.add_argument("--tempco", type=finite, help="ppm/°C")
    g.add_argument("--temp-band", type=finite, help="class II: ± %% over temperature")
    g.add_argument("--dielectric", type=text("a dielectric"), help="C0G, PP, PET, X7R, ...")
    g.add_argument("--voltage", type=finite, default=50.0, help="capacitors: rated V")
    g.add_argument("--power", type=finite, default=0.1, help="resistors: rated W")
    g.add_argument("--package", type=text("a package"), help="package name")
    g.add_argument("--cost", type=finite, default=0.0, help="unit cost")
    _add_count(g, "--stock", limits.STOCK, "pieces on hand of every row", 0)
    g.add_argument("--prefix", type=text("a prefix"), help="stock-code prefix")
    g.add_argument("--output", "-o", type=text("a file name"), help="file (default: stdout)")
    g.add_argument("--force", action="store_true", help="replace an existing file")
    g.set_defaults(handler="catalog", action="generate")

    ss = csub.add_parser(
        "set-stock",
        help="set the pieces on hand of one part, or change them by --delta (atomic)",
        epilog=examples("tristock catalog set-stock shop CPPG-2N20 -150 --delta"),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    ss.add_argument("dir", type=text("a folder"))
    ss.add_argument("id", type=text("a stock code"))
    most = limits.STOCK[1]
    _add_count(ss, "count", (-most, most), "pieces on hand; with --delta, pieces added (< 0 taken)")
    ss.add_argument("--delta", action="store_true", help="COUNT is a change, not the new count")
    ss.set_defaults(handler="catalog", action="set-stock")


def _export(sub: Subparsers) -> None:
    e = _command(
        sub,
        "export",
        "hand-off files of one design: a BOM or an ngspice netlist",
        "tristock export bom rank1.toml --catalog catalogs/demo --boards 250 -o bom.csv",
    )
    esub = e.add_subparsers(dest="export_command", required=True, parser_class=_Parser)
    b = esub.add_parser(
        "bom",
        help="bill of materials for a build (CSV, UTF-8, header row, a total row)",
        epilog=examples(
            "tristock export bom rank1.toml --catalog catalogs/demo --boards 250 -o bom.csv"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    s = esub.add_parser(
        "spice",
        help="ngspice netlist with .meas lines (tuned designs at --range and --dial)",
        epilog=examples(
            "tristock export spice rank1.toml --catalog catalogs/demo -o osc.cir",
            "tristock export spice tuned.toml --catalog catalogs/demo --range 2 --dial 0.25",
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    for p in (b, s):
        p.add_argument("design", type=text("a design file"), help="DESIGN file: spec + parts")
        p.add_argument(
            "--catalog", type=text("a folder"), help="catalog folder (default: TRISTOCK_CATALOG)"
        )
        p.add_argument(
            "--output", "-o", type=text("a file name"), help="file to write (default: stdout)"
        )
    _add_count(b, "--boards", limits.BOARDS, "boards to build; default the spec's build.boards")
    b.add_argument("--json", action="store_true", help="one JSON object instead of CSV")
    b.set_defaults(handler="export", action="bom")
    s.add_argument(
        "--corner",
        choices=["fmin", "fmax", "amin", "amax"],
        help="build at a worst-case extreme of frequency or amplitude (default: nominal)",
    )
    _add_count(s, "--range", (1, 8), "tuned designs: the range in use, C1 the lowest", None)
    s.add_argument(
        "--dial",
        type=fraction,
        metavar="X",
        help="tuned designs: the pot's wiper, 0..1 as in the DESIGN file (default 0.5)",
    )
    s.set_defaults(handler="export", action="spice")


def _serve(sub: Subparsers) -> None:
    sv = _command(
        sub,
        "serve",
        "run the HTTP API (loopback only by default)",
        "tristock serve --catalog shop --port 8000   # stock writes need TRISTOCK_TOKEN",
    )
    sv.add_argument("--host", default="127.0.0.1", type=text("an address"), help="address")
    _add_count(sv, "--port", limits.PORT, "TCP port; 0 picks a free one", 8000)
    sv.add_argument("--catalog", type=text("a folder"), help="catalog folder (default: the demo)")
    _add_count(sv, "--workers", limits.WORKERS, "server processes", 1)
    sv.add_argument(
        "--allow-open-writes",
        action="store_true",
        help="allow stock writes without a token when TRISTOCK_TOKEN is not set",
    )
    sv.set_defaults(handler="serve")


def _sketch(sub: Subparsers) -> None:
    k = _command(
        sub,
        "sketch",
        "print a circuit's ASCII sketch naming every designator",
        "tristock sketch --circuit opamp_schmitt",
    )
    k.add_argument(
        "--circuit",
        type=text("a topology name"),
        help="a registered topology (default: the first; an unknown name lists them)",
    )
    k.set_defaults(handler="sketch")


def build_parser() -> argparse.ArgumentParser:
    """The whole ``tristock`` parser; ``args.handler`` names the command module to run."""
    p = _Parser(
        prog="tristock",
        description="Pick stock-room parts for an op-amp triangle/square oscillator.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--version", action="version", version=f"tristock {__version__}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for add in (_design, _one_design, _reoptimise, _catalog, _export, _serve, _sketch):
        add(sub)
    add_registry_commands(sub)
    return p
