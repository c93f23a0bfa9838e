"""Trimmed designs: a trimmer RV1 in series with R3 brings every board to the target.

With the wiper at α (0 = no added resistance) the timing resistance is R3 + α·RV and, in the
search model of ``search.model``,

    e(α) = ln(f(α)/f_target) = ln((X + d) / (k·(R3 + α·RV)·C1 + d)).

Coverage: every corner of tolerances (RV1's own included), rails, op-amp spread and temperature
must reach the target with the wiper inside [m, 1 - m] (m = trim.margin_pct):

    e(m) - down(m) >= 0   and   e(1 - m) + up(1 - m) <= 0,

down/up being the worst-case ln spreads of f (R_eff = R3 + α·RV spreads by the weighted
tolerance (R3·t3 + α·RV·tRV)/R_eff). The nominal wiper solves e(α0) = 0:
α0 = (X/(k·C1) - R3)/RV. Trim resolution, the % of frequency per % of travel at the target, is
|d ln f/dα| = k·RV·C1/(X + d): it does not depend on R3, so the search walks (pair, C1, RV1)
in order of resolution and picks R3 inside the window the two coverage inequalities leave.
Post-trim drift is the frequency change over the temperature range with the wiper fixed at α0,
from the parts' tempcos: S = -(tc1 - tc2 + tc_Reff + tc_C)·ΔT in the search (op-amp drift is
not modelled); each answer's drift is then taken from the full model at the temperature ends
(``drift_after_trim``), checked against the limit and reported.

Ranking (for every ``ranking.by``): resolution, then post-trim drift, then cost, then stock
codes. Exact within the search model; each answer is re-checked by brute force over the full
model's spread box (``worstcase.box_extremes``) at both margins and dropped if it fails.
"""

from __future__ import annotations

import dataclasses
import math
import time

import numpy as np
from numpy.typing import NDArray

from tristock.analysis import analyse
from tristock.catalog import Catalog
from tristock.design import Design, rails_from_supply
from tristock.parts import Pot
from tristock.results import Candidate, DesignResult, Infeasible, SearchInfo, TrimOut
from tristock.search import CAUTIONS, candidate
from tristock.search.explain import opamp_exclusions
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.targetpoint import pair_spread, target_array
from tristock.spec import Spec
from tristock.worstcase import box_extremes

_Q = SCORE_RESOLUTION
#: Coarsest trim resolution searched (% per % of travel): beyond it a trimmer is a tuning control.
_RESOLUTION_CAP = 50.0


@dataclasses.dataclass
class _Trimmed:
    """Rows of trimmed combinations (indices into the model's tables and the trimmer list)."""

    u: NDArray[np.int64]
    i1: NDArray[np.int64]
    i2: NDArray[np.int64]
    i3: NDArray[np.int64]
    j: NDArray[np.int64]
    v: NDArray[np.int64]
    resolution: NDArray[np.float64]
    drift: NDArray[np.float64]
    wiper: NDArray[np.float64]
    cost: NDArray[np.float64]

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> _Trimmed:
        return _Trimmed(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})


def _trimmers(catalog: Catalog, boards: int) -> list[Pot]:
    return sorted(
        (p for p in catalog.pots if p.kind == "trimmer" and p.stock >= boards),
        key=lambda p: (p.value_ohm, p.id),
    )


def _rows(
    model: SearchModel,
    pots: list[Pot],
    u: NDArray[np.int64],
    i1: NDArray[np.int64],
    i2: NDArray[np.int64],
    j: NDArray[np.int64],
    v: NDArray[np.int64],
    margin: float,
    max_drift: float | None,
) -> _Trimmed:
    """Open the R3 window of each (U1, R1, R2, C1, RV1) cell and keep the rows that cover."""
    spec, res, cap = model.spec, model.resistors, model.capacitors
    ops = model.opamps
    x = target_array(model, "x")[u]
    d = target_array(model, "d")[u]
    gain = target_array(model, "gain")[u]
    ln_k = res.ln_value[i1] - res.ln_value[i2]
    k = np.exp(ln_k)
    c = np.exp(cap.ln_value[j])
    rv = np.array([p.value_ohm for p in pots])[v]
    t_rv = np.array([p.tolerance_pct / 100 for p in pots])[v]
    tc_rv = np.array([p.tempco_ppm for p in pots])[v]
    dn_pair, up_pair, _, _ = pair_spread(model, u, i1, i2)
    t_c = cap.tol[j] + cap.extra_band[j]
    # Widest R3 window: R_eff's tolerance is at least the smaller of RV1's and the finest R3's.
    t_r = np.minimum(t_rv, res.tol.min() if len(res) else np.inf)  # no resistors: no rows
    dn0 = dn_pair + gain * (np.log1p(t_c) + np.log1p(t_r))
    up0 = up_pair - gain * (np.log1p(-t_c) + np.log1p(-t_r))
    r_hi = ((x + d) * np.exp(-dn0) - d) / (k * c) - margin * rv
    r_lo = ((x + d) * np.exp(up0) - d) / (k * c) - (1 - margin) * rv
    ln_r = res.ln_value
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.searchsorted(ln_r, np.log(np.maximum(r_lo, 1e-300)), side="left")
        hi = np.searchsorted(
            ln_r, np.where(r_hi > 0, np.log(np.maximum(r_hi, 1e-300)), -np.inf), side="right"
        )
    counts = np.maximum(hi - lo, 0)
    cell = np.repeat(np.arange(len(counts)), counts)
    i3 = (
        np.repeat(lo, counts) + np.arange(len(cell)) - np.repeat(np.cumsum(counts) - counts, counts)
    )
    u, i1, i2, j, v = u[cell], i1[cell], i2[cell], j[cell], v[cell]
    x, d, gain, k, c, rv, t_rv, tc_rv = (a[cell] for a in (x, d, gain, k, c, rv, t_rv, tc_rv))
    dn_pair, up_pair, t_c = dn_pair[cell], up_pair[cell], t_c[cell]
    r3 = np.exp(ln_r[i3])
    t3 = res.tol[i3]
    env = spec.environment
    dts = (env.temp_min_c - 25.0, env.temp_max_c - 25.0)

    def spread(alpha: float | NDArray[np.float64]) -> tuple[NDArray[np.float64], ...]:
        r_eff = r3 + alpha * rv
        t_r = (r3 * t3 + alpha * rv * t_rv) / r_eff
        tc_r = (r3 * res.tempco[i3] + alpha * rv * tc_rv) / r_eff
        s = -(res.tempco[i1] - res.tempco[i2] + tc_r + cap.tempco[j]) * 1e-6 * gain
        t_up = np.maximum(0, np.maximum(s * dts[0], s * dts[1]))
        t_dn = np.maximum(0, -np.minimum(s * dts[0], s * dts[1]))
        dn = dn_pair + gain * (np.log1p(t_r) + np.log1p(t_c)) + t_dn
        up = up_pair - gain * (np.log1p(-t_r) + np.log1p(-t_c)) + t_up
        e = np.log((x + d) / (k * r_eff * c + d))
        return e, dn, up, s

    e_m, dn_m, _, _ = spread(margin)
    e_n, _, up_n, _ = spread(1 - margin)
    ok = (e_m - dn_m >= 0) & (e_n + up_n <= 0)
    wiper = (x / (k * c) - r3) / rv
    ok &= (wiper >= margin) & (wiper <= 1 - margin)
    _, _, _, s0 = spread(np.clip(wiper, 0, 1))
    drift = np.expm1(np.abs(s0) * max(abs(dts[0]), abs(dts[1])))
    if max_drift is not None:
        ok &= drift <= max_drift
    # Stock for a code in two resistor positions; cost.
    boards = model.boards
    same12, same13, same23 = i1 == i2, i1 == i3, i2 == i3
    ok &= res.stock[i1] >= boards * (1 + same12 + same13)
    ok &= res.stock[i2] >= boards * (1 + same12 + same23)
    ok &= res.stock[i3] >= boards * (1 + same13 + same23)
    u_cost = np.array([o.part.cost_per_board for o in ops])[u]
    pot_cost = np.array([p.unit_cost for p in pots])[v]
    cost = u_cost + res.cost[i1] + res.cost[i2] + res.cost[i3] + cap.cost[j] + pot_cost
    if spec.limits.max_cost is not None:
        ok &= cost <= spec.limits.max_cost + 1e-12
    peak = target_array(model, "peak_v")[u]
    ok &= cap.voltage[j] >= peak * (1 + spec.triangle.tolerance_pct / 100)
    resolution = k * rv * c / (x + d)
    rows = _Trimmed(u, i1, i2, i3.astype(np.int64), j, v, resolution, drift, wiper, cost)
    return rows.take(ok)


_Cells = tuple[
    NDArray[np.int64], NDArray[np.int64], NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]
]


def _cells(model: SearchModel, pots: list[Pot], margin: float, theta: float) -> _Cells:
    """(U1, R1, R2, C1, RV1) cells in the amplitude band that could cover, whose resolution is
    at most ``theta``.

    Coverage needs resolution·(1 - 2m) >= e^up - e^-down (subtract the two inequalities of
    the module docstring), and R1, R2, rails and op-amp spread alone set a floor under up and
    down, so cells finer than that floor are skipped.
    """
    res, cap = model.resistors, model.capacitors
    ln_r = res.ln_value
    aa, ab = model.band_a
    ln_cv = (cap.ln_value[:, None] + np.log([p.value_ohm for p in pots])[None, :]).ravel()
    order = np.argsort(ln_cv, kind="stable")
    ln_cv = ln_cv[order]
    j_of = (order // len(pots)).astype(np.int64)
    v_of = (order % len(pots)).astype(np.int64)
    out = []
    for o in model.opamps:
        if o.target is None:
            continue
        lo = np.searchsorted(ln_r, ln_r - o.target.ln_k_target - ab - 1e-12, side="left")
        hi = np.searchsorted(ln_r, ln_r - o.target.ln_k_target - aa + 1e-12, side="right")
        counts = np.maximum(hi - lo, 0)
        i1 = np.repeat(np.arange(len(ln_r)), counts)
        i2 = (
            np.repeat(lo, counts)
            + np.arange(len(i1))
            - np.repeat(np.cumsum(counts) - counts, counts)
        )
        u = np.full(len(i1), o.index, dtype=np.int64)
        if model.spec.limits.guarantee == "worst_case":
            _, _, dn_a, up_a = pair_spread(model, u, i1, i2)
            e_a = ln_r[i1] - ln_r[i2] - o.target.ln_k_target
            keep = (e_a + up_a <= ab) & (e_a - dn_a >= aa)
            u, i1, i2 = u[keep], i1[keep], i2[keep]
        ln_k = ln_r[i1] - ln_r[i2]
        # resolution = k·RV·C/(X + d), so a resolution bound is a bound on ln(C·RV).
        dn, up, _, _ = pair_spread(model, u, i1, i2)
        floor = (np.exp(up) - np.exp(-dn)) / (1 - 2 * margin)
        start = np.searchsorted(ln_cv, np.log(floor * (o.target.x + o.target.d)) - ln_k - 1e-12)
        reach = math.log(theta * (o.target.x + o.target.d))
        stop = np.searchsorted(ln_cv, reach - ln_k + 1e-12, side="right")
        n = np.maximum(stop - start, 0)
        which = np.repeat(np.arange(len(n)), n)
        idx = np.repeat(start, n) + np.arange(len(which)) - np.repeat(np.cumsum(n) - n, n)
        out.append((u[which], i1[which], i2[which], j_of[idx], v_of[idx]))
    if not out:
        z = np.zeros(0, dtype=np.int64)
        return z, z, z, z, z
    u, i1, i2, j, v = (np.concatenate([c[n] for c in out]).astype(np.int64) for n in range(5))
    return u, i1, i2, j, v


def _key(model: SearchModel, pots: list[Pot], rows: _Trimmed, n: int) -> tuple[object, ...]:
    return (
        round(float(rows.resolution[n]) / _Q),
        round(float(rows.drift[n]) / _Q),
        round(float(rows.cost[n]) * 1e4),
        model.opamps[rows.u[n]].part.id,
        model.resistors.parts[rows.i1[n]].id,
        model.resistors.parts[rows.i2[n]].id,
        model.resistors.parts[rows.i3[n]].id,
        model.capacitors.parts[rows.j[n]].id,
        pots[rows.v[n]].id,
    )


def trimmed_top(
    spec: Spec, catalog: Catalog, top: int, time_limit_s: float
) -> tuple[SearchModel, list[Pot], _Trimmed | None, bool, float]:
    """The ``top`` best trimmed rows, exact within the search model, and the model."""
    assert spec.trim is not None
    t0 = time.perf_counter()
    model = build_model(spec, catalog)
    pots = _trimmers(catalog, spec.build.boards)
    margin = spec.trim.margin_pct / 100
    drift = spec.trim.drift_after_trim_pct / 100 if spec.trim.drift_after_trim_pct else None
    if not pots or not model.opamps or len(model.capacitors) == 0:
        return model, pots, None, True, time.perf_counter() - t0
    # Resolution bounds theta grow geometrically from the finest conceivable value until
    # ``top`` rows cover; the last pass opened every cell at or below its theta, so the
    # ``top`` best rows are exact.
    theta = _finest_floor(model, margin)
    proven = True
    while True:
        u, i1, i2, j, v = _cells(model, pots, margin, theta)
        rows = _rows(model, pots, u, i1, i2, j, v, margin, drift)
        if len(rows.u) >= top or theta > _RESOLUTION_CAP:
            break
        if time.perf_counter() - t0 > time_limit_s:
            proven = False
            break
        theta *= 1.25
    return model, pots, _best(model, pots, rows, top), proven, time.perf_counter() - t0


def _finest_floor(model: SearchModel, margin: float) -> float:
    """A resolution no covering design can beat: rails and op-amp spread alone need
    resolution·(1 - 2m) >= e^up - e^-down."""
    floors = [
        (math.exp(o.target.rail_f[1]) - math.exp(-o.target.rail_f[0])) / (1 - 2 * margin)
        for o in model.opamps
        if o.target is not None
    ]
    return max(min(floors, default=1e-3), 1e-4)


def _best(model: SearchModel, pots: list[Pot], rows: _Trimmed, top: int) -> _Trimmed:
    """The ``top`` best rows in rank order (numeric keys first, stock codes for ties)."""
    res_q = np.rint(rows.resolution / _Q).astype(np.int64)
    drift_q = np.rint(rows.drift / _Q).astype(np.int64)
    cost_q = np.rint(rows.cost * 1e4).astype(np.int64)
    order = np.lexsort((cost_q, drift_q, res_q))
    if len(order) > top:
        cut = order[top - 1]
        last = (res_q[cut], drift_q[cut], cost_q[cut])
        keys = list(zip(res_q.tolist(), drift_q.tolist(), cost_q.tolist(), strict=True))
        order = np.array([n for n in order if keys[n] <= last], dtype=np.int64)
    kept = rows.take(order)
    ranked = sorted(range(len(kept.u)), key=lambda n: _key(model, pots, kept, n))[:top]
    return kept.take(np.array(ranked, dtype=np.int64))


def coverage(design: Design, spec: Spec) -> tuple[float, float]:
    """(highest f any board of the spread box has at wiper 1 - m, lowest f any has at wiper
    m): the full model's box extremes (``worstcase.box_extremes``: every corner, balanced
    rails, projected Newton). Every board can be trimmed to the target when the first is
    <= target <= the second."""
    assert spec.trim is not None
    m = spec.trim.margin_pct / 100
    frequency = ("frequency_hz",)
    at_m = box_extremes(dataclasses.replace(design, wiper=m), spec, frequency)["frequency_hz"]
    at_far = box_extremes(dataclasses.replace(design, wiper=1 - m), spec, frequency)
    return at_far["frequency_hz"][1], at_m[0]


def drift_after_trim(design: Design, spec: Spec) -> float:
    """Largest |f(T)/f(25 °C) - 1| over the temperature range with the wiper left where it is
    (the full model at both temperature ends; rails nominal, op amp as catalogued)."""
    env = spec.environment
    rails = rails_from_supply(spec.supply)
    f25 = float(design.oscillator(rails, 25.0).frequency_hz)
    ends = (env.temp_min_c, env.temp_max_c)
    return max(abs(float(design.oscillator(rails, t).frequency_hz) / f25 - 1) for t in ends)


def _recheck(
    spec: Spec,
    model: SearchModel,
    pots: list[Pot],
    rows: _Trimmed | None,
    top: int,
    samples: int,
    seed: int,
) -> tuple[list[Candidate], int, int]:
    """The first ``top`` rows that the full model confirms (coverage over the box, drift
    after trimming), as candidates; also the count dropped and the rows looked at."""
    assert spec.trim is not None
    target = spec.target.target_hz
    rails = rails_from_supply(spec.supply)
    limit = spec.trim.drift_after_trim_pct
    kept: list[tuple[tuple[object, ...], Design, float, float, float, float]] = []
    dropped = used = 0
    for n in range(0 if rows is None else len(rows.u)):
        if len(kept) >= top:
            break
        assert rows is not None
        used += 1
        d = Design(
            u1=model.opamps[rows.u[n]].part,
            r1=model.resistors.parts[rows.i1[n]],
            r2=model.resistors.parts[rows.i2[n]],
            r3=model.resistors.parts[rows.i3[n]],
            c1=model.capacitors.parts[rows.j[n]],
            rv1=pots[rows.v[n]],
            wiper=float(np.clip(rows.wiper[n], 0, 1)),
        )
        drift = drift_after_trim(d, spec)
        if limit is not None and 100 * drift > limit:
            dropped += 1
            continue
        reach_lo, reach_hi = coverage(d, spec)  # the box search: after the cheaper drift check
        if not reach_lo <= target <= reach_hi:
            dropped += 1
            continue
        key = _key(model, pots, rows, n)
        resolution = float(rows.resolution[n])
        kept.append(
            ((key[0], round(drift / _Q), *key[2:]), d, reach_lo, reach_hi, drift, resolution)
        )
    # Within a resolution, the full model's drift orders the answers.
    kept.sort(key=lambda k: k[0])
    out = []
    for rank, (_, d, reach_lo, reach_hi, drift, resolution) in enumerate(kept, start=1):
        result = analyse(d, spec, samples=samples, seed=seed)
        c = candidate(spec, d, result, rank, round(resolution / _Q))
        c.trim = TrimOut(
            wiper_nominal=d.wiper,
            range_hz=[
                float(dataclasses.replace(d, wiper=w).oscillator(rails).frequency_hz)
                for w in (1.0, 0.0)
            ],
            reach_hz=[reach_lo, reach_hi],
            margin_pct=spec.trim.margin_pct,
            resolution_pct_per_pct=resolution,
            drift_after_trim_pct=100 * drift,
        )
        out.append(c)
    return out, dropped, used


def design_trimmed(
    spec: Spec, catalog: Catalog, *, time_limit_s: float, samples: int = 4000, seed: int = 0
) -> DesignResult:
    """Best trimmed designs (see the module docstring)."""
    assert spec.trim is not None
    t0 = time.perf_counter()
    top = spec.ranking.top
    want = top * 3
    while True:
        model, pots, rows, proven, _ = trimmed_top(spec, catalog, want, time_limit_s)
        candidates, dropped, used = _recheck(spec, model, pots, rows, top, samples, seed)
        exhausted = rows is None or len(rows.u) < want
        # Rows past the ones fetched rank after them; fetch more only if the full model's
        # drops made the re-check reach the end of what was fetched.
        if len(candidates) >= top or exhausted or time.perf_counter() - t0 > time_limit_s:
            if len(candidates) < top and not exhausted:
                proven = False
            break
        if used < want:
            break
        want *= 4
    infeasible = None
    if not candidates:
        infeasible = Infeasible(reasons=_reasons(spec, model, pots, dropped))
    return DesignResult(
        spec=spec,
        candidates=candidates,
        infeasible=infeasible,
        search=SearchInfo(
            engine="enumerate-trim",
            proven_optimal=proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=len(model.opamps)
            * len(model.resistors) ** 3
            * len(model.capacitors)
            * len(pots),
            evaluated=0 if rows is None else len(rows.u),
            score_resolution=_Q,
            dropped_by_full_model=dropped,
            time_limit_s=time_limit_s,
        ),
        cautions=CAUTIONS,
    )


def _reasons(spec: Spec, model: SearchModel, pots: list[Pot], dropped: int) -> list[str]:
    assert spec.trim is not None
    if not pots:
        return [f"no trimmer (pots.csv, kind trimmer) with stock for {spec.build.boards} boards"]
    if not any(o.target is not None for o in model.opamps):
        return ["no op amp in the catalog can be used: " + opamp_exclusions(model)]
    if dropped:
        return [
            f"{dropped} combination(s) covered the target in the search model, but the full "
            "model's spread box holds a board that cannot be trimmed to it"
        ]
    m = spec.trim.margin_pct
    text = (
        f"no R1/R2/R3/C1/RV1 combination lets every corner reach "
        f"{spec.target.target_hz:g} Hz with the wiper inside {m:g}..{100 - m:g} % of travel"
    )
    if spec.trim.drift_after_trim_pct:
        text += f" and drift under ±{spec.trim.drift_after_trim_pct:g} % after trimming"
    return [text + "; widen the margin, allow larger trimmers or tighter parts"]
