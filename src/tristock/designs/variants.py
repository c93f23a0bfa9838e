"""When two answers are variants of one design, and the distinct top k.

Two boards are **variants** of one another (one *class*) when they have the same topology
and pot wiring, and, designator by designator:

- R1 and R2 differ at most by a common factor: the ratio R1/R2 is the same (any factor,
  a power of ten or not), and R1's and R2's tolerances and tempcos are the same;
- U1 has the same electrical parameters (supply range, swing to each rail, slew rate,
  gain-bandwidth, delay, offset, bias current, output current): another package or channel
  count, another stock code, another price or stock;
- every other part (R3, R4, R5, RV1, C1..Cn) has the same value, tolerance and tempco (and for a
  capacitor the same dielectric and temperature band), and a comparator U2 or a diode the
  same electrical fields: another stock code, package, rating, price or stock.

Values are compared exactly as the decimals the catalog gives (each value read to 12
significant digits, then as a fraction), so the relation is an equivalence: ``variant_key``
is a class's name. A class ranks where its best member ranks; the distinct top k are the k
classes whose best members rank first, each shown by that member. The searches list designs
in exact rank order, so the first k classes met in that order are the distinct top k exactly
(``classes_in_order``), and the search stops only once k classes are complete.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Hashable, Sequence
from decimal import Decimal
from fractions import Fraction
from typing import TypeVar

from tristock.circuits.board import AnyBoard
from tristock.designs.results import VariantOut
from tristock.stock.comparators import Comparator
from tristock.stock.diodes import Diode
from tristock.stock.parts import Capacitor, OpAmp, Part, Pot, Resistor

T = TypeVar("T")


def exact(value: float) -> Fraction:
    """A catalog value as the decimal it was written as (12 significant digits)."""
    return Fraction(Decimal(f"{value:.12g}"))


def part_key(part: Part) -> tuple[object, ...]:
    """What makes two parts interchangeable in a design (module docstring)."""
    if isinstance(part, Resistor):
        return ("R", exact(part.value_ohm), part.tolerance_pct, part.tempco_ppm)
    if isinstance(part, Capacitor):
        return (
            "C",
            exact(part.value_f),
            part.dielectric,
            part.tolerance_pct,
            part.tempco_ppm,
            part.temp_band_pct,
        )
    if isinstance(part, Pot):
        return ("RV", exact(part.value_ohm), part.tolerance_pct, part.tempco_ppm)
    if isinstance(part, Comparator | Diode):
        # every electrical field: all but the stock code, price and stock
        skip = {"id", "unit_cost", "stock", "channels"}
        fields = dataclasses.fields(part)
        return (type(part).__name__, *(getattr(part, f.name) for f in fields if f.name not in skip))
    assert isinstance(part, OpAmp)
    return (
        "U",
        part.supply_min_v,
        part.supply_max_v,
        part.swing_pos_v,
        part.swing_neg_v,
        part.slew_v_per_us,
        part.gbw_hz,
        part.delay_s,
        part.offset_v,
        part.bias_a,
        part.output_a,
    )


def variant_key(design: AnyBoard) -> Hashable:
    """The name of ``design``'s class: equal for two designs exactly when they are variants
    of one another (module docstring)."""
    parts = design.parts()
    r1, r2 = parts["R1"], parts["R2"]
    assert isinstance(r1, Resistor) and isinstance(r2, Resistor)
    threshold = (
        exact(r1.value_ohm) / exact(r2.value_ohm),
        (r1.tolerance_pct, r1.tempco_ppm),
        (r2.tolerance_pct, r2.tempco_ppm),
    )
    rest = tuple((name, part_key(p)) for name, p in parts.items() if name not in ("R1", "R2"))
    return (design.topology.name, design.control, threshold, rest)


def differing(design: AnyBoard, other: AnyBoard) -> list[str]:
    """The designators whose stock codes differ between two boards of one topology."""
    mine, theirs = design.parts(), other.parts()
    return [name for name, part in mine.items() if theirs[name].id != part.id]


def class_count(items: Sequence[T], key: Callable[[T], Hashable]) -> int:
    """How many classes the items fall into."""
    return len({key(x) for x in items})


def classes_in_order(items: Sequence[T], key: Callable[[T], Hashable]) -> list[list[int]]:
    """The items' indices grouped by class; classes in the order of their first item, each
    class in item order. With items in rank order, class n's first index is the n-th
    distinct design."""
    groups: dict[Hashable, list[int]] = {}
    for n, x in enumerate(items):
        groups.setdefault(key(x), []).append(n)
    return list(groups.values())


def variants_out(design: AnyBoard, others: Sequence[tuple[AnyBoard, int]]) -> list[VariantOut]:
    """The variants ``others`` (each with its rank among all variants) as reported under
    ``design``."""
    return [
        VariantOut(
            parts={k: p.id for k, p in d.parts().items()},
            differs=differing(design, d),
            cost=round(d.cost_per_board, 6),
            rank_all=rank,
        )
        for d, rank in others
    ]


def distinct_top(
    designs: Sequence[AnyBoard], top: int
) -> list[tuple[int, list[tuple[AnyBoard, int]]]]:
    """From designs in rank order: the first ``top`` classes, each as (index of its best
    member, [(variant, rank among all), ...]). With ``top`` classes the variants are those
    that rank above the last class's best member (the searches stop there, so each rank is
    exact); with fewer, every design listed belongs to one of them."""
    groups = classes_in_order(designs, variant_key)[:top]
    if not groups:
        return []
    cut = groups[-1][0] if len(groups) == top else len(designs)
    return [(g[0], [(designs[n], n + 1) for n in g[1:] if n < cut]) for g in groups]


__all__ = [
    "class_count",
    "classes_in_order",
    "differing",
    "distinct_top",
    "exact",
    "part_key",
    "variant_key",
    "variants_out",
]
