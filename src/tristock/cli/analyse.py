"""``tristock analyse``: nominal, worst case, yield, sensitivities and checks of one design.

Exit 0 with the report; 1 when the loop cannot oscillate (the reason printed instead of
figures that would describe nothing); 2 for a bad design file.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from tristock.circuits.board import Design, rails_from_supply
from tristock.cli import exits
from tristock.cli.common import catalog_from, design_from_file
from tristock.cli.design import spec_lines
from tristock.cli.output import emit, emit_json
from tristock.designs.candidate import CAUTIONS
from tristock.report.board import analysis_report
from tristock.spec.model import Spec
from tristock.stock.units import format_value


def render_analysis(spec: Spec, d: Design, data: dict[str, Any]) -> str:
    osc = d.oscillator(rails_from_supply(spec.supply))
    p, wc = data["predicted"], data["worst_case"]
    y = data["yield"]
    lines = [
        "tristock analyse",
        "  parts     "
        + ", ".join(f"{k} {v['id']} ({v['display']})" for k, v in data["parts"].items()),
        *("  " + x for x in spec_lines(spec)[:2]),
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


def run(args: argparse.Namespace) -> int:
    spec, d = design_from_file(Path(args.design), catalog_from(args.catalog))
    data = analysis_report(
        spec, d, samples=args.samples, seed=args.seed, distribution=args.distribution
    )
    if args.json:
        emit_json(data)
    else:
        emit(render_analysis(spec, d, data))
    return exits.OK
