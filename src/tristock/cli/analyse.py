"""``tristock analyse``: nominal, worst case, yield, sensitivities and checks of one design.

Exit 0 with the report; 1 when the loop cannot oscillate (the reason printed instead of
figures that would describe nothing); 2 for a bad design file.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from tristock.circuits.board import AnyBoard, rails_from_supply
from tristock.cli import exits
from tristock.cli.common import catalog_from, design_from_file
from tristock.cli.design import spec_lines
from tristock.cli.output import emit, emit_json
from tristock.cli.progress import progress
from tristock.designs.candidate import CAUTIONS
from tristock.report.board import analysis_report
from tristock.report.explain import SHOWN_SENSITIVITY
from tristock.report.text import bands_phrase, pct, value_range, wrap_all
from tristock.spec.model import Spec
from tristock.stock.units import format_value


def _sensitivities(data: dict[str, Any]) -> list[str]:
    f, a = data["sensitivity"]["frequency"], data["sensitivity"]["amplitude"]
    names = sorted(set(f) | set(a), key=lambda k: -max(abs(f.get(k, 0.0)), abs(a.get(k, 0.0))))
    lines = [f"  {'':<22} {'f':>8} {'Vpp':>8}"]
    lines += [
        f"  {k:<22} {f.get(k, 0.0):>+8.3f} {a.get(k, 0.0):>+8.3f}"
        for k in names
        if max(abs(f.get(k, 0.0)), abs(a.get(k, 0.0))) >= SHOWN_SENSITIVITY
    ]
    return lines


def render_analysis(spec: Spec, d: AnyBoard, data: dict[str, Any], *, quiet: bool = False) -> str:
    """The analysis as text, lines within 100 columns; ``quiet``: the figures only."""
    osc = d.oscillator(rails_from_supply(spec.supply))
    p, wc = data["predicted"], data["worst_case"]
    y = data["yield"]
    parts = []
    for k, v in data["parts"].items():
        what = (
            v["display"].removeprefix(v["id"]).strip(" ()")
            if v["kind"] == "opamp"
            else v["display"]
        )
        parts.append(f"{k} {v['id']} ({what})")
    head = [
        "tristock analyse",
        "  parts     " + ", ".join(parts),
        *("  " + x for x in spec_lines(spec)[:2]),
        "",
        str(osc),
        "",
    ]
    f0, f1 = wc["frequency_hz"]
    a0, a1 = wc["amplitude_vpp"]
    figures = [
        f"predicted   {format_value(p['frequency_hz'], 'Hz', 5)}, {p['amplitude_vpp']:.4g} Vpp, "
        f"duty {pct(p['duty_high'], 2)}, offset {format_value(p['offset_v'], 'V')}",
        f"worst case  f {value_range(f0, f1, 'Hz', 4)}, A {value_range(a0, a1, 'V', 4)}pp "
        f"({wc['method']})",
        f"yield       {pct(data['yield_fraction'], 2)} into {bands_phrase(spec.circuit.duty_band)} "
        f"({y.get('samples')} samples, {y.get('distribution')}, seed {y.get('seed')})",
        f"drift       f {data['drift']['frequency_ppm_per_c']:+.1f} ppm/°C, "
        f"A {data['drift']['amplitude_ppm_per_c']:+.1f} ppm/°C",
        "sensitivities (d ln f / d ln x, d ln Vpp / d ln x; larger first):",
        *_sensitivities(data),
    ]
    if quiet:
        return "\n".join(wrap_all(figures))
    tail = []
    if data["warnings"]:
        tail += ["", "Warnings:"] + [f"  {w['severity']}: {w['message']}" for w in data["warnings"]]
    tail += ["", "Sketch:", *("  " + x for x in d.topology.sketch.strip("\n").splitlines())]
    tail += ["", "Cautions:", *(f"  - {c}" for c in CAUTIONS)]
    return "\n".join(wrap_all([*head, *figures, *tail]))


def run(args: argparse.Namespace) -> int:
    spec, d = design_from_file(Path(args.design), catalog_from(args.catalog))
    with progress(f"analysing ({args.samples:,} Monte Carlo samples)", quiet=args.quiet):
        data = analysis_report(
            spec, d, samples=args.samples, seed=args.seed, distribution=args.distribution
        )
    if args.json:
        emit_json(data)
    else:
        emit(render_analysis(spec, d, data, quiet=args.quiet))
    return exits.OK
