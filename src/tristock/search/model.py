"""The search model: eligible parts, each op amp's loop on the spec's rails, integer scores.

A row is one combination: a stage option of the topology's search form
(``circuits.searchform``; for the op-amp Schmitt loop the op amp U1) × a divider pair (R1, R2)
× the integrator element (R3) × C1. Its scores come from the topology's full model
(``SearchForm.predict_rows``) at nominal values, 25 °C and nominal rails, exactly as the
analysis of an answer reports them (``search.rows.evaluate``). The engines only need, besides
that, windows and bounds that every row obeys (``search.bounds``), so an answer they call
optimal is optimal under the full model.

Scores are integers (``SCORE_RESOLUTION`` = 1e-6 of a score unit; for ``frequency_error``
that is 1 ppm of frequency), so both engines and brute force compare exactly.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.rails import Rails, rails_from_supply
from tristock.circuits.searchform import Exclusion, SearchForm, StageLoop, StageOption
from tristock.circuits.topology import Topology
from tristock.search.bounds import overshoot_fraction_cap
from tristock.search.parts import PartTable, eligible_capacitors, eligible_resistors, in_series
from tristock.search.stageterms import OpAmpTerms, stage_terms_of
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog

__all__ = [
    "BALANCED_WEIGHTS", "COST_RESOLUTION", "SCORE_RESOLUTION", "SECONDARY_SPAN", "Exclusion",
    "OpAmpTerms", "PartTable", "SearchModel", "build_model", "in_series", "quantise",
]  # fmt: skip

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
    "duty_error": 0.5,  # |e_d| / half the duty band (set-duty loop only)
}


def quantise(x: NDArray[np.float64] | float) -> NDArray[np.int64]:
    """x in integer steps of SCORE_RESOLUTION (round half to even)."""
    return np.rint(np.asarray(x, dtype=np.float64) / SCORE_RESOLUTION).astype(np.int64)


@dataclass
class SearchModel:
    """Everything both engines need: eligible parts, op-amp loops, scoring."""

    spec: Spec
    resistors: PartTable
    capacitors: PartTable
    #: The stage options of the topology's search form, in the form's order.
    opamps: list[OpAmpTerms]
    exclusions: list[Exclusion] = field(default_factory=list)
    #: Optional per-designator masks (True = this part may fill the position), used to pin or
    #: free positions when re-optimising. Keys U1 (over ``opamps``), R1, R2, R3 (over
    #: ``resistors``), C1 (over ``capacitors``); a missing key allows every part.
    allowed: dict[str, NDArray[np.bool_]] = field(default_factory=dict)
    #: Set when a row's full-model value fell outside the bounds that windowed it: the
    #: search's completeness argument failed, so nothing may be called proven.
    bounds_violated: bool = False
    #: The topology's search form: its stage options, row levels and row model.
    form: SearchForm = field(default_factory=OPAMP_SCHMITT.search_form)
    #: The circuit searched (``form`` is its search form).
    topology: Topology = OPAMP_SCHMITT
    #: Stage options dropped because the form's ``divider_limit`` left no k of their window
    #: (also among ``exclusions``; the infeasibility reasons name them).
    divider_cuts: list[Exclusion] = field(default_factory=list)
    #: Set when the deadline stopped ``build_model`` before every stage option was made:
    #: the model lacks some, so no search over it may be called proven or infeasible.
    cut: bool = False

    @cached_property
    def stages(self) -> list[StageOption]:
        """The stage options, in the order of ``opamps`` (built once: the engines ask for
        them with every batch of rows)."""
        return [o.option for o in self.opamps]

    @cached_property
    def stage_resistors(self) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """The resistor-table rows of the stock codes each stage option takes from the
        resistor table (a pull-up or clamp resistor R5), and the pieces of each per board:
        two (stages, m) arrays padded with -1 and 0 (m ≥ 1). A row whose divider or
        integrator repeats such a code shares its stock and its BOM line (``search.rows``)."""
        where = {p.id: n for n, p in enumerate(self.resistors.parts)}
        found = [
            [(where[p.id], pieces) for p, pieces in o.option.stock_needs if p.id in where]
            for o in self.opamps
        ]
        m = max((len(f) for f in found), default=0) or 1
        index = np.full((len(found), m), -1, dtype=np.int64)
        pieces = np.zeros((len(found), m), dtype=np.int64)
        for n, uses in enumerate(found):
            for slot, (i, count) in enumerate(uses):
                index[n, slot], pieces[n, slot] = i, count
        return index, pieces

    @cached_property
    def stage_line_credits(self) -> NDArray[np.int64]:
        """Per stage option, the most a row gains in BOM-line credit by repeating the stage's
        resistor codes in the divider or integrator (one line per code): the pair bounds take
        it off the stage's term, so they stay below every row's score."""
        codes = np.count_nonzero(self.stage_resistors[0] >= 0, axis=1)
        return np.asarray(self.shared_line_credit() * codes, dtype=np.int64)

    def allows(self, designator: str, size: int) -> NDArray[np.bool_]:
        mask = self.allowed.get(designator)
        return np.ones(size, dtype=bool) if mask is None else mask

    @cached_property
    def loop_table(self) -> StageLoop:
        """The stages' loop data, one entry per stage option."""
        return StageLoop(
            *(np.array([getattr(o.loop, f) for o in self.opamps]) for f in StageLoop._fields)
        )

    def loops(self, u: NDArray[np.int64]) -> StageLoop:
        """The stages' loop data, one entry per element of ``u``."""
        return self.loop_table.take(u)

    # ---- the spec in the model's terms ---------------------------------------------------
    @cached_property
    def rails(self) -> Rails:
        """The spec's nominal rails."""
        return rails_from_supply(self.spec.supply)

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

    @cached_property
    def stage_terms(self) -> NDArray[np.int64]:
        """Primary-score term of every stage option, in the order of ``opamps``: its cost per
        board and BOM lines."""
        if self.mode == "balanced":
            w = BALANCED_WEIGHTS
            cost = w["cost"] * self.stage_costs / self.cost_scale
            return quantise(cost + w["bom_lines"] * self.stage_lines)
        if self.mode == "cost":
            return np.rint(self.stage_costs / COST_RESOLUTION).astype(np.int64)
        return np.zeros(len(self.opamps), dtype=np.int64)

    @cached_property
    def stage_costs(self) -> NDArray[np.float64]:
        """Cost per board of every stage option, in the order of ``opamps``."""
        return np.array([o.option.cost_per_board for o in self.opamps], dtype=np.float64)

    @cached_property
    def stage_lines(self) -> NDArray[np.int64]:
        """BOM lines of every stage option, in the order of ``opamps``."""
        return np.array([o.option.lines for o in self.opamps], dtype=np.int64)

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


def _k_range(spec: Spec, loop: StageLoop) -> tuple[float, float]:
    """Every k = R1/R2 of a row that meets the spec: A = k·span·(1 + ε) with 0 ≤ ε ≤ ε_max
    (``bounds.overshoot_fraction_cap``, which the timing-share limit makes finite) and the
    span VH + VL in the stage's interval, so A_min/(span_hi·(1 + ε_max)) ≤ k ≤
    A_max/span_lo."""
    ta = spec.triangle.tolerance_pct / 100
    tf = spec.target.tolerance_pct / 100
    a_t = spec.triangle.amplitude_vpp
    eps = overshoot_fraction_cap(spec.limits.max_timing_share, (1 + tf) / (1 - tf))
    span_lo, span_hi = float(loop.span_lo), float(loop.span_hi)
    return a_t * (1 - ta) / (span_hi * (1 + eps)), a_t * (1 + ta) / span_lo


def _windowed(
    form: SearchForm, stages: list[StageOption], spec: Spec, deadline: float = math.inf
) -> tuple[list[OpAmpTerms], list[Exclusion]]:
    """Each stage's terms with its k window (``_k_range``) cut at the form's
    ``divider_limit``; a stage with no k left is dropped (its exclusion says why) and the
    others renumbered in order. Stops at ``deadline`` (``time.perf_counter()``)."""
    kept: list[tuple[StageOption, tuple[float, float], Exclusion | None]] = []
    excl: list[Exclusion] = []
    for n, stage in enumerate(stages):
        if n % 256 == 0 and time.perf_counter() > deadline:
            break
        k_lo, k_hi = _k_range(spec, stage.loop)
        k_max, why = form.divider_limit(stage)
        if k_max < k_lo:
            if why is not None:
                excl.append(why)
            continue
        kept.append((stage, (k_lo, min(k_hi, k_max)), why if k_max < k_hi else None))
    return [
        stage_terms_of(replace(s, index=n) if s.index != n else s, spec, k, cut)
        for n, (s, k, cut) in enumerate(kept)
    ], excl


def build_model(
    spec: Spec, catalog: Catalog, topology: Topology = OPAMP_SCHMITT, *, deadline: float = math.inf
) -> SearchModel:
    """Eligible parts and the stage options of ``topology``'s search form for ``spec``;
    exclusions say why parts dropped. A topology without a search form (``search_form()``
    None) raises ValueError naming it. Where ``time.perf_counter()`` passes ``deadline``
    while the stage options are made, the model is ``cut``."""
    form = topology.search_form()
    if form is None:
        raise ValueError(f"topology: {topology.name} has no search form yet (not searchable)")
    res_table, excl = eligible_resistors(spec, catalog)

    stages, stage_excl = form.stage_options(spec, catalog, res_table.value, deadline)
    excl += stage_excl
    opamps, divider_cuts = _windowed(form, stages, spec, deadline)
    excl += divider_cuts
    cut = time.perf_counter() > deadline

    cap_table, cap_excl = eligible_capacitors(spec, catalog, "C1")
    excl += cap_excl

    return SearchModel(
        spec=spec,
        resistors=res_table,
        capacitors=cap_table,
        opamps=opamps,
        exclusions=excl,
        form=form,
        topology=topology,
        divider_cuts=divider_cuts,
        cut=cut,
    )
