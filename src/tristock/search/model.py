"""The search model: eligible parts, each op amp's loop on the spec's rails, integer scores.

A row is one combination (U1, R1, R2, R3, C1). Its scores come from the full circuit model
(``physics.predict``) at nominal values, 25 °C and nominal rails, exactly as the
analysis of an answer reports them (``search.rows.evaluate``). The engines only need, besides
that, windows and bounds that every row obeys (``search.bounds``), so an answer they call
optimal is optimal under the full model.

Scores are integers (``SCORE_RESOLUTION`` = 1e-6 of a score unit; for ``frequency_error``
that is 1 ppm of frequency), so both engines and brute force compare exactly.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.board import rails_from_supply
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.search.bounds import OpAmpLoop, overshoot_fraction_cap
from tristock.search.targetpoint import TargetPoint, target_point
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.eseries import is_member
from tristock.stock.parts import Capacitor, OpAmp, Resistor

SCORE_RESOLUTION = 1e-6
#: Secondary keys (tie-breakers) are packed below the primary score: primary·SECONDARY_SPAN + s.
SECONDARY_SPAN = 1 << 24
COST_RESOLUTION = 1e-4  # currency units per integer step

#: Weights of the balanced score (README, "Ranking"). Each term is dimensionless.
BALANCED_WEIGHTS = {
    "frequency_error": 1.0,  # |e_f| / band_f
    "amplitude_error": 0.5,  # |e_A| / band_A
    "tolerance_spread": 0.5,  # Σ part tolerances (ln) / band_f
    "cost": 0.25,  # cost per board / cost scale
    "bom_lines": 0.02,  # per distinct stock code
    "sensitivity": 0.25,  # share of the period set by op-amp timing
}


def quantise(x: NDArray[np.float64] | float) -> NDArray[np.int64]:
    """x in integer steps of SCORE_RESOLUTION (round half to even)."""
    return np.rint(np.asarray(x, dtype=np.float64) / SCORE_RESOLUTION).astype(np.int64)


@dataclass(frozen=True)
class OpAmpTerms:
    """One usable op amp on the spec's nominal rails.

    ``loop`` carries what the bounds need (levels, slew, delay, GBW, and the integrator error
    voltage Ve = Vos1 + Ib1·R3 over the R3 values eligible); ``k_range`` holds every
    k = R1/R2 a row can meet the spec with (see ``_k_range``); ``target`` the constants of
    the loop linearised at the target, None where the full model cannot meet the target
    exactly (the trimmed and tuned searches use them; ``target_note`` says why not).
    """

    index: int
    part: OpAmp
    model: OpAmpModel
    vh: float
    vl: float
    loop: OpAmpLoop
    k_range: tuple[float, float]
    target: TargetPoint | None
    target_note: str = ""


@dataclass(frozen=True)
class Exclusion:
    """Why a part or a whole designator was left out, in plain words."""

    designator: str
    part_id: str | None
    reason: str


@dataclass
class PartTable:
    """Eligible parts of one kind as arrays, sorted by value."""

    parts: list[Any]  # Resistor or Capacitor rows, sorted by value
    value: NDArray[np.float64]  # Ω or F
    ln_value: NDArray[np.float64]
    tol: NDArray[np.float64]  # fraction
    tempco: NDArray[np.float64]  # ppm/°C
    extra_band: NDArray[np.float64]  # class II temperature band, fraction
    cost: NDArray[np.float64]
    stock: NDArray[np.int64]
    voltage: NDArray[np.float64]  # capacitors: rated DC voltage; resistors: inf

    @classmethod
    def of(cls, parts: Sequence[Resistor] | Sequence[Capacitor]) -> PartTable:
        items: list[Any] = sorted(parts, key=lambda p: (p.value, p.id))
        tempco = [p.tempco_ppm if p.tempco_ppm is not None else 0.0 for p in items]
        band = [
            (p.temp_band_pct or 0.0) / 100 if isinstance(p, Capacitor) and p.is_class_ii else 0.0
            for p in items
        ]
        value = np.array([p.value for p in items], dtype=np.float64)
        return cls(
            parts=items,
            value=value,
            ln_value=np.log(value),
            tol=np.array([p.tolerance_pct / 100 for p in items], dtype=np.float64),
            tempco=np.array(tempco, dtype=np.float64),
            extra_band=np.array(band, dtype=np.float64),
            cost=np.array([p.unit_cost for p in items], dtype=np.float64),
            stock=np.array([p.stock for p in items], dtype=np.int64),
            voltage=np.array([getattr(p, "voltage_v", math.inf) for p in items], dtype=np.float64),
        )

    def __len__(self) -> int:
        return len(self.parts)


@dataclass
class SearchModel:
    """Everything both engines need: eligible parts, op-amp loops, scoring."""

    spec: Spec
    resistors: PartTable
    capacitors: PartTable
    opamps: list[OpAmpTerms]
    exclusions: list[Exclusion] = field(default_factory=list)
    #: Optional per-designator masks (True = this part may fill the position), used to pin or
    #: free positions when re-optimising. Keys U1 (over ``opamps``), R1, R2, R3 (over
    #: ``resistors``), C1 (over ``capacitors``); a missing key allows every part.
    allowed: dict[str, NDArray[np.bool_]] = field(default_factory=dict)
    #: Set when a row's full-model value fell outside the bounds that windowed it: the
    #: search's completeness argument failed, so nothing may be called proven.
    bounds_violated: bool = False

    def allows(self, designator: str, size: int) -> NDArray[np.bool_]:
        mask = self.allowed.get(designator)
        return np.ones(size, dtype=bool) if mask is None else mask

    def loops(self, u: NDArray[np.int64]) -> OpAmpLoop:
        """The op amps' loop data, one entry per element of ``u``."""
        table = OpAmpLoop(
            *(np.array([getattr(o.loop, f) for o in self.opamps]) for f in OpAmpLoop._fields)
        )
        return table.take(u)

    # ---- the spec in the model's terms ---------------------------------------------------
    @property
    def mode(self) -> str:
        return self.spec.ranking.by

    @property
    def boards(self) -> int:
        return self.spec.build.boards

    @property
    def band_f(self) -> tuple[float, float]:
        return self.spec.frequency_band_ln

    @property
    def band_a(self) -> tuple[float, float]:
        return self.spec.amplitude_band_ln

    @property
    def cost_scale(self) -> float:
        """Cost that counts as one unit in the balanced score: max_cost, else 1 currency unit."""
        return self.spec.limits.max_cost or 1.0

    # ---- scores --------------------------------------------------------------------------
    def resistor_term(self, idx: NDArray[np.int64]) -> NDArray[np.int64]:
        """Additive primary-score term of a resistor in any position (integer)."""
        t = self.resistors
        return self._part_term(t.tol[idx], t.cost[idx])

    def capacitor_term(self, idx: NDArray[np.int64]) -> NDArray[np.int64]:
        t = self.capacitors
        return self._part_term(t.tol[idx] + t.extra_band[idx], t.cost[idx])

    def _part_term(self, tol: NDArray[np.float64], cost: NDArray[np.float64]) -> NDArray[np.int64]:
        if self.mode == "balanced":
            w = BALANCED_WEIGHTS
            value = (
                w["tolerance_spread"] * tol / self.band_f[1]
                + w["cost"] * cost / self.cost_scale
                + w["bom_lines"]
            )
            return quantise(value)
        if self.mode == "cost":
            return np.rint(cost / COST_RESOLUTION).astype(np.int64)
        return np.zeros(np.shape(tol), dtype=np.int64)

    def opamp_term(self, u: OpAmpTerms) -> int:
        if self.mode == "balanced":
            w = BALANCED_WEIGHTS
            return int(
                quantise(w["cost"] * u.part.cost_per_board / self.cost_scale + w["bom_lines"])
            )
        if self.mode == "cost":
            return round(u.part.cost_per_board / COST_RESOLUTION)
        return 0

    def shared_line_credit(self) -> int:
        """Score returned per BOM line saved when one stock code fills two positions."""
        if self.mode == "balanced":
            return int(quantise(BALANCED_WEIGHTS["bom_lines"]))
        return 0

    def row_term(
        self, e_f: NDArray[np.float64], e_a: NDArray[np.float64], share: NDArray[np.float64]
    ) -> NDArray[np.int64]:
        """Primary-score terms a row has beyond its parts: errors and timing share."""
        return self.frequency_term(e_f) + self.amplitude_term(e_a) + self.share_term(share)

    def frequency_term(self, e_f: NDArray[np.float64]) -> NDArray[np.int64]:
        """Primary-score term of the frequency error (integer, additive)."""
        if self.mode == "balanced":
            return quantise(BALANCED_WEIGHTS["frequency_error"] * np.abs(e_f) / self.band_f[1])
        if self.mode in ("frequency_error", "yield"):
            return quantise(np.abs(e_f))
        return np.zeros(np.shape(e_f), dtype=np.int64)

    def frequency_budget(self, budget: NDArray[np.int64]) -> NDArray[np.float64]:
        """Largest |e_f| whose frequency term is at most ``budget`` (inverse of the above)."""
        slack = (np.asarray(budget, dtype=np.float64) + 0.5) * SCORE_RESOLUTION * (1 + 1e-9)
        if self.mode == "balanced":
            return slack * self.band_f[1] / BALANCED_WEIGHTS["frequency_error"]
        if self.mode in ("frequency_error", "yield"):
            return slack
        return np.full(np.shape(budget), np.inf)

    def amplitude_term(self, e_a: NDArray[np.float64]) -> NDArray[np.int64]:
        if self.mode == "balanced":
            return quantise(BALANCED_WEIGHTS["amplitude_error"] * np.abs(e_a) / self.band_a[1])
        return np.zeros(np.shape(e_a), dtype=np.int64)

    def share_term(self, share: NDArray[np.float64]) -> NDArray[np.int64]:
        if self.mode == "balanced":
            return quantise(BALANCED_WEIGHTS["sensitivity"] * np.asarray(share))
        return np.zeros(np.shape(share), dtype=np.int64)

    def secondary(self, e_f: NDArray[np.float64], cost: NDArray[np.float64]) -> NDArray[np.int64]:
        """Tie-breaker packed under the primary score: cost for frequency_error and yield,
        else |e_f|."""
        if self.mode in ("frequency_error", "yield"):
            s = np.rint(np.asarray(cost) / COST_RESOLUTION)
        else:
            s = np.rint(np.abs(e_f) / SCORE_RESOLUTION)
        return np.minimum(s, SECONDARY_SPAN - 1).astype(np.int64)


# ---- building the model ------------------------------------------------------------------


def in_series(r: Resistor, names: Sequence[str]) -> bool:
    """A resistor is "in" a series when its drawer says so or its value is a member: an E96
    drawer's 10 kΩ is an E24 value too."""
    return r.series in names or any(is_member(s, r.value_ohm) for s in names)


def _k_range(spec: Spec, vh: float, vl: float) -> tuple[float, float]:
    """Every k = R1/R2 of a row that meets the spec: A = k·span·(1 + ε) with 0 ≤ ε ≤ ε_max
    (``bounds.overshoot_fraction_cap``, which the timing-share limit makes finite), so
    A_min/(span·(1 + ε_max)) ≤ k ≤ A_max/span."""
    span = vh + vl
    ta = spec.triangle.tolerance_pct / 100
    tf = spec.target.tolerance_pct / 100
    a_t = spec.triangle.amplitude_vpp
    eps = overshoot_fraction_cap(spec.limits.max_timing_share, (1 + tf) / (1 - tf))
    return a_t * (1 - ta) / (span * (1 + eps)), a_t * (1 + ta) / span


def _opamp(index: int, part: OpAmp, spec: Spec, r3_values: NDArray[np.float64]) -> OpAmpTerms | str:
    """The op amp's terms on the nominal rails, or why it cannot be used at all."""
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
    ve = model.offset_v + model.bias_a * r3_values
    ve = ve[(vh - ve > 0) & (vl + ve > 0)]
    if len(ve) == 0:
        return "its integrator error voltage Vos + Ib·R3 reaches a square level for every R3"
    loop = OpAmpLoop(
        *(
            np.asarray(x, dtype=np.float64)
            for x in (
                vh,
                vl,
                model.slew_rise_v_per_s,
                model.slew_fall_v_per_s,
                model.delay_s,
                model.gbw_hz,
                model.gbw_hz,
                ve.min(),
                ve.max(),
            )
        )
    )
    point, note = target_point(part, spec, vh, vl)
    return OpAmpTerms(index, part, model, vh, vl, loop, _k_range(spec, vh, vl), point, note)


def build_model(spec: Spec, catalog: Catalog) -> SearchModel:
    """Eligible parts and per-op-amp loops for ``spec``; exclusions say why parts dropped."""
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
    res_table = PartTable.of(resistors)

    opamps: list[OpAmpTerms] = []
    for part in catalog.opamps:
        if lim.opamps is not None and part.id not in lim.opamps:
            continue
        need = boards * part.packages_per_board
        if part.stock < need:
            excl.append(Exclusion("U1", part.id, f"stock {part.stock} < {need} needed"))
            continue
        terms = _opamp(len(opamps), part, spec, res_table.value)
        if isinstance(terms, str):
            excl.append(Exclusion("U1", part.id, terms))
            continue
        opamps.append(terms)

    # C1 holds the triangle: its largest |peak| is at least half the smallest amplitude in
    # the band, so a rating below that (with the amplitude margin) can never do.
    a_lo = spec.triangle.amplitude_vpp * (1 - spec.triangle.tolerance_pct / 100)
    peak_floor = a_lo / 2 * (1 + spec.triangle.tolerance_pct / 100)
    capacitors: list[Capacitor] = []
    for cap in catalog.capacitors:
        if cap.dielectric not in lim.dielectrics or cap.is_polarised:
            continue
        if cap.stock < boards:
            excl.append(Exclusion("C1", cap.id, f"stock {cap.stock} < {boards} boards"))
            continue
        if cap.voltage_v < peak_floor:
            excl.append(
                Exclusion("C1", cap.id, f"rated {cap.voltage_v:g} V < peak {peak_floor:.2f} V")
            )
            continue
        capacitors.append(cap)

    return SearchModel(
        spec=spec,
        resistors=res_table,
        capacitors=PartTable.of(capacitors),
        opamps=opamps,
        exclusions=excl,
    )
