"""The table of designs: fixed, trimmed and tuned answers, their variants and a legend.

The default table fits ``text.WIDTH`` (100) columns for stock codes up to 8 characters:
resistor values without the ohm sign ("21.5k"), worst-case ranges to 3 digits; ``wide``
adds units, 4-digit ranges and the timing share. Every row ends in a flag: ``!`` when the
design has an error-level finding, ``*`` when it has cautions (``--explain N`` prints them),
blank when it has none. A design with variants (``designs.variants``) gets one ``also:``
line under its row, the differing stock codes of each variant.
"""

from __future__ import annotations

from dataclasses import dataclass

from tristock.designs.results import Candidate, DesignResult
from tristock.report.text import WIDTH, pct, value_range, wrap_items
from tristock.stock.units import format_value


@dataclass(frozen=True)
class TableStyle:
    """How a table is drawn: ``wide`` lifts the 100-column limit; ``currency`` labels cost."""

    wide: bool = False
    currency: str = "currency units"


def flag(c: Candidate) -> str:
    """ "!" with an error-level finding, "*" with cautions only, " " with none."""
    severities = {w.severity for w in c.warnings}
    return "!" if "error" in severities else "*" if severities else " "


def ohms(c: Candidate, designator: str, wide: bool) -> str:
    value = c.parts[designator].value or 0.0
    return format_value(value, "Ω") if wide else format_value(value)


#: Columns preceded by two spaces instead of one: they start a group (parts, figures).
GROUP_STARTS = frozenset({"U1", "C1", "f", "worst-case f", "wiper"})


def _columns(header: list[tuple[str, str]], rows: list[list[str]]) -> list[str]:
    """Header and rows as aligned columns: each (title, "<" or ">") sets the alignment,
    widths fit the longest cell; one space between columns, two before a group's first."""
    widths = [max(len(t), *(len(r[n]) for r in rows)) for n, (t, _) in enumerate(header)]

    def line(cells: list[str]) -> str:
        out = ""
        for n, cell in enumerate(cells):
            title, align = header[n]
            gap = "" if n == 0 else "  " if title in GROUP_STARTS else " "
            out += gap + f"{cell:{align}{widths[n]}}"
        return out.rstrip()

    head = line([t for t, _ in header])
    return [head, "-" * len(head)] + [line(r) for r in rows]


def also_line(c: Candidate, width: int) -> str | None:
    """ "    also: #6 U1 GA-JF4; #3 R1 R1F-1K05 R2 R1F-3K83": each variant's rank among all
    variants and its differing stock codes, cut to ``width`` with the count left out."""
    if not c.variants:
        return None
    items = [
        f"#{v.rank_all} " + " ".join(f"{d} {v.parts[d]}" for d in v.differs) for v in c.variants
    ]
    line = "    also: " + "; ".join(items)
    if len(line) <= width:
        return line
    shown: list[str] = []
    for n, item in enumerate(items):
        rest = len(items) - n - 1
        tail = f"; +{rest} more (--json)" if rest else ""
        if len("    also: " + "; ".join([*shown, item]) + tail) > width:
            return "    also: " + "; ".join(shown) + f"; +{len(items) - n} more (--json)"
        shown.append(item)
    return line


def _with_also(rows: list[str], result: DesignResult, width: int) -> list[str]:
    """Table lines (header, rule, one per candidate) with the also-lines under their rows."""
    out = rows[:2]
    for c, row in zip(result.candidates, rows[2:], strict=True):
        out.append(row)
        also = also_line(c, width)
        if also:
            out.append(also)
    return out


def fixed_table(result: DesignResult, style: TableStyle) -> list[str]:
    wide = style.wide
    stage = ["U1", *(["U2"] if any("U2" in c.parts for c in result.candidates) else [])]
    header = [("#", ">"), *((d, "<") for d in stage)]
    resistors = [
        d for d in ("R1", "R2", "R3", "R3A", "R3B") if any(d in c.parts for c in result.candidates)
    ]
    duty = result.spec.circuit.duty_band is not None
    header += [*((d, ">") for d in resistors), ("C1", "<")]
    header += [("f", ">"), ("err", ">"), ("Vpp", ">")]
    header += [("duty", ">")] if duty else []
    header += [("timing", ">")] if wide else []
    header += [("worst-case f", ">"), ("yield", ">"), ("cost", ">"), ("", "<")]
    rows = []
    for c in result.candidates:
        wc = c.worst_case["frequency_hz"]
        row = [str(c.rank), *(c.parts[d].id if d in c.parts else "" for d in stage)]
        row += [ohms(c, d, wide) if d in c.parts else "" for d in resistors]
        row += [c.parts["C1"].display, format_value(c.predicted.frequency_hz, "Hz", 5)]
        row += [pct(c.error.frequency_pct / 100, 2, sign=True), f"{c.predicted.amplitude_vpp:.3f}"]
        row += [pct(c.predicted.duty_high, 2)] if duty else []
        row += [pct(c.predicted.timing_share)] if wide else []
        row += [value_range(wc[0], wc[1], "Hz", 4 if wide else 3), pct(c.yield_fraction)]
        row += [f"{c.cost:.3f}", flag(c)]
        rows.append(row)
    return _with_also(_columns(header, rows), result, 10**6 if wide else WIDTH)


def trim_table(result: DesignResult, style: TableStyle) -> list[str]:
    wide = style.wide
    header = [("#", ">"), ("U1", "<"), ("R1", ">"), ("R2", ">"), ("R3", ">"), ("RV1", ">")]
    header += [("C1", "<"), ("wiper", ">"), ("trim span", ">"), ("res %/%", ">")]
    header += [("drift", ">"), ("cost", ">"), ("", "<")]
    rows = []
    for c in result.candidates:
        t = c.trim
        assert t is not None
        row = [str(c.rank), c.parts["U1"].id]
        row += [ohms(c, d, wide) for d in ("R1", "R2", "R3", "RV1")]
        row += [c.parts["C1"].display, pct(t.wiper_nominal)]
        row += [value_range(min(t.range_hz), max(t.range_hz), "Hz", 4 if wide else 3)]
        row += [f"{t.resolution_pct_per_pct:.3f}", pct(t.drift_after_trim_pct / 100, 3)]
        row += [f"{c.cost:.3f}", flag(c)]
        rows.append(row)
    lines = _with_also(_columns(header, rows), result, 10**6 if wide else WIDTH)
    best = result.candidates[0].trim
    assert best is not None
    lines.append(
        f"\nEvery board reaches {value_range(best.reach_hz[0], best.reach_hz[1], 'Hz', 5)} "
        f"inside the wiper margins of {best.margin_pct:g} % (rank 1)."
    )
    return lines


def tuning_table(result: DesignResult, style: TableStyle) -> list[str]:
    lines = []
    width = 10**6 if style.wide else WIDTH
    for c in result.candidates:
        t = c.tuning
        assert t is not None
        shared = ", ".join(
            f"{k} {v.id}" for k, v in c.parts.items() if not (k.startswith("C") and k[1:].isdigit())
        )
        lines.append(f"{c.rank:>2}. {len(t.ranges)} ranges, cost {c.cost:.3f} {flag(c)}")
        lines.append(f"    {shared}")
        for r in t.ranges:
            lines.append(
                f"    {r.capacitor} {c.parts[r.capacitor].display:<16} "
                f"nominal {value_range(r.low_hz, r.high_hz, 'Hz', 4):>16}  "
                f"guaranteed {value_range(r.guaranteed_low_hz, r.guaranteed_high_hz, 'Hz', 4)}"
            )
        also = also_line(c, width)
        if also:
            lines.append(also)
    return lines


def legend(result: DesignResult, style: TableStyle) -> list[str]:
    """What each column means, with its units: lines of at most 100 columns, broken between
    items."""
    spec = result.spec
    best = result.candidates[0]
    samples = best.yield_detail.get("samples")
    n = f"{samples:,} Monte Carlo samples" if isinstance(samples, int) else "Monte Carlo"
    tail = [
        f"cost: per board, {style.currency}",
        "flag: ! error-level finding, * cautions (--explain N prints them)",
        "also: variants of the design (#place among all variants, differing parts)",
    ]
    resist = [] if style.wide else ["R in Ω"]
    if spec.tuning is not None:
        items = [
            "nominal: a range's span at nominal values over the whole dial",
            "guaranteed: the span every board of the spread box reaches",
        ]
    elif spec.trimmed:
        items = [
            *resist,
            "wiper: nominal trim point (share of travel)",
            "trim span: f over the whole travel at nominal values",
            "res %/%: % of f per % of travel at the target",
            "drift: f change over the temperature range after trimming",
        ]
    else:
        timing = ["timing: share of the period set by op-amp delay, slew and GBW"]
        duty = result.spec.circuit.duty_band is not None
        items = [
            *resist,
            "f: full model at nominal values, rails and 25 °C",
            "err: f against the target",
            "Vpp: triangle peak to peak, V",
            *(["duty: share of the period the square is high"] if duty else []),
            *(timing if style.wide else []),
            "worst-case f: lowest-highest over tolerances, rails and temperature",
            f"yield: boards into {'the three' if duty else 'both'} bands, {n}",
        ]
    return wrap_items("legend:", [*items, *tail], WIDTH)


__all__ = ["TableStyle", "also_line", "fixed_table", "flag", "legend", "trim_table", "tuning_table"]
