"""Plain-text building blocks of the human reports: one style for every value.

Style: a space between a number and its unit, percent included ("2 % PP", "98.0 %",
"+0.02 %"); ranges as "2.38-2.62 kHz" (both ends in the unit of the larger); lines wrapped
at ``WIDTH`` columns unless a table asks for more.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Iterable

from tristock.stock.units import format_value

#: The width every default report fits (``--wide`` lifts it for tables).
WIDTH = 100


def pct(fraction: float, digits: int = 1, *, sign: bool = False) -> str:
    """A fraction as percent: 0.98 -> "98.0 %" (``sign``: "+2.0 %")."""
    if not math.isfinite(fraction):
        return "- %"
    return f"{100 * fraction:{'+' if sign else ''}.{digits}f} %"


def bands_phrase(duty_band: tuple[float, float] | None) -> str:
    """What the yield counts boards into: both bands, or with a set duty's band the three."""
    return "both bands" if duty_band is None else "the three bands (f, Vpp, duty)"


def value_range(low: float, high: float, unit: str, digits: int = 3) -> str:
    """Two values with one prefix and unit: (2382, 2616, "Hz") -> "2.38-2.62 kHz"; the
    prefix and the decimals are those of the larger magnitude at ``digits`` significant
    digits."""
    if not (math.isfinite(low) and math.isfinite(high)):
        return f"{format_value(low, unit, digits)}-{format_value(high, unit, digits)}"
    big = max(abs(low), abs(high))
    number, _, suffix = format_value(big, unit, digits).partition(" ")
    power = round(math.log10(big / float(number)) / 3) * 3 if float(number) else 0
    scale = 10.0**power  # the prefix's exact power of ten
    decimals = max(digits - 1 - math.floor(math.log10(abs(float(number)))), 0) if big else 0
    return f"{low / scale:.{decimals}f}-{high / scale:.{decimals}f} {suffix}".rstrip()


def wrapped(line: str, width: int = WIDTH, indent: str = "") -> list[str]:
    """One logical line as lines of at most ``width`` columns; continuation lines indented
    two spaces past ``indent``."""
    if len(line) <= width:
        return [line]
    return textwrap.wrap(
        line,
        width=width,
        subsequent_indent=indent + "  ",
        break_long_words=False,
        break_on_hyphens=False,
    )


def wrap_items(head: str, items: list[str], width: int = WIDTH) -> list[str]:
    """``head`` and the items joined by "; ", broken between items only (an item longer
    than a line is wrapped on its own); continuation lines indented two spaces."""
    lines: list[str] = []
    line = head
    for n, item in enumerate(items):
        piece = item + (";" if n < len(items) - 1 else "")
        candidate = f"{line} {piece}" if line.strip() else line + piece
        if len(candidate) <= width or not line.strip():
            line = candidate
        else:
            lines.append(line)
            line = "  " + piece
    lines.append(line)
    return [x for part in lines for x in wrapped(part, width, "")]


def wrap_all(lines: Iterable[str], width: int = WIDTH) -> list[str]:
    """Every line (an item may hold several) wrapped at ``width``, keeping each line's own
    leading spaces."""
    out: list[str] = []
    for text in lines:
        for line in text.split("\n"):
            indent = line[: len(line) - len(line.lstrip(" "))]
            out += wrapped(line, width, indent)
    return out


__all__ = ["WIDTH", "pct", "value_range", "wrap_all", "wrap_items", "wrapped"]
