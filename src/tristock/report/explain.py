"""One answer explained (``tristock design --explain N``): parts, prediction, spread, every
finding, the sensitivities and the topology's sketch naming each designator."""

from __future__ import annotations

from tristock.designs.results import Candidate
from tristock.report.text import bands_phrase, pct, value_range
from tristock.stock.units import format_value

#: Sensitivities smaller than this (in both f and Vpp) are left out of the list.
SHOWN_SENSITIVITY = 1e-3


def part_lines(c: Candidate) -> list[str]:
    """Designator, stock code and what it is ("21.5 kΩ 0.1 %", "dual")."""
    lines = []
    for name, p in c.parts.items():
        what = p.display
        if p.kind == "opamp":
            what = what.removeprefix(p.id).strip(" ()")
        lines.append(f"    {name:<4} {p.id:<12} {what}")
    return lines


def sensitivity_lines(c: Candidate) -> list[str]:
    """Normalised sensitivities d ln f/d ln x and d ln Vpp/d ln x, largest first."""
    f = c.sensitivity.get("frequency", {})
    a = c.sensitivity.get("amplitude", {})
    names = sorted(set(f) | set(a), key=lambda k: -max(abs(f.get(k, 0.0)), abs(a.get(k, 0.0))))
    lines = [f"    {'':<14} {'f':>8} {'Vpp':>8}"]
    for k in names:
        sf, sa = f.get(k, 0.0), a.get(k, 0.0)
        if max(abs(sf), abs(sa)) >= SHOWN_SENSITIVITY:
            lines.append(f"    {k:<14} {sf:>+8.3f} {sa:>+8.3f}")
    return lines


def explain(c: Candidate, sketch: str, duty_band: tuple[float, float] | None = None) -> list[str]:
    """The explanation of candidate ``c`` (lines, to be wrapped at 100 columns);
    ``duty_band``: the spec's set-duty band, whose worst case and yield are then shown."""
    p = c.predicted
    wc = c.worst_case
    lines = [f"Design {c.rank} explained", "  parts:", *part_lines(c)]
    err_f = pct(c.error.frequency_pct / 100, 2, sign=True)
    err_a = pct(c.error.amplitude_pct / 100, 2, sign=True)
    lines.append(
        f"  nominal: {format_value(p.frequency_hz, 'Hz', 5)} ({err_f}), "
        f"{p.amplitude_vpp:.3f} Vpp ({err_a}), "
        f"duty {pct(p.duty_high)}, timing share {pct(p.timing_share)}"
    )
    if "frequency_hz" in wc and "amplitude_vpp" in wc:
        f0, f1 = wc["frequency_hz"]
        a0, a1 = wc["amplitude_vpp"]
        duty = ""
        if duty_band is not None and "duty_high" in wc:
            duty = f", duty {pct(wc['duty_high'][0], 2)}-{pct(wc['duty_high'][1], 2)}"
        lines.append(
            f"  worst case: {value_range(f0, f1, 'Hz', 4)}, {value_range(a0, a1, 'V', 4)}pp"
            f"{duty} (over tolerances, rails and temperature; {wc.get('method', '')})"
        )
    samples = c.yield_detail.get("samples")
    if samples:
        before = " untrimmed (wiper at its nominal point)" if c.trim is not None else ""
        lines.append(
            f"  yield: {pct(c.yield_fraction)} of {samples:,} boards into "
            f"{bands_phrase(duty_band)}{before}"
        )
    drift = c.drift
    if "frequency_ppm_per_c" in drift:
        lines.append(
            f"  drift: f {drift['frequency_ppm_per_c']:+.1f} ppm/°C, "
            f"Vpp {drift.get('amplitude_ppm_per_c', 0.0):+.1f} ppm/°C"
        )
    lines.append("  findings:" if c.warnings else "  findings: none")
    lines += [f"    {w.severity}: {w.message}" for w in c.warnings]
    lines.append("  sensitivities (d ln f / d ln x, d ln Vpp / d ln x; larger first):")
    lines += sensitivity_lines(c)
    lines.append("  sketch:")
    lines += ["    " + row for row in sketch.strip("\n").splitlines()]
    return lines


__all__ = ["explain", "part_lines", "sensitivity_lines"]
