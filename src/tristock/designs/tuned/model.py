"""The parts a tuned design may use, and each op amp on the spec's nominal rails.

Eligibility follows the fixed search (``search.model.build_model``): resistors inside the
spec's value range and series with stock for the boards (R1, R2, R3 and the divider's R4 all
draw on them), capacitors of the allowed dielectrics, not polarised, in stock and rated at
least for the smallest peak any answer has, panel pots in stock, op amps whose supply rating
covers the rails and whose output swings both sides of the reference.

Costs are integers in micro-units of the catalog's currency (``micro``), so sums and
comparisons are exact.

The amplitude window of k = R1/R2 (``k_window``): the triangle is A = k·span + overshoots,
span = VH + VL. In the full model (``tristock.looptiming``) the top overshoot is
(b·(o_r + τi) - A_r)/RC' with 0 ≤ A_r ≤ b·τi, so it lies between b·o_r/RC' ≥ 0 (o ≥ td ≥ 0:
(G0) of ``tuning.edges``) and b·(o_r + τi)/RC'; by (G3r) o_r ≤ td + (1 + δ)·(c_r - td) ≤
(1 + δ)·c_r (c the edge's centroid), so the top overshoot is at most (1 + δ)·b·d_r/RC'
(d = c + τi), the bottom one (1 + δ)·a·d_f/RC'. Their sum is at most
(1 + δ)·(k/Q)·a·b·(d_r/a + d_f/b) with Q = k·RC' ≥ P, and
span·(d_r/a + d_f/b) ≤ D = T - T_i, T_i = span²·P/(a·b): so at most (1 + δ)·k·span·D/T_i,
and D/T_i = s/(1 - s) at a point whose timing share 1 - T_i/T is s. Every accepted design
keeps A in its band and the share within s at nominal values (both properties hold
everywhere, not only where the edge's finer properties are claimed), so
A_min·(1 - s)/(span·(1 + δ·s)) ≤ k ≤ A_max/span.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.opamp_schmitt.searchform import opamp_levels, stocked_opamps
from tristock.circuits.rails import OpAmpModel
from tristock.circuits.searchform import Exclusion
from tristock.designs.tuned.edges import OVERSHOOT_EXCESS
from tristock.search.parts import PartTable, eligible_capacitors, eligible_resistors
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import OpAmp, Pot

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
    table, for re-optimisation; copies made with other masks or capacitors share ``cache``.
    """

    spec: Spec
    resistors: PartTable
    capacitors: PartTable
    opamps: list[TunedOpAmp]
    pots: list[Pot]
    exclusions: list[Exclusion] = field(default_factory=list)
    allowed: dict[str, NDArray[np.bool_]] = field(default_factory=dict)
    #: values derived from the op amps and the spec once (``corners.corner_tables``)
    cache: dict[str, object] = field(default_factory=dict)

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
    lo = a * (1 - ta) * (1 - s) / (span * (1 + OVERSHOOT_EXCESS * s))
    return lo * (1 - 1e-12), a * (1 + ta) / span * (1 + 1e-12)


def _opamp(index: int, part: OpAmp, spec: Spec) -> TunedOpAmp | str:
    found = opamp_levels(part, spec)
    if isinstance(found, str):
        return found
    model, vh, vl = found
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
    boards = spec.build.boards
    res_table, excl = eligible_resistors(spec, catalog)
    opamps, opamp_excl = stocked_opamps(
        spec, catalog, lambda index, part: _opamp(index, part, spec)
    )
    excl += opamp_excl
    # Every range's triangle has a peak of at least half the smallest amplitude in the band.
    cap_table, cap_excl = eligible_capacitors(spec, catalog, "C")
    excl += cap_excl
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
        resistors=res_table,
        capacitors=cap_table,
        opamps=opamps,
        pots=pots,
        exclusions=excl,
    )
