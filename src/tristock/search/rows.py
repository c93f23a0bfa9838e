"""Rows: combinations of parts scored and checked by the full circuit model.

``evaluate`` is the search's definition of a row and of its acceptance. Every number in it
comes from ``physics.predict`` at nominal values, 25 °C and the nominal rails, the
same prediction the analysis of an answer reports. A row is accepted when

- its frequency and triangle amplitude lie in the spec's bands;
- the loop is inside the model's ground: the triangle's peaks inside the integrator's output
  swing (the square levels, or the form's ``peak_limits``), the integrator's slew rate at
  least the triangle's slope on each ramp, and the share of the period set by op-amp timing
  (1 - T_ideal/T) at most ``limits.max_timing_share``;
- C1's voltage rating covers the largest |triangle peak| with the amplitude margin;
- (coupled) stock covers boards x uses and the cost is within ``limits.max_cost``;
- under ``guarantee = "worst_case"``, the full model at five points of the spread box of
  ``tristock.analysis`` lies in the bands (``search.guarantee``). Those points are inside the
  box the analysis searches, so this is a necessary condition: the analysis's re-check can
  only reject more, never accept a row this rejected.

``guarantee = "yield"`` adds nothing here; the Monte Carlo decides it in the re-check.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Self

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import SearchForm, StageOption
from tristock.search.bounds import point_bounds
from tristock.search.guarantee import (
    FAST,
    PROBES,
    SLOW_A,
    SLOW_B,
    probe_levels,
    probe_scales,
    probe_values,
)
from tristock.search.model import SECONDARY_SPAN, SearchModel
from tristock.search.pairfigures import pair_levels, pair_loops
from tristock.spec.model import Spec

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


@dataclass
class Rows:
    """A batch of combinations (op amp u, R1 i1, R2 i2, R3 i3, C1 j) with their scores.

    Indices point into ``SearchModel.opamps``, ``.resistors`` and ``.capacitors``. ``p`` is
    k·R3·C1 (s); ``share`` the timing share; ``primary`` and ``secondary`` the integer scores;
    the rank key is (primary, secondary, stock codes).
    """

    u: I64
    i1: I64
    i2: I64
    i3: I64
    j: I64
    p: F64
    e_f: F64
    e_a: F64
    share: F64
    cost: F64
    lines: I64
    primary: I64
    secondary: I64

    def __len__(self) -> int:
        return len(self.u)

    def integrator_indices(self, n: int) -> tuple[int, ...]:
        """Row ``n``'s integrator element(s), in the form's ``integrator`` order."""
        return (int(self.i3[n]),)

    def take(self, mask: NDArray[np.bool_] | I64) -> Self:
        return type(self)(**{n: getattr(self, n)[mask] for n in self.__dataclass_fields__})

    @staticmethod
    def concat(parts: list[Rows]) -> Rows:
        return Rows(
            **{
                name: np.concatenate([getattr(p, name) for p in parts])
                for name in Rows.__dataclass_fields__
            }
        )


def empty_rows() -> Rows:
    z = np.zeros(0, dtype=np.int64)
    f = np.zeros(0)
    return Rows(z, z, z, z, z, f, f, f, f, f, z, z, z)


class RowPrediction:
    """The topology's full model (``SearchForm.predict_rows``) for every row, with what the
    acceptance needs beside it.

    ``stages[u[n]]`` is row n's stage option, ``values`` its part values in the order
    divider pair, integrator element(s), capacitor (R1, R2, R3, C1 for the op-amp Schmitt
    loop), ``vh``/``vl`` its square levels (V). Rows whose integrator error voltage Ve
    reaches a square level cannot oscillate: their values are NaN and ``valid`` is False.
    ``centred_offsets`` puts the offsets at 0 V (the centre of the analysis's spread box)
    instead of the catalogued typical value.
    """

    def __init__(
        self,
        form: SearchForm,
        stages: Sequence[StageOption],
        u: I64,
        values: tuple[F64, ...],
        vh: F64,
        vl: F64,
        *,
        slew_scale: F64 | float = 1.0,
        delay_scale: F64 | float = 1.0,
        centred_offsets: bool = False,
    ) -> None:
        names = (*form.divider, *form.integrator, form.capacitor)
        by_name = dict(zip(names, values, strict=True))
        r1, r2 = (by_name[d] for d in form.divider)
        rc = by_name[form.integrator[0]] * by_name[form.capacitor]
        self.vh, self.vl = vh, vl
        self.top, self.bottom = form.peak_limits(stages, u, (vh, vl))
        row = form.predict_rows(
            stages,
            u,
            by_name,
            (vh, vl),
            slew_scale=slew_scale,
            delay_scale=delay_scale,
            centred_offsets=centred_offsets,
        )
        self.slew_rise, self.slew_fall = row.slew_rise, row.slew_fall
        self.ve = row.ve
        self.valid = row.valid
        self.k = r1 / r2
        self.p = self.k * rc
        self.pred = row.pred

    @classmethod
    def nominal(cls, model: SearchModel, u: I64, values: tuple[F64, ...]) -> RowPrediction:
        """At nominal values, rails and 25 °C, the stage as catalogued; the square levels
        from the form (``row_levels``: the same for every row of an op-amp stage, set by the
        row's resistors behind a pull-up or a clamp)."""
        form = model.form
        names = (*form.divider, *form.integrator, form.capacitor)
        by_name = dict(zip(names, values, strict=True))
        vh, vl = form.row_levels(model.stages, u, model.rails, by_name)
        return cls(form, model.stages, u, values, vh, vl)

    def peak_v(self) -> F64:
        """The largest |triangle - reference| (V): what C1 holds."""
        p = self.pred
        return np.asarray(
            np.fmax(np.abs(np.asarray(p.peak_high_v)), np.abs(np.asarray(p.peak_low_v)))
        )

    def accepted(self, spec: Spec, cap_voltage: F64) -> NDArray[np.bool_]:
        """Bands, the model's ground and C1's rating (module docstring)."""
        with np.errstate(invalid="ignore"):
            rated = cap_voltage >= self.peak_v() * (1 + spec.triangle.tolerance_pct / 100)
        return np.asarray(
            self.in_bands(spec) & self.inside_model(spec.limits.max_timing_share) & rated
        )

    @property
    def timing_share(self) -> F64:
        """The prediction's 1 - T_ideal/T (``circuit.Prediction.timing_share``)."""
        return np.asarray(self.pred.timing_share)

    def inside_model(self, max_share: float) -> NDArray[np.bool_]:
        """The loop is inside the model's ground (module docstring)."""
        p = self.pred
        rc = self.p / self.k  # R3·C1; the ramps' slopes are b/RC (rising) and a/RC (falling)
        with np.errstate(invalid="ignore"):
            slew_ok = (self.vl + self.ve <= self.slew_rise * rc) & (
                self.vh - self.ve <= self.slew_fall * rc
            )
            swing_ok = (np.asarray(p.peak_high_v) < self.top) & (
                np.asarray(p.peak_low_v) > -self.bottom
            )
            share_ok = self.timing_share <= max_share
        return np.asarray(self.valid & slew_ok & swing_ok & share_ok)

    def in_bands(self, spec: Spec) -> NDArray[np.bool_]:
        (fa, fb), (aa, ab) = spec.frequency_band_ln, spec.amplitude_band_ln
        with np.errstate(invalid="ignore", divide="ignore"):
            e_f = np.log(np.asarray(self.pred.frequency_hz) / spec.target.target_hz)
            e_a = np.log(np.asarray(self.pred.amplitude_vpp) / spec.triangle.amplitude_vpp)
            return np.asarray((e_f >= fa) & (e_f <= fb) & (e_a >= aa) & (e_a <= ab))


def probe_extremes(model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, j: I64) -> F64:
    """Frequency and amplitude at the box points of ``search.guarantee.PROBES`` per row, as
    columns (f fast, f slow A, f slow B, A big, A small)."""
    out = []
    for probe in PROBES:
        values = probe_values(model, probe, i1, i2, i3, j)
        vh, vl = probe_levels(model, u, probe, values)
        slew, delay = probe_scales(probe)
        rp = RowPrediction(
            model.form,
            model.stages,
            u,
            values,
            vh,
            vl,
            slew_scale=slew,
            delay_scale=delay,
            centred_offsets=True,
        )
        field = "frequency_hz" if probe in (FAST, SLOW_A, SLOW_B) else "amplitude_vpp"
        out.append(np.asarray(getattr(rp.pred, field)))
    return np.stack(out, axis=1)


def row_cost(model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, j: I64) -> F64:
    """Cost per board of each row: the stage option's and every part's."""
    res, cap = model.resistors, model.capacitors
    u_cost = model.stage_costs[u]
    return np.asarray(u_cost + res.cost[i1] + res.cost[i2] + res.cost[i3] + cap.cost[j])


def coupled_ok(model: SearchModel, u: I64, i1: I64, i2: I64, i3: I64, j: I64) -> NDArray[np.bool_]:
    """The constraints that couple positions, which need no circuit model: stock for
    ``boards`` pieces per position a stock code fills (the stage's resistors, R5, included)
    and the cost cap ``limits.max_cost``."""
    res, boards = model.resistors, model.boards
    same12, same13, same23 = i1 == i2, i1 == i3, i2 == i3
    stage_res, stage_pieces = (x[u] for x in model.stage_resistors)  # (rows, m)

    def stage_uses(i: I64) -> I64:
        return np.asarray((stage_pieces * (stage_res == i[:, None])).sum(axis=1))

    ok = res.stock[i1] >= boards * (1 + same12 + same13 + stage_uses(i1))
    ok &= res.stock[i2] >= boards * (1 + same12 + same23 + stage_uses(i2))
    ok &= res.stock[i3] >= boards * (1 + same13 + same23 + stage_uses(i3))
    max_cost = model.spec.limits.max_cost
    if max_cost is not None:
        ok &= row_cost(model, u, i1, i2, i3, j) <= max_cost + 1e-12
    return np.asarray(ok)


def evaluate(
    model: SearchModel,
    u: I64,
    i1: I64,
    i2: I64,
    i3: I64,
    j: I64,
    *,
    coupled: bool = True,
    levels: F64 | None = None,
) -> Rows:
    """Score combinations with the full model and keep those the spec accepts (module
    docstring). ``coupled=False`` leaves stock and cost to the CP-SAT engine. ``levels``:
    each row's pair level intervals where the caller has them (``search.pairs.Pairs``),
    else they are found again for the run-time guard."""
    spec, res, cap = model.spec, model.resistors, model.capacitors
    rp = RowPrediction.nominal(
        model, u, (res.value[i1], res.value[i2], res.value[i3], cap.value[j])
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        e_f = np.log(np.asarray(rp.pred.frequency_hz) / spec.target.target_hz)
        e_a = np.log(np.asarray(rp.pred.amplitude_vpp) / spec.triangle.amplitude_vpp)
    share = rp.timing_share
    ok = rp.accepted(spec, cap.voltage[j])

    if coupled:
        ok &= coupled_ok(model, u, i1, i2, i3, j)
    # a code the stage shares with R1..R3 is one BOM line
    same12, same13, same23 = i1 == i2, i1 == i3, i2 == i3
    stage_res = model.stage_resistors[0][u]  # (rows, m)
    resistor_lines = (1 + ~same12 + (~same13 & ~same23)).astype(np.int64)
    shared_with_stage = (
        (stage_res >= 0)
        & ((stage_res == i1[:, None]) | (stage_res == i2[:, None]) | (stage_res == i3[:, None]))
    ).sum(axis=1)
    lines = model.stage_lines[u] + 1 + resistor_lines - shared_with_stage
    cost = row_cost(model, u, i1, i2, i3, j)

    _guard_bounds(model, u, i1, i2, rp, levels)
    keep = np.flatnonzero(ok)
    if spec.limits.guarantee == "worst_case" and model.form.probes_in_box and len(keep):
        probes = probe_extremes(model, *(x[keep] for x in (u, i1, i2, i3, j)))
        (fa, fb), (aa, ab) = model.band_f, model.band_a
        f_t, a_t = spec.target.target_hz, spec.triangle.amplitude_vpp
        with np.errstate(invalid="ignore", divide="ignore"):
            pf, pa = np.log(probes[:, :3] / f_t), np.log(probes[:, 3:] / a_t)
        inside = np.all((pf >= fa) & (pf <= fb), axis=1)
        inside &= np.all((pa >= aa) & (pa <= ab), axis=1)
        keep = keep[inside]

    u_term = model.stage_terms[u]
    primary = (
        u_term
        + model.resistor_term(i1)
        + model.resistor_term(i2)
        + model.resistor_term(i3)
        + model.capacitor_term(j)
        + model.row_term(np.nan_to_num(e_f), np.nan_to_num(e_a), np.nan_to_num(share))
        - model.shared_line_credit() * (3 - resistor_lines + shared_with_stage)
    )
    rows = Rows(
        u=u,
        i1=i1,
        i2=i2,
        i3=i3,
        j=j,
        p=rp.p,
        e_f=e_f,
        e_a=e_a,
        share=share,
        cost=cost,
        lines=lines,
        primary=primary,
        secondary=model.secondary(np.nan_to_num(e_f), cost),
    )
    return rows.take(keep)


def _guard_bounds(
    model: SearchModel, u: I64, i1: I64, i2: I64, rp: RowPrediction, levels: F64 | None
) -> None:
    """Hold every row the full model evaluated to the bounds that windowed it (its pair's
    loop, ``pairfigures.pair_loops``, where the form narrows the levels by pair): if one
    falls outside, the completeness argument has failed and ``model.bounds_violated``
    withdraws every proof (cheap insurance against a model change that breaks a
    monotonicity)."""
    # the bounds are claimed where a row can be accepted: the timing share within the limit
    with np.errstate(invalid="ignore"):
        n = np.flatnonzero(rp.valid & (rp.timing_share <= model.spec.limits.max_timing_share))
    if len(n) == 0:
        return
    loop = model.loops(u[n])
    if model.form.levels_by_pair:
        found = pair_levels(model, u[n], i1[n], i2[n]) if levels is None else levels[n]
        loop = pair_loops(model, u[n], found)
    k, p = rp.k[n], rp.p[n]
    t, a = point_bounds(loop, k, p)
    period = np.asarray(rp.pred.period_s)[n]
    amp = np.asarray(rp.pred.amplitude_vpp)[n]
    slack = 1e-9
    inside = (period >= t.lo * (1 - slack)) & (period <= t.hi * (1 + slack))
    inside &= (amp >= a.lo * (1 - slack)) & (amp <= a.hi * (1 + slack))
    if not inside.all():
        model.bounds_violated = True


def rank_key(model: SearchModel, rows: Rows, n: int) -> tuple[int, int, str, str, str, str, str]:
    """Total order of candidates: primary score, secondary score, then stock codes."""
    return (
        int(rows.primary[n]),
        int(rows.secondary[n]),
        model.opamps[rows.u[n]].option.key,
        model.resistors.parts[rows.i1[n]].id,
        model.resistors.parts[rows.i2[n]].id,
        model.resistors.parts[rows.i3[n]].id,
        model.capacitors.parts[rows.j[n]].id,
    )


def best(model: SearchModel, rows: Rows, top: int) -> Rows:
    """The ``top`` best rows in rank order (exact: ties resolved by the full key)."""
    if len(rows) == 0:
        return rows
    combos = np.stack([rows.u, rows.i1, rows.i2, rows.i3, rows.j], axis=1)
    _, first = np.unique(combos, axis=0, return_index=True)
    if len(first) < len(rows):
        rows = rows.take(np.sort(first))
    if len(rows) > top:
        score = rows.primary * SECONDARY_SPAN + rows.secondary
        kth = np.partition(score, top - 1)[top - 1]
        rows = rows.take(score <= kth)
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    return rows.take(np.array(order, dtype=np.int64))
