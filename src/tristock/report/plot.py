"""Plots: the waveforms of a time-domain simulation, and the dial law of a tuned design.

Drawn with matplotlib's Agg canvas (no screen needed) and written atomically
(:func:`tristock.stock.atomicio.write_atomic`: temporary file in the target directory, fsync,
rename).
The format follows the suffix: ``.png`` (raster, 150 dpi) or ``.svg``.
"""

from __future__ import annotations

from pathlib import Path

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from tristock.simulate import SimulationResult
from tristock.stock.atomicio import write_atomic
from tristock.stock.units import format_value

#: Output formats by file suffix (lower case).
FORMATS = {".png": "png", ".svg": "svg"}

TRIANGLE_COLOUR = "#1f4e9c"  # dark blue
SQUARE_COLOUR = "#c2410c"  # burnt orange
THRESHOLD_COLOUR = "#4b5563"  # slate grey
REFERENCE_COLOUR = "#9ca3af"  # light grey

#: (scale factor, label) for the time axis, chosen from the window's span.
_TIME_UNITS = ((1e9, "ns"), (1e6, "µs"), (1e3, "ms"), (1.0, "s"))


def _time_unit(span_s: float) -> tuple[float, str]:
    """The largest time unit in which ``span_s`` reads as at least 1 (seconds for long spans)."""
    for scale, label in _TIME_UNITS:
        if span_s * scale < 1000.0:
            return scale, label
    return 1.0, "s"


def plot_waveforms(result: SimulationResult, path: Path, *, title: str | None = None) -> Path:
    """Draw ``result``'s triangle and square (V to ground) against time and write ``path``.

    Dashed lines mark the comparator thresholds (reference + threshold_high/low); a dotted line
    the reference. The title carries the measured frequency, amplitude (Vpp) and duty, after
    ``title`` if one is given. Returns ``path``.

    Raises ValueError for a suffix other than .png or .svg, or a directory that does not exist.
    """
    path, fmt = _target(path)
    if result.t_s.size < 2:
        raise ValueError("result: the waveform has fewer than two samples")

    m = result.measured
    scale, unit = _time_unit(float(result.t_s[-1] - result.t_s[0]))
    t = result.t_s * scale
    ref = result.reference_v

    fig = Figure(figsize=(9.0, 4.8), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    ax.plot(t, result.square_v, color=SQUARE_COLOUR, linewidth=1.4, label="square (comparator)")
    ax.plot(
        t, result.triangle_v, color=TRIANGLE_COLOUR, linewidth=1.6, label="triangle (integrator)"
    )
    ax.axhline(
        ref + result.threshold_high_v,
        color=THRESHOLD_COLOUR,
        linestyle="--",
        linewidth=1.0,
        label=f"thresholds {ref + result.threshold_low_v:.3g} V / "
        f"{ref + result.threshold_high_v:.3g} V",
    )
    ax.axhline(ref + result.threshold_low_v, color=THRESHOLD_COLOUR, linestyle="--", linewidth=1.0)
    ax.axhline(
        ref, color=REFERENCE_COLOUR, linestyle=":", linewidth=1.0, label=f"reference {ref:.3g} V"
    )
    ax.set_xlim(float(t[0]), float(t[-1]))
    ax.set_xlabel(f"time ({unit})")
    ax.set_ylabel("voltage to ground (V)")
    ax.grid(True, color="#e5e7eb", linewidth=0.8)
    fig.legend(loc="outside lower center", ncols=4, fontsize="small", frameon=False)
    summary = (
        f"f = {format_value(m.frequency_hz, 'Hz', 5)}, {m.amplitude_vpp:.4g} Vpp, "
        f"duty {100.0 * m.duty_high:.2f} % ({result.periods_measured} periods)"
    )
    ax.set_title(f"{title}\n{summary}" if title else summary)
    return _write(fig, path, fmt)


def plot_dial_law(law: dict[str, list[float]], path: Path, *, title: str | None = None) -> Path:
    """Frequency (log axis) against wiper position, one curve per range capacitor.

    ``law`` holds "wiper" (0..1) and one list of frequencies (Hz) per range ("C1", ...), as in
    ``TuningOut.dial_law``. Raises ValueError for a bad suffix or a missing directory.
    """
    path, fmt = _target(path)
    wiper = [100.0 * w for w in law["wiper"]]
    fig = Figure(figsize=(7.5, 4.8), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    for name, freqs in law.items():
        if name != "wiper":
            ax.plot(wiper, freqs, marker="o", markersize=3, linewidth=1.4, label=f"range {name}")
    ax.set_yscale("log")
    ax.set_xlim(0.0, 100.0)
    ax.set_xlabel("pot rotation (% of travel)")
    ax.set_ylabel("frequency (Hz)")
    ax.grid(True, which="both", color="#e5e7eb", linewidth=0.8)
    ax.legend(fontsize="small", frameon=False)
    ax.set_title(title or "dial law (nominal)")
    return _write(fig, path, fmt)


def _target(path: Path) -> tuple[Path, str]:
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ValueError(
            f"path: {str(path)!r} has suffix {path.suffix!r}; the plot is written as "
            f"{' or '.join(FORMATS)} only"
        )
    directory = path.parent if str(path.parent) else Path(".")
    if not directory.is_dir():
        raise ValueError(f"path: directory {str(directory)!r} does not exist")
    return path, fmt


def _write(fig: Figure, path: Path, fmt: str) -> Path:
    """Write ``fig`` atomically (:func:`tristock.stock.atomicio.write_atomic`)."""
    write_atomic(path, lambda stream: fig.savefig(stream, format=fmt, dpi=150))
    return path
