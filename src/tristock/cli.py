"""The ``tristock`` command: design, analyse, simulate and keep the part tables.

Exit codes: 0 done; 1 the work failed (catalog errors, no oscillation); 2 bad input (arguments,
spec or design file), always as one line on stderr and never a traceback.
"""

from __future__ import annotations

import argparse
import json
import sys
from importlib import resources
from pathlib import Path
from typing import Any, NoReturn

from tristock import __version__
from tristock.catalog import Catalog, CatalogError, StockError, load_catalog, set_stock
from tristock.design import Design, rails_from_supply
from tristock.designfile import load_design
from tristock.report import analysis_report, same_physics, simulation_report
from tristock.results import Candidate, DesignResult, ReoptimiseResult
from tristock.search import CAUTIONS, DEFAULT_TIME_LIMIT_S, design
from tristock.spec import Spec, SpecError, load_spec
from tristock.units import format_value


class UsageError(Exception):
    """Bad input from the user: reported as one line, exit 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> NoReturn:
        raise UsageError(f"{self.prog}: {message} (see --help)")


def demo_catalog_dir() -> Path:
    """The bundled demo stock room: inside the installed package, else the source tree."""
    packaged = resources.files("tristock") / "demo_catalog"
    if packaged.is_dir():
        return Path(str(packaged))
    return Path(__file__).resolve().parents[2] / "catalogs" / "demo"


EXAMPLES = ("demo", "trimmed", "tuned")


def example_spec_path(name: str = "demo") -> Path:
    """A bundled example spec: demo (fixed parts), trimmed, tuned."""
    if name not in EXAMPLES:
        raise UsageError(f"--example: unknown example {name!r} (choose {', '.join(EXAMPLES)})")
    return Path(str(resources.files("tristock") / "examples" / f"{name}.toml"))


def _catalog(path: str | None, example: bool = False) -> Catalog:
    directory = demo_catalog_dir() if (path is None and example) else path
    if directory is None:
        raise UsageError("--catalog DIR is required")
    return load_catalog(directory)


def _dump(data: Any) -> None:
    print(json.dumps(data, indent=2, ensure_ascii=False))


# ---- design -----------------------------------------------------------------------------


def _spec_lines(spec: Spec) -> list[str]:
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


def _fixed_table(result: DesignResult) -> list[str]:
    head = (
        f"{'#':>2}  {'U1':<9} {'R1':>9} {'R2':>9} {'R3':>9} {'C1':>14}  "
        f"{'f':>10} {'err':>7} {'Vpp':>6} {'worst-case f':>17} {'yield':>6} {'cost':>6}"
    )
    lines = [head, "-" * len(head)]
    for c in result.candidates:
        p = c.parts
        wc = c.worst_case["frequency_hz"]
        lines.append(
            f"{c.rank:>2}  {p['U1'].id:<9} {_ohms(c, 'R1'):>9} {_ohms(c, 'R2'):>9} "
            f"{_ohms(c, 'R3'):>9} {p['C1'].display.replace(' %', '%'):>14}  "
            f"{format_value(c.predicted.frequency_hz, 'Hz', 5):>10} "
            f"{c.error.frequency_pct:>+6.2f}% {c.predicted.amplitude_vpp:>6.3f} "
            f"{format_value(wc[0], '', 4):>8}..{format_value(wc[1], 'Hz', 4):<8} "
            f"{c.yield_fraction:>6.1%} {c.cost:>6.3f}"
        )
    return lines


def _ohms(c: Candidate, designator: str) -> str:
    return format_value(c.parts[designator].value or 0.0, "Ω")


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
            f"{_ohms(c, 'R3'):>9} {_ohms(c, 'RV1'):>9} "
            f"{c.parts['C1'].display.replace(' %', '%'):>14}  {t.wiper_nominal:>6.1%} "
            f"{format_value(t.range_hz[0], '', 4):>9}..{format_value(t.range_hz[1], 'Hz', 4):<10}"
            f" {t.resolution_pct_per_pct:>8.3f} {t.drift_after_trim_pct:>6.3f}% {c.cost:>6.3f}"
        )
    best = result.candidates[0].trim
    assert best is not None
    lines.append(
        f"\nEvery corner reaches {format_value(best.reach_hz[0], 'Hz', 5)}.."
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


def render_design(result: DesignResult) -> str:
    lines = ["tristock design", *("  " + x for x in _spec_lines(result.spec)), ""]
    if result.infeasible:
        lines.append("No design meets the spec:")
        lines += [f"  - {r}" for r in result.infeasible.reasons]
    elif not result.candidates:
        lines.append(
            f"No design found within the time limit ({result.search.time_limit_s:g} s): the "
            "search was cut short, so this does not mean none exists (raise --time-limit)."
        )
    else:
        if result.spec.tuning is not None:
            lines += _tuning_table(result)
        elif result.spec.trimmed:
            lines += _trim_table(result)
        else:
            lines += _fixed_table(result)
        lines.append("")
        best = result.candidates[0]
        lines.append("Rank 1 parts: " + ", ".join(f"{k} {v.id}" for k, v in best.parts.items()))
        for w in best.warnings:
            lines.append(f"  {w.severity}: {w.message}")
    s = result.search
    lines += [
        "",
        f"search: {s.engine}, {'proven optimal' if s.proven_optimal else 'NOT proven (time limit)'}"
        f" within the search model, {s.combinations:,} combinations, {s.evaluated:,} rows "
        f"scored, {s.elapsed_s:.2f} s, score resolution {s.score_resolution:g}",
        "",
        "Cautions:",
        *(f"  - {c}" for c in CAUTIONS),
    ]
    return "\n".join(lines)


def cmd_design(args: argparse.Namespace) -> int:
    if args.example:
        spec_path = example_spec_path(args.example)
    elif args.spec is None:
        raise UsageError("design: give a SPEC file or --example")
    else:
        spec_path = Path(args.spec)
    spec = load_spec(spec_path)
    ranking = spec.ranking.model_copy(
        update={k: v for k, v in (("top", args.top), ("by", args.by)) if v is not None}
    )
    spec = spec.model_validate({**spec.model_dump(), "ranking": ranking.model_dump()})
    catalog = _catalog(args.catalog, example=args.example)
    result = design(spec, catalog, engine=args.engine, time_limit_s=args.time_limit)
    if args.plot:
        _plot_design(result, Path(args.plot))
    if args.json:
        _dump(result.model_dump(mode="json"))
    else:
        print(render_design(result))
        if args.plot and result.candidates:
            print(f"plot written to {args.plot}")
    return 0


def _plot_design(result: DesignResult, path: Path) -> None:
    """Rank 1's dial law (tuned) or its frequency against trimmer travel (trimmed)."""
    from tristock.plot import plot_dial_law

    if not result.candidates:
        return
    best = result.candidates[0]
    if best.tuning is not None:
        law = best.tuning.dial_law
    elif best.trim is not None:
        raise UsageError("--plot: trimmed designs have no dial law; use simulate --plot")
    else:
        raise UsageError("--plot: only tuned designs have a dial law; use simulate --plot")
    try:
        plot_dial_law(law, path, title=f"dial law, {best.parts['RV1'].id}")
    except ValueError as err:
        raise UsageError(str(err)) from None


# ---- analyse and simulate ---------------------------------------------------------------


def render_analysis(spec: Spec, d: Design, data: dict[str, Any]) -> str:
    osc = d.oscillator(rails_from_supply(spec.supply))
    p, wc = data["predicted"], data["worst_case"]
    y = data["yield"]
    lines = [
        "tristock analyse",
        "  parts     "
        + ", ".join(f"{k} {v['id']} ({v['display']})" for k, v in data["parts"].items()),
        *("  " + x for x in _spec_lines(spec)[:2]),
        "",
        str(osc),
        "",
        f"predicted   {format_value(p['frequency_hz'], 'Hz', 5)}, {p['amplitude_vpp']:.4g} Vpp, "
        f"duty {p['duty_high']:.2%}, offset {format_value(p['offset_v'], 'V')}",
        f"worst case  f {format_value(wc['frequency_hz'][0], 'Hz', 4)} .. "
        f"{format_value(wc['frequency_hz'][1], 'Hz', 4)}, "
        f"A {wc['amplitude_vpp'][0]:.4g} .. {wc['amplitude_vpp'][1]:.4g} Vpp ({wc['method']})",
        f"yield       {data['yield_fraction']:.2%} into both bands "
        f"({y.get('samples')} samples, {y.get('distribution')}, seed {y.get('seed')})",
        f"drift       f {data['drift']['frequency_ppm_per_c']:+.1f} ppm/°C, "
        f"A {data['drift']['amplitude_ppm_per_c']:+.1f} ppm/°C",
        "sensitivity (x/f)(df/dx): "
        + ", ".join(f"{k} {v:+.3g}" for k, v in data["sensitivity"]["frequency"].items()),
        "sensitivity (x/A)(dA/dx): "
        + ", ".join(f"{k} {v:+.3g}" for k, v in data["sensitivity"]["amplitude"].items()),
    ]
    if data["warnings"]:
        lines += ["", "Warnings:"] + [
            f"  {w['severity']}: {w['message']}" for w in data["warnings"]
        ]
    lines += ["", "Cautions:", *(f"  - {c}" for c in CAUTIONS)]
    return "\n".join(lines)


def cmd_analyse(args: argparse.Namespace) -> int:
    catalog = _catalog(args.catalog)
    spec, d = load_design(Path(args.design), catalog)
    data = analysis_report(
        spec, d, samples=args.samples, seed=args.seed, distribution=args.distribution
    )
    if args.json:
        _dump(data)
    else:
        print(render_analysis(spec, d, data))
    return 0


def cmd_simulate(args: argparse.Namespace) -> int:
    from tristock.simulate import SimulationError, simulate

    catalog = _catalog(args.catalog)
    spec, d = load_design(Path(args.design), catalog)
    osc = d.oscillator(rails_from_supply(spec.supply))
    try:
        result = simulate(osc, periods=args.periods)
    except SimulationError as err:
        print(f"tristock simulate: {err}", file=sys.stderr)
        return 1
    if args.plot:
        from tristock.plot import plot_waveforms

        plot_waveforms(result, Path(args.plot), title=f"{d.u1.id}: R3 {d.r3.id}, C1 {d.c1.id}")
    m = result.measured
    if args.json:
        _dump(simulation_report(spec, d, periods=args.periods))
        return 0
    full = osc.prediction()
    same = same_physics(osc).prediction()

    def row(name: str, meas: float, pred: float, unit: str) -> str:
        return (
            f"  {name:<10} {format_value(meas, unit, 6):>14} {format_value(pred, unit, 6):>14}"
            f" {100 * (meas / pred - 1):>+9.4f} %"
        )

    print(f"tristock simulate (time domain, settled, {result.periods_measured} periods measured)")
    print(f"  {'':<10} {'simulated':>14} {'model':>14} {'difference':>11}")
    print(row("frequency", m.frequency_hz, float(same.frequency_hz), "Hz"))
    print(row("amplitude", m.amplitude_vpp, float(same.amplitude_vpp), "Vpp"))
    print(
        f"  {'duty high':<10} {m.duty_high:>14.4%} {float(same.duty_high):>14.4%}"
        f" {100 * (m.duty_high - float(same.duty_high)):>+9.4f} pt"
    )
    print(
        "  (the simulation leaves out the comparator's finite-GBW delay; with it the model "
        f"predicts {format_value(float(full.frequency_hz), 'Hz', 6)}, "
        f"{float(full.amplitude_vpp):.5g} Vpp)"
    )
    if args.plot:
        print(f"plot written to {args.plot}")
    return 0


# ---- reoptimise -------------------------------------------------------------------------


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


def cmd_reoptimise(args: argparse.Namespace) -> int:
    from tristock.designfile import part_ids
    from tristock.reoptimise import reoptimise
    from tristock.spec import parse_spec, read_mapping

    catalog = _catalog(args.catalog)
    data = read_mapping(Path(args.design))
    spec = parse_spec(data.get("spec", {}))
    current = part_ids(data.get("parts"))
    result = reoptimise(
        spec,
        catalog,
        current,
        without=args.without or (),
        boards=args.boards,
        top=args.top,
        time_limit_s=args.time_limit,
    )
    if args.json:
        _dump(result.model_dump(mode="json"))
    else:
        print(render_reoptimise(result))
    return 0


# ---- catalog ----------------------------------------------------------------------------


def cmd_catalog_check(args: argparse.Namespace) -> int:
    catalog = load_catalog(args.dir)
    print(f"ok: {catalog!r}")
    return 0


def cmd_catalog_generate(args: argparse.Namespace) -> int:
    from tristock.catalog import parse_number
    from tristock.tablegen import generate_capacitors, generate_resistors, write_table

    def num(text: str, what: str) -> float:
        try:
            return parse_number(text)
        except ValueError as err:
            raise UsageError(f"--{what}: {err}") from None

    low, high = num(args.low, "from"), num(args.high, "to")
    try:
        if args.kind == "resistor":
            text = generate_resistors(
                args.series,
                low,
                high,
                args.tolerance,
                args.tempco or 100.0,
                args.power,
                args.package or "0603",
                args.cost,
                args.stock,
                args.prefix or "R",
            )
        else:
            if not args.dielectric:
                raise UsageError("--dielectric is required for --kind capacitor")
            text = generate_capacitors(
                args.series,
                low,
                high,
                args.dielectric,
                args.tolerance,
                args.tempco,
                args.temp_band,
                args.voltage,
                args.package or "0805",
                args.cost,
                args.stock,
                args.prefix or "C",
            )
    except (ValueError, CatalogError) as err:
        raise UsageError(f"catalog generate: {err}") from None
    if args.output:
        try:
            write_table(args.output, text, overwrite=args.force)
        except FileExistsError:
            raise UsageError(f"{args.output} exists (use --force to replace it)") from None
        print(f"wrote {args.output}")
    else:
        sys.stdout.write(text)
    return 0


def cmd_catalog_set_stock(args: argparse.Namespace) -> int:
    old = set_stock(args.dir, args.id, args.count)
    print(f"{args.id}: stock {old} -> {args.count}")
    return 0


def cmd_serve(args: argparse.Namespace) -> int:
    from tristock.serve import serve

    try:
        serve(args.host, args.port, args.catalog, args.workers, args.allow_open_writes)
    except ValueError as err:
        raise UsageError(f"serve: {err}") from None
    return 0


# ---- parser -----------------------------------------------------------------------------


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="tristock",
        description="Pick stock-room parts for an op-amp triangle/square oscillator.",
    )
    p.add_argument("--version", action="version", version=f"tristock {__version__}")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    d = sub.add_parser("design", help="search the catalog for the best designs for a spec")
    d.add_argument("spec", nargs="?", help="spec file (TOML or JSON)")
    d.add_argument(
        "--example",
        nargs="?",
        const="demo",
        choices=EXAMPLES,
        help="a bundled example spec on the demo catalog: demo (default), trimmed, tuned",
    )
    d.add_argument("--plot", help="tuned designs: write rank 1's dial law to FILE (.png/.svg)")
    d.add_argument("--catalog", help="catalog folder (default with --example: the demo)")
    d.add_argument("--top", type=int, help="how many designs (overrides ranking.top)")
    d.add_argument(
        "--by",
        choices=["balanced", "frequency_error", "cost", "yield"],
        help="ranking (overrides ranking.by)",
    )
    d.add_argument(
        "--engine",
        choices=["cpsat", "enumerate"],
        default="cpsat",
        help="search engine (default cpsat; both are exact)",
    )
    d.add_argument(
        "--time-limit",
        type=float,
        default=DEFAULT_TIME_LIMIT_S,
        help=f"seconds for the whole search (default {DEFAULT_TIME_LIMIT_S:g})",
    )
    d.add_argument("--json", action="store_true", help="one JSON object on stdout")
    d.set_defaults(func=cmd_design)

    for name, helptext, func in (
        ("analyse", "nominal, worst case, yield, sensitivities of one design", cmd_analyse),
        ("simulate", "time-domain simulation of one design against the model", cmd_simulate),
    ):
        a = sub.add_parser(name, help=helptext)
        a.add_argument("design", help="DESIGN file (TOML or JSON): spec + parts")
        a.add_argument("--catalog", required=True, help="catalog folder")
        a.add_argument("--json", action="store_true", help="one JSON object on stdout")
        if name == "analyse":
            a.add_argument("--samples", type=int, default=20000, help="Monte Carlo samples")
            a.add_argument("--seed", type=int, default=0, help="Monte Carlo seed")
            a.add_argument(
                "--distribution",
                choices=["normal", "uniform"],
                default="normal",
                help="part spread: normal (tolerance = 3σ, truncated) or uniform",
            )
        else:
            a.add_argument("--plot", help="write the waveforms to FILE (.png or .svg)")
            a.add_argument("--periods", type=int, default=10, help="periods to measure")
        a.set_defaults(func=func)

    r = sub.add_parser("reoptimise", help="fewest part changes that bring a design back in spec")
    r.add_argument("design", help="DESIGN file (TOML or JSON): spec + parts")
    r.add_argument("--catalog", required=True, help="catalog folder")
    r.add_argument("--without", action="append", metavar="ID", help="part now unavailable")
    r.add_argument("--boards", type=int, help="planned build (overrides build.boards)")
    r.add_argument("--top", type=int, help="how many designs (overrides ranking.top)")
    r.add_argument(
        "--time-limit",
        type=float,
        default=DEFAULT_TIME_LIMIT_S,
        help=f"seconds for the whole search (default {DEFAULT_TIME_LIMIT_S:g})",
    )
    r.add_argument("--json", action="store_true", help="one JSON object on stdout")
    r.set_defaults(func=cmd_reoptimise)

    c = sub.add_parser("catalog", help="check, generate or update part tables")
    csub = c.add_subparsers(dest="catalog_command", required=True, parser_class=_Parser)
    ck = csub.add_parser("check", help="validate every table of a catalog folder")
    ck.add_argument("dir")
    ck.set_defaults(func=cmd_catalog_check)
    g = csub.add_parser("generate", help="write a resistor or capacitor table for an E-series")
    g.add_argument("--kind", choices=["resistor", "capacitor"], required=True)
    g.add_argument("--series", required=True, help="E6 .. E192")
    g.add_argument("--from", dest="low", required=True, help="lowest value (e.g. 10, 4k7, 10p)")
    g.add_argument("--to", dest="high", required=True, help="highest value (e.g. 1M, 10u)")
    g.add_argument("--tolerance", type=float, required=True, help="± %%")
    g.add_argument("--tempco", type=float, help="ppm/°C")
    g.add_argument("--temp-band", type=float, help="class II: ± %% over temperature")
    g.add_argument("--dielectric", help="capacitors: C0G, PP, PET, X7R, ...")
    g.add_argument("--voltage", type=float, default=50.0, help="capacitors: rated V")
    g.add_argument("--power", type=float, default=0.1, help="resistors: rated W")
    g.add_argument("--package", help="package name")
    g.add_argument("--cost", type=float, default=0.0, help="unit cost")
    g.add_argument("--stock", type=int, default=0, help="pieces on hand")
    g.add_argument("--prefix", help="stock-code prefix")
    g.add_argument("--output", "-o", help="file to write (default: stdout)")
    g.add_argument("--force", action="store_true", help="replace an existing file")
    g.set_defaults(func=cmd_catalog_generate)
    ss = csub.add_parser("set-stock", help="set the pieces on hand of one part (atomic)")
    ss.add_argument("dir")
    ss.add_argument("id")
    ss.add_argument("count", type=int)
    ss.set_defaults(func=cmd_catalog_set_stock)
    sv = sub.add_parser("serve", help="run the HTTP API (loopback only by default)")
    sv.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    sv.add_argument("--port", type=int, default=8000, help="port (default 8000)")
    sv.add_argument("--catalog", help="catalog folder (default: the bundled demo)")
    sv.add_argument("--workers", type=int, default=1, help="server processes (default 1)")
    sv.add_argument(
        "--allow-open-writes",
        action="store_true",
        help="allow stock writes without a token when TRISTOCK_TOKEN is not set",
    )
    sv.set_defaults(func=cmd_serve)
    return p


def main(argv: list[str] | None = None) -> int:
    try:
        args = build_parser().parse_args(argv)
        return int(args.func(args))
    except UsageError as err:
        print(str(err), file=sys.stderr)
        return 2
    except SpecError as err:
        print("tristock: " + "; ".join(err.lines), file=sys.stderr)
        return 2
    except CatalogError as err:
        for issue in err.errors:
            print(str(issue), file=sys.stderr)
        return 1
    except StockError as err:
        print(f"tristock: {err}", file=sys.stderr)
        return 2
    except (FileNotFoundError, IsADirectoryError, PermissionError) as err:
        print(f"tristock: {err.filename}: {err.strerror}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
