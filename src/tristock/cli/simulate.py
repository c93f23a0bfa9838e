"""``tristock simulate``: the time-domain simulation of one design against the model.

Exit 0 with the comparison; 1 when the loop does not oscillate (the simulation says why);
2 for a bad design file or plot name (checked before the simulation runs).
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

from tristock.circuits.board import AnyBoard, rails_from_supply
from tristock.cli import exits
from tristock.cli.common import catalog_from, design_from_file, plot_target
from tristock.cli.exits import WorkFailed
from tristock.cli.output import emit, emit_json
from tristock.cli.progress import progress
from tristock.report.board import headline_difference, require_oscillation, simulation_report
from tristock.report.text import pct
from tristock.simulate import SimulationError, SimulationResult, simulate
from tristock.spec.model import Spec
from tristock.stock.units import format_value


def render_simulation(spec: Spec, d: AnyBoard, result: SimulationResult) -> str:
    """Simulated against the full model's frequency, amplitude and duty (the prediction
    ``analyse`` reports: delay, slew and both channels' GBW, as the simulation)."""
    osc = d.oscillator(rails_from_supply(spec.supply))
    m = result.measured
    full = osc.prediction()
    diff = headline_difference(m, full)

    def row(name: str, meas: float, pred: float, unit: str, rel: float) -> str:
        return (
            f"  {name:<10} {format_value(meas, unit, 6):>14} {format_value(pred, unit, 6):>14}"
            f" {100 * rel:>+9.4f} %"
        )

    engine = (
        "an ODE, both op amps single-pole"
        if math.isfinite(osc.opamp.gbw_hz)
        else "exact piecewise, ideal gain-bandwidth"
    )
    return "\n".join(
        [
            f"tristock simulate (time domain, settled, {result.periods_measured} periods measured)",
            f"  {'':<10} {'simulated':>14} {'model':>14} {'difference':>11}",
            row("frequency", m.frequency_hz, float(full.frequency_hz), "Hz", diff["frequency_rel"]),
            row(
                "amplitude",
                m.amplitude_vpp,
                float(full.amplitude_vpp),
                "Vpp",
                diff["amplitude_rel"],
            ),
            f"  {'duty high':<10} {pct(m.duty_high, 4):>14} {pct(float(full.duty_high), 4):>14}"
            f" {100 * diff['duty_abs']:>+9.4f} pt",
            f"  simulation: {engine}; model: the full prediction (as analyse),",
            f"  op-amp timing {100 * float(full.timing_share):.1f} % of the period",
        ]
    )


def run(args: argparse.Namespace) -> int:
    plot = plot_target("--plot", args.plot) if args.plot is not None else None
    spec, d = design_from_file(Path(args.design), catalog_from(args.catalog))
    require_oscillation(spec, d, corners=False)  # the simulation runs on the nominal rails
    osc = d.oscillator(rails_from_supply(spec.supply))
    try:
        with progress(f"simulating {args.periods} periods", quiet=args.quiet):
            result = simulate(osc, periods=args.periods, topology=d.topology)
            data = (
                simulation_report(spec, d, periods=args.periods, max_points=args.max_points)
                if args.json
                else None
            )
    except SimulationError as err:
        raise WorkFailed(f"tristock simulate: {err}") from None
    if plot is not None:
        from tristock.report.plot import plot_waveforms

        parts = d.parts()
        plot_waveforms(result, plot, title=", ".join(f"{k} {parts[k].id}" for k in ("U1", "C1")))
    if data is not None:
        emit_json(data)
    else:
        text = render_simulation(spec, d, result)
        if plot is not None and not args.quiet:
            text += f"\nplot written to {plot}"
        emit(text)
    return exits.OK
