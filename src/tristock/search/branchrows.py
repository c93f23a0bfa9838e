"""Rows of a loop with two integrator elements (the set-duty loop: R3A while the square is
high, R3B while it is low): their full model, acceptance and scores.

A row is (stage u, R1 i1, R2 i2, R3A i3, R3B i4, C1 j). ``evaluate`` is the search's definition
of such a row and of its acceptance, from the topology's own model (``SearchForm.predict_rows``)
at nominal values, 25 °C and the nominal rails. A row is accepted when

- its frequency, triangle amplitude and duty lie in the spec's bands;
- the loop is inside the model's ground: both ramps run (the model's ``valid``), the triangle's
  peaks inside the square levels, the integrator's slew rate (the smaller of rise and fall) at
  least the steeper ramp's slope, the timing share at most ``limits.max_timing_share``;
- C1's voltage rating covers the largest |triangle peak| with the amplitude margin;
- (coupled) stock covers boards x uses of each resistor code over R1, R2, R3A and R3B, and
  the cost is within ``limits.max_cost``.

The score is that of ``search.model`` plus the duty term (``duty_term``); a code that fills
several of the four resistor positions is one BOM line. ``guarantee = "worst_case"`` adds no
probe here: the analysis's worst case decides it in the re-check, duty included.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import rails_from_supply
from tristock.circuits.searchform import SearchForm, StageOption
from tristock.search.model import BALANCED_WEIGHTS, SECONDARY_SPAN, SearchModel, quantise
from tristock.search.rows import Rows
from tristock.spec.model import Spec

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


@dataclass
class BranchRows(Rows):
    """``Rows`` with the second integrator element ``i4`` (R3B; ``i3`` is R3A) and each row's
    duty less the target's (fraction of the period), ``e_d``. ``p`` is k·R3A·C1 (s)."""

    i4: I64
    e_d: F64

    def integrator_indices(self, n: int) -> tuple[int, ...]:
        return int(self.i3[n]), int(self.i4[n])


def empty_branch_rows() -> BranchRows:
    z, f = np.zeros(0, dtype=np.int64), np.zeros(0)
    return BranchRows(z, z, z, z, z, f, f, f, f, f, z, z, z, z, f)


def concat(parts: list[BranchRows]) -> BranchRows:
    if not parts:
        return empty_branch_rows()
    names = BranchRows.__dataclass_fields__
    return BranchRows(**{n: np.concatenate([getattr(p, n) for p in parts]) for n in names})


def duty_target(spec: Spec) -> tuple[float, float, float]:
    """(target, low, high) of the spec's duty as fractions (its band, ``CircuitSpec``); a
    spec that sets none (a set-duty board re-optimised under a spec of another circuit)
    leaves the duty free: (its duty_pct, 0, 1)."""
    band = spec.circuit.duty_band or (0.0, 1.0)
    return spec.circuit.duty_pct / 100, band[0], band[1]


def duty_term(model: SearchModel, e_d: F64) -> I64:
    """Primary-score term of the duty error (integer, additive): in the balanced ranking
    ``duty_error``·|e_d|/(half the duty band), else (or with no duty band) 0."""
    if model.mode != "balanced" or model.spec.circuit.duty_band is None:
        return np.zeros(np.shape(e_d), dtype=np.int64)
    _, low, high = duty_target(model.spec)
    return quantise(BALANCED_WEIGHTS["duty_error"] * np.abs(e_d) / (0.5 * (high - low)))


def resistor_lines(i1: I64, i2: I64, i3: I64, i4: I64) -> I64:
    """Distinct resistor codes over the four positions."""
    codes = np.sort(np.stack([i1, i2, i3, i4], axis=1), axis=1)
    return np.asarray(1 + (np.diff(codes, axis=1) != 0).sum(axis=1), dtype=np.int64)


def part_scores(model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, i4: I64, j: I64) -> I64:
    """The exact primary-score terms of the parts: stage, four resistors, C1, each shared
    resistor code credited its saved BOM line."""
    lines = resistor_lines(i1, i2, i3, i4)
    terms = sum((model.resistor_term(i) for i in (i1, i2, i3, i4)), model.stage_terms[u])
    return np.asarray(
        terms + model.capacitor_term(j) - model.shared_line_credit() * (4 - lines), dtype=np.int64
    )


def coupled_ok(
    model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, i4: I64, j: I64
) -> NDArray[np.bool_]:
    """Stock for ``boards`` pieces per position a resistor code fills, and ``max_cost``."""
    res, boards = model.resistors, model.boards
    idx = np.stack([i1, i2, i3, i4], axis=1)
    uses = (idx[:, :, None] == idx[:, None, :]).sum(axis=2)  # (rows, 4): uses of each code
    ok = np.all(res.stock[idx] >= boards * uses, axis=1)
    max_cost = model.spec.limits.max_cost
    if max_cost is not None:
        ok &= row_cost(model, u, idx, j) <= max_cost + 1e-12
    return np.asarray(ok)


def row_cost(model: SearchModel, u: I64, idx: I64, j: I64) -> F64:
    """Cost per board: the stage's, the four resistors' and C1's."""
    res, cap = model.resistors, model.capacitors
    return np.asarray(model.stage_costs[u] + res.cost[idx].sum(axis=1) + cap.cost[j])


class RowFigures(NamedTuple):
    """The full model of rows and the search's acceptance of each (module docstring, the
    coupled limits aside)."""

    pred: Prediction
    accepted: NDArray[np.bool_]
    e_f: F64
    e_a: F64
    e_d: F64


def row_figures(
    spec: Spec,
    form: SearchForm,
    stages: Sequence[StageOption],
    u: I64,
    values: Mapping[str, F64],
    cap_voltage: F64,
) -> RowFigures:
    """Rows of stage ``u`` with the part values ``values`` (by designator) on the spec's
    nominal rails: the topology's prediction and the acceptance (bands, duty, the model's
    ground, C1's rating)."""
    rails = rails_from_supply(spec.supply)
    vh, vl = form.row_levels(stages, u, rails, values)
    row = form.predict_rows(stages, u, values, (vh, vl))
    p = row.pred
    target, d_lo, d_hi = duty_target(spec)
    (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
    duty = np.asarray(p.duty_high)
    with np.errstate(invalid="ignore", divide="ignore"):
        e_f = np.log(np.asarray(p.frequency_hz) / spec.target.target_hz)
        e_a = np.log(np.asarray(p.amplitude_vpp) / spec.triangle.amplitude_vpp)
        peak = np.fmax(np.abs(np.asarray(p.peak_high_v)), np.abs(np.asarray(p.peak_low_v)))
        ok = row.valid & (e_f >= fa) & (e_f <= fb) & (e_a >= aa) & (e_a <= ab)
        ok &= (duty >= d_lo) & (duty <= d_hi)
        ok &= (np.asarray(p.peak_high_v) < vh) & (np.asarray(p.peak_low_v) > -vl)
        ok &= np.asarray(p.slope_v_per_s) <= np.minimum(row.slew_rise, row.slew_fall)
        ok &= np.asarray(p.timing_share) <= spec.limits.max_timing_share
        ok &= cap_voltage >= peak * (1 + spec.triangle.tolerance_pct / 100)
    return RowFigures(p, np.asarray(ok), e_f, e_a, duty - target)


def evaluate(
    model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, i4: I64, j: I64, *, coupled: bool = True
) -> tuple[BranchRows, F64]:
    """Score rows with the full model and keep those the spec accepts (module docstring);
    also the full model's period, high time and amplitude of every row given (NaN where it
    does not oscillate), for the caller's run-time guard of its bounds."""
    res, cap, form = model.resistors, model.capacitors, model.form
    values = dict(zip(
        (*form.divider, *form.integrator, form.capacitor),
        (res.value[i1], res.value[i2], res.value[i3], res.value[i4], cap.value[j]),
        strict=True,
    ))  # fmt: skip
    fig = row_figures(model.spec, form, model.stages, u, values, cap.voltage[j])
    ok = fig.accepted
    if coupled:
        ok &= coupled_ok(model, u, i1, i2, i3, i4, j)
    clean = (np.nan_to_num(fig.e_f), np.nan_to_num(fig.e_a))
    share = np.asarray(fig.pred.timing_share)
    primary = (
        part_scores(model, u, i1, i2, i3, i4, j)
        + model.row_term(*clean, np.nan_to_num(share))
        + duty_term(model, np.nan_to_num(fig.e_d))
    )
    cost = row_cost(model, u, np.stack([i1, i2, i3, i4], axis=1), j)
    lines = model.stage_lines[u] + 1 + resistor_lines(i1, i2, i3, i4)
    rows = BranchRows(
        u=u, i1=i1, i2=i2, i3=i3, j=j,
        p=res.value[i1] / res.value[i2] * res.value[i3] * cap.value[j],
        e_f=fig.e_f, e_a=fig.e_a, share=share, cost=cost, lines=lines, primary=primary,
        secondary=model.secondary(clean[0], cost), i4=i4, e_d=fig.e_d,
    )  # fmt: skip
    period = np.asarray(fig.pred.period_s)
    high = np.asarray(fig.pred.duty_high) * period
    figures = np.stack([period, high, np.asarray(fig.pred.amplitude_vpp)], axis=1)
    return rows.take(np.flatnonzero(ok)), figures


def rank_key(model: SearchModel, rows: BranchRows, n: int) -> tuple[int | str, ...]:
    """Total order: primary score, secondary score, then stock codes in designator order."""
    res = model.resistors.parts
    return (
        int(rows.primary[n]),
        int(rows.secondary[n]),
        model.opamps[rows.u[n]].option.key,
        *(res[getattr(rows, c)[n]].id for c in ("i1", "i2", "i3", "i4")),
        model.capacitors.parts[rows.j[n]].id,
    )


def best(model: SearchModel, rows: BranchRows, top: int) -> BranchRows:
    """The ``top`` best rows in rank order (ties resolved by the full key)."""
    if len(rows) > top:
        score = rows.primary * SECONDARY_SPAN + rows.secondary
        kth = np.partition(score, top - 1)[top - 1]
        rows = rows.take(np.flatnonzero(score <= kth))
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    return rows.take(np.array(order, dtype=np.int64))
