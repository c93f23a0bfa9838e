"""IEC 60063 preferred-number series E6, E12, E24, E48, E96 and E192.

A series En has n members per decade, close to the geometric sequence 10**(i/n) but fixed by the
standard's tables: E6 to E24 carry two significant figures and do not all round from the
geometric value (E24 has 2.7, 3.0, 3.3, ..., 9.1), E48 to E192 carry three (E192 has 9.20).
A member in decade ``d`` is ``figure * 10**d`` with ``figure`` in [1, 10), so for the figure 4.7
the members are ..., 0.47, 4.7, 47, 470, 4700, ...

Members are built exactly from integer figures (47 with two digits, 4.7k = 47 * 10**2), so
``values("E12", 1e3, 1e4)`` gives 4700.0 and 4.7e-09 as the nearest floats to those decimals.
Comparisons against a member use a relative tolerance (1e-9 by default) to absorb values that
arrive through floating-point arithmetic.
"""

from __future__ import annotations

import functools
import math
from bisect import bisect_left

#: Relative tolerance used when a float is compared with a series member.
DEFAULT_TOLERANCE = 1e-9

# The standard's significant figures, as integers (two digits for E6..E24, three for E48..E192).
_E6 = (10, 15, 22, 33, 47, 68)
_E12 = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)
_E24 = (
    10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
    33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91,
)  # fmt: skip
_E48 = (
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169,
    178, 187, 196, 205, 215, 226, 237, 249, 261, 274, 287, 301,
    316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536,
    562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
)  # fmt: skip
_E96 = (
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130,
    133, 137, 140, 143, 147, 150, 154, 158, 162, 165, 169, 174,
    178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232,
    237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
    316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412,
    422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549,
    562, 576, 590, 604, 619, 634, 649, 665, 681, 698, 715, 732,
    750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976,
)  # fmt: skip
_E192 = (
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114,
    115, 117, 118, 120, 121, 123, 124, 126, 127, 129, 130, 132,
    133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152,
    154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
    178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203,
    205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234,
    237, 240, 243, 246, 249, 252, 255, 258, 261, 264, 267, 271,
    274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
    316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361,
    365, 370, 374, 379, 383, 388, 392, 397, 402, 407, 412, 417,
    422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481,
    487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
    562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642,
    649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741,
    750, 759, 768, 777, 787, 796, 806, 816, 825, 835, 845, 856,
    866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988,
)  # fmt: skip

#: Integer figures and their digit count, per series name.
_FIGURES: dict[str, tuple[tuple[int, ...], int]] = {
    "E6": (_E6, 2),
    "E12": (_E12, 2),
    "E24": (_E24, 2),
    "E48": (_E48, 3),
    "E96": (_E96, 3),
    "E192": (_E192, 3),
}

#: The standard's significant figures per series, as numbers in [1, 10): E24 is (1.0, 1.1, ... 9.1).
SERIES: dict[str, tuple[float, ...]] = {
    name: tuple(figure / 10 ** (digits - 1) for figure in figures)
    for name, (figures, digits) in _FIGURES.items()
}


def series_names() -> list[str]:
    """The known series names, coarsest first: ["E6", "E12", "E24", "E48", "E96", "E192"]."""
    return list(SERIES)


def _unknown(name: object) -> ValueError:
    return ValueError(f"{name!r}: unknown E-series; known series: {', '.join(SERIES)}")


def parse_series(name: str) -> str:
    """The canonical name of a series written as "E24", "e24" or " E24 ".

    Raises ValueError quoting ``name`` (and listing the known series) for anything else.
    """
    if not isinstance(name, str):
        raise _unknown(name)
    canonical = name.strip().upper()
    if canonical not in SERIES:
        raise _unknown(name)
    return canonical


def _checked_name(series: str) -> str:
    """``series`` itself if it is a known canonical name, else ValueError with the known names."""
    if series not in SERIES:
        raise _unknown(series)
    return series


def _member(figure: int, digits: int, decade: int) -> float:
    """The float nearest to figure * 10**(decade - digits + 1), computed without rounding error.

    Integer arithmetic keeps the product exact; Python's int / int true division is
    correctly rounded, so 47 / 10**10 is exactly the float written 4.7e-09.
    """
    shift = decade - digits + 1
    if shift >= 0:
        return float(figure * 10**shift)
    divisor: int = 10**-shift  # a positive power of ten
    return figure / divisor


@functools.lru_cache(maxsize=4096)
def _decade_members(series: str, decade: int) -> tuple[float, ...]:
    """The members of ``series`` in one decade (kept: a catalog load asks for them per row)."""
    figures, digits = _FIGURES[series]
    return tuple(_member(figure, digits, decade) for figure in figures)


def _check_positive(value: float, what: str) -> None:
    if not math.isfinite(value):
        raise ValueError(f"{what} {value!r}: not a finite number")
    if value <= 0:
        raise ValueError(f"{what} {value!r}: must be positive")


def _decade_of(value: float) -> int:
    """The decade d with 10**d <= value < 10**(d+1), up to log10's rounding at the edges."""
    return math.floor(math.log10(value))


def values(series: str, low: float, high: float) -> list[float]:
    """Every member of ``series`` with low <= member <= high, ascending, over as many decades
    as the interval spans.

    Both ends are inclusive: ``values("E12", 10, 100)`` starts at 10.0 and ends at 100.0. An end
    within the relative tolerance ``DEFAULT_TOLERANCE`` of a member counts as that member,
    so ``values("E12", 4.7 * 1e3, ...)`` includes 4700.0 even if the product is 4700.000000001.
    Raises ValueError for an unknown series, non-finite or non-positive ends, or low > high.
    """
    name = _checked_name(series)
    _check_positive(low, "low")
    _check_positive(high, "high")
    if low > high:
        raise ValueError(f"low {low!r} is above high {high!r}")
    floor = low * (1 - DEFAULT_TOLERANCE)
    ceiling = high * (1 + DEFAULT_TOLERANCE)
    found: list[float] = []
    for decade in range(_decade_of(low) - 1, _decade_of(high) + 2):
        found.extend(v for v in _decade_members(name, decade) if floor <= v <= ceiling)
    return found


def _neighbourhood(series: str, value: float) -> list[float]:
    """Members of the decades around ``value``, ascending, from just below to just above it."""
    decade = _decade_of(value)
    around: list[float] = []
    for d in (decade - 1, decade, decade + 1):
        around.extend(_decade_members(series, d))
    around.append(_member(10 ** (_FIGURES[series][1] - 1), _FIGURES[series][1], decade + 2))
    return around


def nearest(series: str, value: float) -> float:
    """The member of ``series`` closest to ``value``: the one with the least |member - value|,
    which is also the least relative error |member - value| / value against the target.

    An exact tie goes to the lower member. Raises ValueError for an unknown series or a value
    that is not finite and positive.
    """
    name = _checked_name(series)
    _check_positive(value, "value")
    around = _neighbourhood(name, value)
    i = bisect_left(around, value)
    below = around[i - 1] if i > 0 else around[0]
    above = around[i] if i < len(around) else around[-1]
    return below if value - below <= above - value else above


def is_member(series: str, value: float, tolerance: float = DEFAULT_TOLERANCE) -> bool:
    """Whether ``value`` equals a member of ``series`` in some decade, within the relative
    ``tolerance``: |member - value| <= tolerance * value.

    Zero and negative values are members of no series. Raises ValueError for an unknown series,
    a non-finite value or a negative tolerance.
    """
    name = _checked_name(series)
    if not math.isfinite(value):
        raise ValueError(f"value {value!r}: not a finite number")
    if not (math.isfinite(tolerance) and tolerance >= 0):
        raise ValueError(f"tolerance {tolerance!r}: must be a finite number >= 0")
    if value <= 0:
        return False
    around = _neighbourhood(name, value)  # ascending: the nearest member is beside the cut
    i = bisect_left(around, value)
    return any(abs(m - value) <= tolerance * value for m in around[max(0, i - 1) : i + 1])


def series_of(value: float, tolerance: float = DEFAULT_TOLERANCE) -> list[str]:
    """The names of every series that has ``value`` as a member (see ``is_member``), coarsest
    first. E6 members are also in E12 and E24, but E24 is not inside E192 (1.2 is not in E192).
    """
    return [name for name in SERIES if is_member(name, value, tolerance)]
