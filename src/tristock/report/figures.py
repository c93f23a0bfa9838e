"""Figures of one design as SVG text, for the browser workbench (``tristock serve``, ``/``).

Drawn with matplotlib's Agg canvas and written as SVG with text kept as text
(``svg.fonttype = "none"``: axis labels and units stay searchable and readable by a screen
reader) and a fixed hash salt (the same figure gives the same bytes). Every figure's root
``<svg>`` carries ``role="img"`` and an ``aria-label`` saying what it shows.

- ``waveform_svg``: the simulated triangle and square (V to ground) over two periods with the
  comparator thresholds and the reference, and a zoom on the square's first rising edge.
- ``histograms_svg``: Monte Carlo histograms of frequency (Hz) and triangle amplitude (Vpp)
  with the spec's bands and the yield (``analysis.montecarlo``).
- ``dial_law_svg``: a tuned design's nominal frequency against pot rotation per range, with
  each range's target and guaranteed bands.
"""

from __future__ import annotations

import html
import io
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib import rc_context
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from tristock.analysis.montecarlo import Distribution, monte_carlo, monte_carlo_samples
from tristock.circuits.board import AnyBoard, Design, rails_from_supply
from tristock.report.board import require_oscillation
from tristock.report.plot import (
    REFERENCE_COLOUR,
    SQUARE_COLOUR,
    THRESHOLD_COLOUR,
    TRIANGLE_COLOUR,
)
from tristock.spec.model import Spec
from tristock.stock.units import format_value

#: Periods shown in the waveform figure, and the samples per waveform.
WAVEFORM_PERIODS = 2
WAVEFORM_POINTS = 3000
#: Histogram bins per metric.
BINS = 60
BAND_COLOUR = "#b91c1c"  # dark red: the spec's band edges
HISTOGRAM_COLOUR = "#1f4e9c"
GRID_COLOUR = "#e5e7eb"
#: (scale factor, label) for a time axis, chosen from the span shown.
TIME_UNITS = ((1e9, "ns"), (1e6, "µs"), (1e3, "ms"), (1.0, "s"))


def time_unit(span_s: float) -> tuple[float, str]:
    """The largest unit in which ``span_s`` reads as less than 1000 (seconds at most)."""
    for scale, label in TIME_UNITS:
        if span_s * scale < 1000.0:
            return scale, label
    return 1.0, "s"


def svg_text(fig: Figure, label: str) -> str:
    """``fig`` as one ``<svg>`` element (no XML prolog), labelled for assistive technology."""
    buf = io.StringIO()
    with rc_context({"svg.fonttype": "none", "svg.hashsalt": "tristock"}):
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    text = buf.getvalue()
    start = text.index("<svg")
    attrs = f'<svg role="img" aria-label="{html.escape(label, quote=True)}" '
    return attrs + text[start + len("<svg ") :]


def rising_edge(t: np.ndarray, square: np.ndarray, level: float) -> tuple[float, float] | None:
    """The first rising crossing of ``level`` by ``square``: (start, end) of the edge in s,
    from the last sample at the low level before it to the first at the high level after it
    (within 2 % of the swing); None when the square never rises through ``level``."""
    low, high = float(np.min(square)), float(np.max(square))
    above = square > level
    rises = np.flatnonzero(~above[:-1] & above[1:])
    if rises.size == 0 or high <= low:
        return None
    i = int(rises[0])
    margin = 0.02 * (high - low)
    before = np.flatnonzero(square[: i + 1] <= low + margin)
    after = np.flatnonzero(square[i + 1 :] >= high - margin)
    start = float(t[before[-1]]) if before.size else float(t[i])
    end = float(t[i + 1 + after[0]]) if after.size else float(t[i + 1])
    return start, end


def waveform_svg(spec: Spec, design: AnyBoard) -> str:
    """The board simulated at nominal rails and 25 °C (``tristock.simulate``, the same run as
    ``POST /v1/simulate``), two settled periods, and a zoom on the first rising edge.

    Raises ``SimulationError`` when the loop does not oscillate."""
    from tristock.simulate import simulate

    osc = design.oscillator(rails_from_supply(spec.supply))
    result = simulate(
        osc, periods=WAVEFORM_PERIODS, max_points=WAVEFORM_POINTS, topology=design.topology
    )
    t, tri, sq = result.t_s, result.triangle_v, result.square_v
    ref = result.reference_v
    th_hi, th_lo = ref + result.threshold_high_v, ref + result.threshold_low_v
    m = result.measured
    fig = Figure(figsize=(10.0, 4.2), layout="constrained")
    FigureCanvasAgg(fig)
    whole, zoom = fig.subplots(1, 2, width_ratios=(2.2, 1.0))
    scale, unit = time_unit(float(t[-1] - t[0]))
    _traces(whole, t * scale, tri, sq, ref, (th_lo, th_hi))
    whole.set_xlim(float(t[0] * scale), float(t[-1] * scale))
    whole.set_xlabel(f"time ({unit})")
    whole.set_ylabel("voltage to ground (V)")
    whole.set_title(
        f"f = {format_value(m.frequency_hz, 'Hz', 5)}, {m.amplitude_vpp:.4g} Vpp, "
        f"duty {100.0 * m.duty_high:.2f} %",
        fontsize="medium",
    )
    edge = rising_edge(t, sq, ref)
    if edge is not None:
        width = max(edge[1] - edge[0], m.period_s / 400.0)
        lo, hi = edge[0] - 1.5 * width, edge[1] + 1.5 * width
        inside = (t >= lo) & (t <= hi)
        zscale, zunit = time_unit(hi - lo)
        _traces(zoom, t[inside] * zscale, tri[inside], sq[inside], ref, (th_lo, th_hi))
        zoom.set_xlim(lo * zscale, hi * zscale)
        zoom.set_xlabel(f"time ({zunit})")
        zoom.set_title("zoom: rising edge of the square", fontsize="medium")
    else:
        zoom.set_axis_off()
    zoom.set_ylabel("voltage to ground (V)")
    handles, labels = whole.get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=4, fontsize="small")
    label = (
        f"Waveforms over {WAVEFORM_PERIODS} periods: triangle and square in volts against time "
        f"in {unit}, thresholds {th_lo:.4g} V and {th_hi:.4g} V, and a zoom on one transition"
    )
    return svg_text(fig, label)


def _traces(
    ax: Axes,
    t: np.ndarray,
    tri: np.ndarray,
    sq: np.ndarray,
    ref: float,
    thresholds: tuple[float, float],
) -> None:
    ax.plot(t, sq, color=SQUARE_COLOUR, linewidth=1.3, label="square (comparator)")
    ax.plot(t, tri, color=TRIANGLE_COLOUR, linewidth=1.5, label="triangle (integrator)")
    lo, hi = thresholds
    ax.axhline(
        hi,
        color=THRESHOLD_COLOUR,
        linestyle="--",
        linewidth=1.0,
        label=f"thresholds {lo:.4g} V / {hi:.4g} V",
    )
    ax.axhline(lo, color=THRESHOLD_COLOUR, linestyle="--", linewidth=1.0)
    ax.axhline(
        ref, color=REFERENCE_COLOUR, linestyle=":", linewidth=1.0, label=f"reference {ref:.4g} V"
    )
    ax.grid(True, color=GRID_COLOUR, linewidth=0.8)


def histograms_svg(
    spec: Spec,
    design: AnyBoard,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> str:
    """Monte Carlo histograms of frequency and amplitude with the spec's bands and the yield
    (the same draws and the same yield as ``POST /v1/analyse`` with these settings). A tuned
    spec is taken as ``analysis_report`` takes it: the board against its own nominal
    frequency with a ±50 % band.

    Raises ``DoesNotOscillate`` (a ValueError) for a loop that cannot oscillate."""
    require_oscillation(spec, design)
    if spec.tuning is not None:
        from tristock.designs.tuned import proxy_spec_at

        assert isinstance(design, Design)  # a tuned board is an op-amp Schmitt board
        spec = proxy_spec_at(spec, design)
    values = monte_carlo_samples(
        design, spec, samples=samples, seed=seed, distribution=distribution
    )
    result = monte_carlo(design, spec, samples=samples, seed=seed, distribution=distribution)
    fig = Figure(figsize=(10.0, 3.8), layout="constrained")
    FigureCanvasAgg(fig)
    f_ax, a_ax = fig.subplots(1, 2)
    f_target, f_tol = spec.target.target_hz, spec.target.tolerance_pct / 100
    a_target, a_tol = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    _histogram(f_ax, values[:, 0], f_target, f_tol, "frequency (Hz)")
    _histogram(a_ax, values[:, 1], a_target, a_tol, "triangle amplitude (Vpp)")
    lo, hi = result.confidence_interval
    fig.suptitle(
        f"Monte Carlo, {samples} boards ({distribution}, seed {seed}): yield "
        f"{100 * result.fraction:.2f} % (95 % interval {100 * lo:.2f}..{100 * hi:.2f} %)",
        fontsize="medium",
    )
    label = (
        f"Histograms of frequency in Hz and triangle amplitude in Vpp over {samples} Monte "
        f"Carlo boards with the spec's bands; yield {100 * result.fraction:.2f} %"
    )
    return svg_text(fig, label)


def _histogram(ax: Axes, values: np.ndarray, target: float, tol: float, xlabel: str) -> None:
    low, high = target * (1 - tol), target * (1 + tol)
    span_lo = min(float(np.min(values)), low)
    span_hi = max(float(np.max(values)), high)
    pad = 0.05 * (span_hi - span_lo)
    edges = np.linspace(span_lo - pad, span_hi + pad, BINS + 1)
    ax.hist(values, bins=edges.tolist(), color=HISTOGRAM_COLOUR, alpha=0.85)
    inside = float(np.mean((values >= low) & (values <= high)))
    ax.axvline(
        low,
        color=BAND_COLOUR,
        linestyle="--",
        linewidth=1.2,
        label=f"band {low:.5g}..{high:.5g} ({100 * inside:.2f} % inside)",
    )
    ax.axvline(high, color=BAND_COLOUR, linestyle="--", linewidth=1.2)
    ax.axvline(target, color="#111827", linestyle=":", linewidth=1.0, label=f"target {target:.5g}")
    ax.set_xlabel(xlabel)
    ax.set_ylabel("boards")
    ax.grid(True, color=GRID_COLOUR, linewidth=0.8)
    ax.legend(fontsize="small", loc="upper left")


def dial_law_svg(
    law: Mapping[str, Sequence[float]],
    ranges: Sequence[Mapping[str, Any]],
    wanted_hz: tuple[float, float] | None = None,
) -> str:
    """Nominal frequency (log axis) against pot rotation, one curve per range capacitor, as
    ``TuningOut.dial_law`` gives it; for each range (``TuningOut.ranges``) a light band over
    its guaranteed span and dotted lines at its target ends; ``wanted_hz`` (the spec's
    ``tuning.low_hz``/``high_hz``) as dashed lines. Pure drawing: no physics."""
    wiper = [100.0 * w for w in law["wiper"]]
    fig = Figure(figsize=(8.0, 4.4), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    colours = ("#1f4e9c", "#c2410c", "#047857", "#7c3aed", "#b45309", "#be185d", "#0e7490")
    for i, r in enumerate(ranges):
        name, colour = str(r["capacitor"]), colours[i % len(colours)]
        if name in law:
            ax.plot(
                wiper,
                law[name],
                color=colour,
                marker="o",
                markersize=2.5,
                linewidth=1.4,
                label=f"range {name}",
            )
        ax.axhspan(
            float(r["guaranteed_low_hz"]),
            float(r["guaranteed_high_hz"]),
            color=colour,
            alpha=0.12,
            label=f"{name} guaranteed",
        )
        for end in (r["low_hz"], r["high_hz"]):
            ax.axhline(float(end), color=colour, linestyle=":", linewidth=0.9)
    if wanted_hz is not None:
        for end in wanted_hz:
            ax.axhline(end, color="#111827", linestyle="--", linewidth=1.1)
    ax.set_yscale("log")
    ax.set_xlim(0.0, 100.0)
    ax.set_xlabel("pot rotation (% of travel)")
    ax.set_ylabel("frequency (Hz)")
    ax.grid(True, which="both", color=GRID_COLOUR, linewidth=0.8)
    ax.legend(fontsize="small", ncols=2, loc="lower right")
    ax.set_title(
        "dial law (nominal); bands: guaranteed span; dotted: range targets", fontsize="medium"
    )
    label = "Dial law: frequency in Hz against pot rotation in percent of travel, per range"
    return svg_text(fig, label)
