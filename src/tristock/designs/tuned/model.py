"""The parts a tuned design may use, and each op amp on the spec's nominal rails.

Eligibility follows the fixed search (``search.model.build_model``): resistors inside the
spec's value range and series with stock for the boards (R1, R2, R3 and the divider's R4 all
draw on them), capacitors of the allowed dielectrics, not polarised, in stock and rated at
least for the smallest peak any answer has, panel pots in stock, op amps whose supply rating
covers the rails and whose output swings both sides of the reference.

Costs are integers in micro-units of the catalog's currency (``micro``), so sums and
comparisons are exact.

The amplitude window of k = R1/R2 (``k_window``): the triangle is A = k·span + overshoots,
span = VH + VL, overshoots ≥ 0, and at a point whose timing share 1 - T_ideal/T is at most s
the overshoots are at most k·span·s/(1 - s) (each overshoot is the ramp's slope times
td + t_g + V/(2·SR) ≤ d, so their sum is at most (k/P)·a·b·D/span = k·span·D/T_ideal, and
D/T_ideal = s/(1 - s)). Every accepted design keeps A in its band and the share within s at
nominal values, so A_min·(1 - s)/span ≤ k ≤ A_max/span.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.board import rails_from_supply
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.search.model import Exclusion, PartTable, in_series
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]

#: Most ranges a design may have (the spec's ``ranges`` is 1..8).
MAX_RANGES = 8


def micro(cost: float | F64) -> NDArray[np.int64]:
    """Cost in integer micro-units (catalog prices have at most six decimals)."""
    return np.rint(np.asarray(cost, dtype=np.float64) * 1e6).astype(np.int64)


@dataclass(frozen=True)
class TunedOpAmp:
    """One usable op amp: its model, square levels VH/VL on the nominal rails (V), the window
    of k = R1/R2 (module docstring) and its cost per board (micro-units)."""

    index: int
    part: OpAmp
    model: OpAmpModel
    vh: float
    vl: float
    k_lo: float
    k_hi: float
    cost: int


@dataclass
class Pairs:
    """(R1, R2) pairs of one op amp whose k lies in its window, cheapest first."""

    i1: I64
    i2: I64
    k: F64
    cost: I64

    def __len__(self) -> int:
        return len(self.i1)

    def take(self, sel: I64 | NDArray[np.bool_]) -> Pairs:
        return Pairs(self.i1[sel], self.i2[sel], self.k[sel], self.cost[sel])


@dataclass
class TunedModel:
    """Eligible parts and op amps for a tuned spec.

    ``resistors`` and ``capacitors`` are ``PartTable``s sorted by value (ascending); a chain of
    ranges takes capacitors in descending value (C1, the largest, is the lowest range).
    ``allowed`` optionally restricts a designator (U1, R1, R2, R3, R4, RV1) to a mask over its
    table, for re-optimisation.
    """

    spec: Spec
    resistors: PartTable
    capacitors: PartTable
    opamps: list[TunedOpAmp]
    pots: list[Pot]
    exclusions: list[Exclusion] = field(default_factory=list)
    allowed: dict[str, NDArray[np.bool_]] = field(default_factory=dict)

    @property
    def divider(self) -> bool:
        assert self.spec.tuning is not None
        return self.spec.tuning.control == "divider"

    @property
    def boards(self) -> int:
        return self.spec.build.boards

    def allows(self, designator: str, size: int) -> NDArray[np.bool_]:
        mask = self.allowed.get(designator)
        return np.ones(size, dtype=bool) if mask is None else mask

    @property
    def resistor_cost(self) -> I64:
        return micro(self.resistors.cost)

    @property
    def capacitor_cost(self) -> I64:
        return micro(self.capacitors.cost)

    @property
    def pot_cost(self) -> I64:
        return micro(np.array([p.unit_cost for p in self.pots], dtype=np.float64))

    def pairs(self, o: TunedOpAmp) -> Pairs:
        """Every (R1, R2) with k in the op amp's window and stock for its uses, by cost then
        indices (a code in both positions needs two pieces a board)."""
        res = self.resistors
        ln_r = res.ln_value
        n = len(ln_r)
        use1 = self.allows("R1", n)
        use2 = self.allows("R2", n)
        lo = np.searchsorted(ln_r, ln_r + np.log(o.k_lo) - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r + np.log(o.k_hi) + 1e-12, side="right")
        counts = np.maximum(hi - lo, 0)
        i2 = np.repeat(np.arange(n, dtype=np.int64), counts)
        start = np.repeat(lo - (np.cumsum(counts) - counts), counts)
        i1 = (start + np.arange(len(i2))).astype(np.int64)
        k = res.value[i1] / res.value[i2]
        keep = (k >= o.k_lo) & (k <= o.k_hi) & use1[i1] & use2[i2]
        keep &= res.stock[i1] >= self.boards * (1 + (i1 == i2))
        i1, i2, k = i1[keep], i2[keep], k[keep]
        cost = micro(res.cost[i1]) + micro(res.cost[i2])
        order = np.lexsort((i2, i1, cost))
        return Pairs(i1[order], i2[order], k[order], cost[order])


def k_window(spec: Spec, vh: float, vl: float) -> tuple[float, float]:
    """The window of k = R1/R2 every accepted design lies in (module docstring)."""
    span = vh + vl
    a = spec.triangle.amplitude_vpp
    ta = spec.triangle.tolerance_pct / 100
    s = spec.limits.max_timing_share
    return a * (1 - ta) * (1 - s) / span * (1 - 1e-12), a * (1 + ta) / span * (1 + 1e-12)


def _opamp(index: int, part: OpAmp, spec: Spec) -> TunedOpAmp | str:
    supply = spec.supply
    span_lo = supply.span_v * (1 - supply.tolerance_pct / 100)
    span_hi = supply.span_v * (1 + supply.tolerance_pct / 100)
    if span_lo < part.supply_min_v or span_hi > part.supply_max_v:
        return (
            f"supply span {span_lo:g}..{span_hi:g} V is outside its rating "
            f"{part.supply_min_v:g}..{part.supply_max_v:g} V"
        )
    model = OpAmpModel.from_part(part)
    try:
        vh, vl = square_levels(rails_from_supply(supply), model)
    except ValueError:
        return "its output cannot swing both sides of the reference on these rails"
    k_lo, k_hi = k_window(spec, vh, vl)
    if k_lo >= 1.0:
        return (
            f"{spec.triangle.amplitude_vpp:g} Vpp needs k = R1/R2 near {k_lo:.3f} with its "
            f"{vh:.2f}/{vl:.2f} V swing: the thresholds would reach the square levels"
        )
    cost = int(micro(part.cost_per_board))
    return TunedOpAmp(index, part, model, vh, vl, k_lo, min(k_hi, 1.0), cost)


def build_tuned_model(spec: Spec, catalog: Catalog) -> TunedModel:
    """Eligible parts for ``spec`` (a spec with ``[tuning]``); exclusions say why parts
    dropped."""
    assert spec.tuning is not None
    lim = spec.limits
    boards = spec.build.boards
    excl: list[Exclusion] = []
    resistors: list[Resistor] = []
    for r in catalog.resistors:
        if not lim.resistance_min_ohm <= r.value_ohm <= lim.resistance_max_ohm:
            continue
        if lim.resistor_series is not None and not in_series(r, lim.resistor_series):
            continue
        if r.stock < boards:
            excl.append(Exclusion("R", r.id, f"stock {r.stock} < {boards} boards"))
            continue
        resistors.append(r)
    opamps: list[TunedOpAmp] = []
    for part in catalog.opamps:
        if lim.opamps is not None and part.id not in lim.opamps:
            continue
        need = boards * part.packages_per_board
        if part.stock < need:
            excl.append(Exclusion("U1", part.id, f"stock {part.stock} < {need} needed"))
            continue
        terms = _opamp(len(opamps), part, spec)
        if isinstance(terms, str):
            excl.append(Exclusion("U1", part.id, terms))
            continue
        opamps.append(terms)
    # Every range's triangle has a peak of at least half the smallest amplitude in the band.
    a_lo = spec.triangle.amplitude_vpp * (1 - spec.triangle.tolerance_pct / 100)
    peak_floor = a_lo / 2 * (1 + spec.triangle.tolerance_pct / 100)
    capacitors: list[Capacitor] = []
    for cap in catalog.capacitors:
        if cap.dielectric not in lim.dielectrics or cap.is_polarised:
            continue
        if cap.stock < boards:
            excl.append(Exclusion("C", cap.id, f"stock {cap.stock} < {boards} boards"))
            continue
        if cap.voltage_v < peak_floor:
            excl.append(
                Exclusion("C", cap.id, f"rated {cap.voltage_v:g} V < peak {peak_floor:.2f} V")
            )
            continue
        capacitors.append(cap)
    pots = sorted(
        (p for p in catalog.pots if p.kind == "panel" and p.stock >= boards),
        key=lambda p: (p.value_ohm, p.id),
    )
    excl += [
        Exclusion("RV1", p.id, f"stock {p.stock} < {boards} boards")
        for p in catalog.pots
        if p.kind == "panel" and p.stock < boards
    ]
    return TunedModel(
        spec=spec,
        resistors=PartTable.of(resistors),
        capacitors=PartTable.of(capacitors),
        opamps=opamps,
        pots=pots,
        exclusions=excl,
    )
