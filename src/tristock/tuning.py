"""Panel-tuned designs: one pot RV1 sweeps each range, a switch picks one capacitor per range.

Shared parts U1, R1, R2, R3, RV1 (and, for the divider control, the end-stop resistor R4);
range capacitors C1..Cn, C1 the lowest range. In the search model (``search.model``)
f(P) = 1/(c·(P + d)) with P = k·R_eff·C/β, and the pot's two ends give (see
``circuit.timing_network``):

- series: top of the range at α = 0 (R_eff = R3), bottom at α = 1 (R_eff = R3 + RV);
- divider: top at α = 1 (β = 1, R_eff = R3), bottom at α = 0
  (β = R4/(R4 + RV), R_eff = R3 + RV∥R4).

A range is guaranteed over [gl, gh] when every corner of tolerances, rails, op-amp spread and
temperature reaches both ends: gh = f_top·e^(-down), gl = f_bottom·e^(+up). The ranges cover
low_hz..high_hz with overlap o when gl(C1) <= low_hz, gh(Cn) >= high_hz and
gh(Ci) >= gl(Ci+1)·(1 + o) for every neighbour.

Search: for every op amp, its best amplitude pairs (R1, R2), every R3 and panel pot (divider:
R3 and R4 from the E12 members on the shelf, R3 at least 10x RV so the dial stays near
linear), and every capacitor, the fewest ranges that cover is found by the greedy interval
chain (optimal for interval cover), vectorised over all combinations; the cheapest chain of
exactly n capacitors per combination comes from a dynamic programme, walked in order of a cost
bound until no combination can be cheaper. For the finalists CP-SAT chooses the n capacitors
jointly: a chain of allowed neighbour transitions, minimising cost and then the largest excess
overlap (evenness). Every answer is
re-checked against the full model's spread box (``worstcase.box_extremes``) at both ends of
every range and dropped if a range or an overlap fails.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from ortools.sat.python import cp_model

from tristock.analysis import analyse
from tristock.catalog import Catalog
from tristock.design import Design, rails_from_supply
from tristock.eseries import is_member
from tristock.parts import Capacitor, Pot, Resistor
from tristock.results import (
    Candidate,
    DesignResult,
    Infeasible,
    RangeOut,
    SearchInfo,
    TuningOut,
)
from tristock.search import CAUTIONS, candidate
from tristock.search.explain import opamp_exclusions
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.search.targetpoint import pair_spread, target_array
from tristock.spec import FrequencySpec, Spec
from tristock.worstcase import box_extremes

PAIRS_PER_OPAMP = 3
MAX_RANGES = 8
CPSAT_COMBOS = 24
DIAL_POINTS = 11
_BIG = 1 << 20


@dataclass
class _Combos:
    """Shared-part combinations and, per capacitor, their guaranteed range ends (Hz)."""

    u: NDArray[np.int64]
    i1: NDArray[np.int64]
    i2: NDArray[np.int64]
    i3: NDArray[np.int64]
    i4: NDArray[np.int64]  # -1 for the series control
    v: NDArray[np.int64]
    shared_cost: NDArray[np.float64]
    gl: NDArray[np.float64]  # (combos, caps)
    gh: NDArray[np.float64]

    def take(self, sel: NDArray[np.int64] | NDArray[np.bool_]) -> _Combos:
        return _Combos(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})


def _proxy_spec(spec: Spec, at_hz: float | None = None) -> Spec:
    """The spec with a frequency target (default high_hz), so the op-amp constants and checks
    of the search model are taken where the op amp is most stretched."""
    assert spec.tuning is not None
    freq = FrequencySpec(target_hz=at_hz or spec.tuning.high_hz, tolerance_pct=1.0)
    return spec.model_copy(update={"frequency": freq, "tuning": None, "trim": None})


def _amplitude_targets(
    model: SearchModel, low_model: SearchModel
) -> dict[int, tuple[float, float]]:
    """Per op amp: the ln k that centres the triangle amplitude between low_hz and high_hz,
    and the half-spread h of ln A over that span (the comparator overshoot grows with
    frequency). A = k·(VH + VL)·(1 + ε(f)), so the k for the target at each end differs by
    ln((1 + ε_high)/(1 + ε_low)); the centre halves it."""
    lows = {o.part.id: o for o in low_model.opamps}
    out = {}
    for o in model.opamps:
        lo = lows.get(o.part.id)
        if lo is not None and lo.target is not None and o.target is not None:
            out[o.index] = (
                0.5 * (o.target.ln_k_target + lo.target.ln_k_target),
                0.5 * abs(lo.target.ln_k_target - o.target.ln_k_target),
            )
    return out


def _best_pairs(
    model: SearchModel, u_index: int, ln_k_target: float, half_spread: float
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The PAIRS_PER_OPAMP best (R1, R2) whose amplitude stays in its band over the whole
    span: |ln k - centre| + h inside the band; smallest error, then tolerance, then cost (a pair
    only scales every range by k)."""
    res = model.resistors
    ln_r = res.ln_value
    aa, ab = model.band_a
    aa, ab = aa + half_spread, ab - half_spread
    n = len(ln_r)
    i1 = np.repeat(np.arange(n, dtype=np.int64), n)
    i2 = np.tile(np.arange(n, dtype=np.int64), n)
    e_a = ln_r[i1] - ln_r[i2] - ln_k_target
    keep = (e_a >= aa) & (e_a <= ab)
    if model.spec.limits.guarantee == "worst_case":
        u = np.full(len(i1), u_index, dtype=np.int64)
        _, _, dn_a, up_a = pair_spread(model, u, i1, i2)
        keep &= (e_a + up_a <= ab) & (e_a - dn_a >= aa)
    keep &= res.stock[i1] >= model.boards * (1 + (i1 == i2))
    i1, i2, e_a = i1[keep], i2[keep], e_a[keep]
    order = np.lexsort((res.cost[i1] + res.cost[i2], res.tol[i1] + res.tol[i2], np.abs(e_a)))
    order = order[:PAIRS_PER_OPAMP]
    return i1[order].astype(np.int64), i2[order].astype(np.int64)


def _combos(
    spec: Spec, model: SearchModel, pots: list[Pot], targets: dict[int, tuple[float, float]]
) -> _Combos:
    assert spec.tuning is not None
    res, cap = model.resistors, model.capacitors
    divider = spec.tuning.control == "divider"
    env = spec.environment
    dts = (env.temp_min_c - 25.0, env.temp_max_c - 25.0)
    values = np.exp(res.ln_value)
    e12 = np.array([is_member("E12", float(x)) for x in values])
    blocks: list[tuple[int, int, int, int, NDArray[np.int64], NDArray[np.int64]]] = []
    for o in model.opamps:
        if o.index not in targets:
            continue
        p1, p2 = _best_pairs(model, o.index, *targets[o.index])
        for a, b in zip(p1, p2, strict=True):
            for pot_index, pot in enumerate(pots):
                rv_ohm = pot.value_ohm
                if divider:
                    r3s = np.flatnonzero(e12 & (values >= 10 * rv_ohm))
                    r4s = np.flatnonzero(e12 & (values >= rv_ohm / 49) & (values <= 2 * rv_ohm))
                else:
                    r3s = np.arange(len(res))
                    r4s = np.array([-1])
                g3 = np.repeat(r3s, len(r4s))
                g4 = np.tile(r4s, len(r3s))
                if len(g3):
                    blocks.append((o.index, int(a), int(b), pot_index, g3, g4))
    n_caps = len(cap)
    if not blocks or n_caps == 0:
        z = np.zeros(0, dtype=np.int64)
        e = np.zeros((0, n_caps))
        return _Combos(z, z, z, z, z, z, np.zeros(0), e, e)
    u = np.concatenate([np.full(len(b[4]), b[0]) for b in blocks]).astype(np.int64)
    i1 = np.concatenate([np.full(len(b[4]), b[1]) for b in blocks]).astype(np.int64)
    i2 = np.concatenate([np.full(len(b[4]), b[2]) for b in blocks]).astype(np.int64)
    v = np.concatenate([np.full(len(b[4]), b[3]) for b in blocks]).astype(np.int64)
    i3 = np.concatenate([b[4] for b in blocks]).astype(np.int64)
    i4 = np.concatenate([b[5] for b in blocks]).astype(np.int64)

    ops = model.opamps
    cc = target_array(model, "c")[u][:, None]
    d = target_array(model, "d")[u][:, None]
    k = np.exp(res.ln_value[i1] - res.ln_value[i2])[:, None]
    r3 = values[i3][:, None]
    rv = np.array([p.value_ohm for p in pots])[v][:, None]
    t_rv = np.array([p.tolerance_pct / 100 for p in pots])[v][:, None]
    tc_rv = np.array([p.tempco_ppm for p in pots])[v][:, None]
    t3, tc3 = res.tol[i3][:, None], res.tempco[i3][:, None]
    c = np.exp(cap.ln_value)[None, :]
    t_c = (cap.tol + cap.extra_band)[None, :]
    tc_c = cap.tempco[None, :]
    dn_pair, up_pair, _, _ = pair_spread(model, u, i1, i2)
    s12 = (res.tempco[i1] - res.tempco[i2])[:, None]

    def end(r_eff: NDArray, beta: NDArray, t_r: NDArray, tc_r: NDArray, t_beta: NDArray):
        p = k * r_eff * c / beta
        f = 1.0 / (cc * (p + d))
        gain = p / (p + d)  # ∂ln f/∂ln P at this end of this range
        s = -(s12 + tc_r + tc_c) * 1e-6 * gain
        t_up = np.maximum(0, np.maximum(s * dts[0], s * dts[1]))
        t_dn = np.maximum(0, -np.minimum(s * dts[0], s * dts[1]))
        dn = dn_pair[:, None] + gain * (np.log1p(t_r) + np.log1p(t_c) + t_beta) + t_dn
        up = up_pair[:, None] - gain * (np.log1p(-t_r) + np.log1p(-t_c) - t_beta) + t_up
        return f, dn, up

    one = np.ones_like(r3)
    if divider:
        r4 = values[i4][:, None]
        t4, tc4 = res.tol[i4][:, None], res.tempco[i4][:, None]
        f_top, dn_top, _ = end(r3, one, t3, tc3, 0 * one)
        r_par = rv * r4 / (rv + r4)
        r_bot = r3 + r_par
        beta = r4 / (r4 + rv)
        t_par = np.maximum(t_rv, t4)
        t_beta = (t_rv + t4) * rv / (r4 + rv)
        f_bot, _, up_bot = end(
            r_bot,
            beta,
            (r3 * t3 + r_par * t_par) / r_bot,
            (r3 * tc3 + r_par * np.maximum(tc_rv, tc4)) / r_bot + (tc4 - tc_rv) * rv / (r4 + rv),
            t_beta,
        )
        extra_cost = res.cost[i4]
    else:
        f_top, dn_top, _ = end(r3, one, t3, tc3, 0 * one)
        r_bot = r3 + rv
        f_bot, _, up_bot = end(
            r_bot, one, (r3 * t3 + rv * t_rv) / r_bot, (r3 * tc3 + rv * tc_rv) / r_bot, 0 * one
        )
        extra_cost = np.zeros(len(u))
    gh = f_top * np.exp(-dn_top)
    gl = f_bot * np.exp(up_bot)
    usable = cap.voltage[None, :] >= target_array(model, "peak_v")[u][:, None]
    usable &= cap.stock[None, :] >= model.boards
    gl = np.where(usable & (gh > gl), gl, np.inf)
    shared = (
        np.array([o.part.cost_per_board for o in ops])[u]
        + res.cost[i1]
        + res.cost[i2]
        + res.cost[i3]
        + extra_cost
        + np.array([p.unit_cost for p in pots])[v]
    )
    stock_ok = res.stock[i3] >= model.boards * (1 + (i3 == i1) + (i3 == i2))
    if divider:
        stock_ok &= res.stock[i4] >= model.boards * (1 + (i4 == i1) + (i4 == i2) + (i4 == i3))
    combos = _Combos(u, i1, i2, i3, i4, v, shared, gl, gh)
    return combos.take(stock_ok)


def _fewest_ranges(combos: _Combos, low: float, high: float, overlap: float) -> NDArray[np.int64]:
    """Fewest ranges that cover low..high, per combination (MAX_RANGES + 1 when none does):
    greedy interval chaining, each step taking the reachable range that goes highest."""
    gl, gh = combos.gl, combos.gh
    n = len(combos.u)
    count = np.full(n, MAX_RANGES + 1, dtype=np.int64)
    # initial=-inf: with no usable capacitor (zero columns) no combination has a range
    reach = np.where(gl <= low, gh, -np.inf).max(axis=1, initial=-np.inf)
    alive = np.isfinite(reach)
    for step in range(1, MAX_RANGES + 1):
        done = alive & (reach >= high) & (count > MAX_RANGES)
        count[done] = step
        nxt = np.where(gl * (1 + overlap) <= reach[:, None], gh, -np.inf).max(
            axis=1, initial=-np.inf
        )
        alive &= nxt > reach
        reach = np.where(alive, nxt, reach)
    return count


def _cheapest_chain(
    gl: NDArray[np.float64],
    gh: NDArray[np.float64],
    cost: NDArray[np.float64],
    n: int,
    low: float,
    high: float,
    overlap: float,
) -> float:
    """Cost of the cheapest chain of exactly ``n`` capacitors that covers (inf if none):
    best[s][j] = cost[j] + min over allowed predecessors i of best[s-1][i]."""
    use = np.flatnonzero(np.isfinite(gl) & (gh >= low) & (gl <= high))
    if len(use) == 0:
        return math.inf
    a_gl, a_gh, a_cost = gl[use], gh[use], cost[use]
    allowed = (a_gh[None, :] > a_gh[:, None]) & (a_gh[:, None] >= a_gl[None, :] * (1 + overlap))
    best = np.where(a_gl <= low, a_cost, np.inf)
    for _ in range(n - 1):
        best = np.where(allowed, best[:, None], np.inf).min(axis=0) + a_cost
    final = np.where(a_gh >= high, best, np.inf).min()
    return float(final)


def _choose_caps(
    gl: NDArray[np.float64],
    gh: NDArray[np.float64],
    cost: NDArray[np.float64],
    n: int,
    low: float,
    high: float,
    overlap: float,
    time_limit_s: float,
    max_cost: float,
) -> tuple[list[int], int] | None:
    """CP-SAT: exactly ``n`` capacitors (indices, lowest range first) forming a covering
    chain that costs at most ``max_cost`` (the dynamic programme's optimum), minimising cost
    and then the largest excess overlap. None if there is none."""
    # A capacitor whose guaranteed range lies wholly outside low..high cannot help a chain.
    usable = [j for j in range(len(gl)) if math.isfinite(gl[j]) and gh[j] >= low and gl[j] <= high]
    if not usable:
        return None
    model = cp_model.CpModel()
    slot = [
        model.new_int_var_from_domain(cp_model.Domain.from_values(usable), f"range_{s}")
        for s in range(n)
    ]
    starts = [j for j in usable if gl[j] <= low]
    ends = [j for j in usable if gh[j] >= high]
    if not starts or not ends:
        return None
    model.add_allowed_assignments([slot[0]], [(j,) for j in starts])
    model.add_allowed_assignments([slot[-1]], [(j,) for j in ends])
    scale = 1e4
    excess_hi = int(scale * 10)
    excess = []
    for s in range(n - 1):
        table = [
            (a, b, min(int(scale * math.log(gh[a] / (gl[b] * (1 + overlap)))), excess_hi))
            for a in usable
            for b in usable
            if gh[b] > gh[a] and gh[a] >= gl[b] * (1 + overlap)
        ]
        if not table:
            return None
        e = model.new_int_var(0, excess_hi, f"excess_{s}")
        model.add_allowed_assignments([slot[s], slot[s + 1], e], table)
        excess.append(e)
    cents = [round(c / 1e-4) for c in cost]
    slot_cost = []
    for s in range(n):
        c_s = model.new_int_var(0, max(cents), f"cost_{s}")
        model.add_element(slot[s], cents, c_s)
        slot_cost.append(c_s)
    model.add(sum(slot_cost) <= round(max_cost / 1e-4) + n)  # per-part rounding slack
    worst = model.new_int_var(0, excess_hi, "largest_excess_overlap")
    if excess:
        model.add_max_equality(worst, excess)
    else:
        model.add(worst == 0)
    model.minimize(_BIG * sum(slot_cost) + worst)
    solver = cp_model.CpSolver()
    solver.parameters.max_time_in_seconds = max(time_limit_s, 0.05)
    solver.parameters.num_workers = 1
    solver.parameters.catch_sigint_signal = False  # Ctrl-C must reach the caller
    status = solver.solve(model)
    if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
        return None
    return [int(solver.value(x)) for x in slot], round(solver.objective_value)


def _range_checks(
    design: Design, spec: Spec
) -> list[tuple[float, float, float, float, float, float]]:
    """Per range (C1 first): nominal low/high, guaranteed low/high over the spread box (Hz),
    and the lowest and highest triangle amplitude (Vpp) at the two ends of the dial (nominal,
    or over the box when the spec guarantees the worst case)."""
    lo_end, hi_end = (1.0, 0.0) if design.control == "series" else (0.0, 1.0)
    rails = rails_from_supply(spec.supply)
    worst = spec.limits.guarantee == "worst_case"
    metrics = ("frequency_hz", "amplitude_vpp") if worst else ("frequency_hz",)
    out = []
    for s in range(len(design.capacitors)):
        at = dataclasses.replace(design, selected=s)
        lo = dataclasses.replace(at, wiper=lo_end)
        hi = dataclasses.replace(at, wiper=hi_end)
        lo_c, hi_c = box_extremes(lo, spec, metrics), box_extremes(hi, spec, metrics)
        osc_lo, osc_hi = lo.oscillator(rails), hi.oscillator(rails)
        amps: tuple[float, ...]
        if worst:
            amps = (*lo_c["amplitude_vpp"], *hi_c["amplitude_vpp"])
        else:
            amps = (float(osc_lo.amplitude_vpp), float(osc_hi.amplitude_vpp))
        out.append(
            (
                float(osc_lo.frequency_hz),
                float(osc_hi.frequency_hz),
                lo_c["frequency_hz"][1],
                hi_c["frequency_hz"][0],
                min(amps),
                max(amps),
            )
        )
    return out


def dial_law(design: Design, spec: Spec) -> dict[str, list[float]]:
    """Nominal frequency against wiper position for every range (numbers for a plot)."""
    rails = rails_from_supply(spec.supply)
    wipers = [i / (DIAL_POINTS - 1) for i in range(DIAL_POINTS)]
    law: dict[str, list[float]] = {"wiper": wipers}
    for s in range(len(design.capacitors)):
        law[f"C{s + 1}"] = [
            float(dataclasses.replace(design, selected=s, wiper=w).oscillator(rails).frequency_hz)
            for w in wipers
        ]
    return law


def design_tuned(spec: Spec, catalog: Catalog, *, time_limit_s: float) -> DesignResult:
    """Best panel-tuned designs (see the module docstring)."""
    assert spec.tuning is not None
    t0 = time.perf_counter()
    tu = spec.tuning
    overlap = tu.overlap_pct / 100
    model = build_model(_proxy_spec(spec), catalog)
    targets = _amplitude_targets(model, build_model(_proxy_spec(spec, tu.low_hz), catalog))
    pots = sorted(
        (p for p in catalog.pots if p.kind == "panel" and p.stock >= spec.build.boards),
        key=lambda p: (p.value_ohm, p.id),
    )
    combos = _combos(spec, model, pots, targets)
    count = _fewest_ranges(combos, tu.low_hz, tu.high_hz, overlap)
    feasible = count <= (MAX_RANGES if tu.ranges == "auto" else tu.ranges)
    reasons: list[str] = []
    candidates: list[Candidate] = []
    dropped = amplitude_drops = 0
    proven = True
    if feasible.any():
        n = int(count[feasible].min()) if tu.ranges == "auto" else int(tu.ranges)
        pool = combos.take(np.flatnonzero(count <= n))
        cap = model.capacitors
        # Cost bound of a combination: its shared parts plus its n cheapest usable capacitors.
        cheapest = np.sort(np.where(np.isfinite(pool.gl), cap.cost[None, :], np.inf), axis=1)
        bound = pool.shared_cost + cheapest[:, :n].sum(axis=1)
        order = np.argsort(bound, kind="stable")
        # Exact cheapest chain per combination (dynamic programming), in order of the cost
        # bound, until the bound passes the top-th cheapest design found.
        costed: list[tuple[int, int]] = []
        chains: dict[int, float] = {}
        for m in order:
            if len(costed) >= 4 * spec.ranking.top:
                kth = sorted(c for c, _ in costed)[4 * spec.ranking.top - 1]
                if round(float(bound[m]) * 1e4) > kth:
                    break
            if time.perf_counter() - t0 > time_limit_s:
                proven = False
                break
            chain = _cheapest_chain(
                pool.gl[m], pool.gh[m], cap.cost, n, tu.low_hz, tu.high_hz, overlap
            )
            if math.isfinite(chain):
                costed.append((round((float(pool.shared_cost[m]) + chain) * 1e4), int(m)))
                chains[int(m)] = chain
        costed.sort()
        # CP-SAT chooses each finalist's capacitors jointly (at that cost, then evenness), a
        # batch at a time in cost order, until ``top`` designs pass the full-model checks.
        a0, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
        batch = spec.ranking.top
        for start in range(0, len(costed), batch):
            if len(candidates) >= spec.ranking.top:
                break
            if time.perf_counter() - t0 > time_limit_s:
                proven = False
                break
            found: list[tuple[int, int, int, list[int]]] = []
            for _, m in costed[start : start + batch]:
                left = max(time_limit_s - (time.perf_counter() - t0), 0.2)
                chosen = _choose_caps(
                    pool.gl[m],
                    pool.gh[m],
                    cap.cost,
                    n,
                    tu.low_hz,
                    tu.high_hz,
                    overlap,
                    left / 4,
                    chains[m] + 1e-9,
                )
                if chosen is not None:
                    caps, score = chosen
                    total = float(pool.shared_cost[m]) + sum(float(cap.cost[j]) for j in caps)
                    found.append((round(total * 1e4), score % _BIG, m, caps))
            found.sort(key=lambda f: (f[0], f[1], f[2]))
            for total_q, _excess, m, caps in found:
                if len(candidates) >= spec.ranking.top:
                    break
                d = _design(model, pots, pool, m, caps, tu.control)
                checks = _range_checks(d, spec)
                ends = [c[:4] for c in checks]
                if not _covers(ends, tu.low_hz, tu.high_hz, overlap):
                    dropped += 1
                    continue
                if not all(a0 * (1 - ta) <= c[4] and c[5] <= a0 * (1 + ta) for c in checks):
                    amplitude_drops += 1
                    continue
                proxy = _proxy_at(spec, d)
                result = analyse(d, proxy, samples=2000)
                c = candidate(proxy, d, result, len(candidates) + 1, total_q)
                c.tuning = TuningOut(
                    control=tu.control,
                    ranges=[
                        RangeOut(
                            capacitor=f"C{s + 1}",
                            low_hz=lo,
                            high_hz=hi,
                            guaranteed_low_hz=glo,
                            guaranteed_high_hz=ghi,
                        )
                        for s, (lo, hi, glo, ghi) in enumerate(ends)
                    ],
                    dial_law=dial_law(d, spec),
                )
                candidates.append(c)
    infeasible = None
    if not candidates:
        reasons = _reasons(spec, model, pots, combos, count, dropped, amplitude_drops)
        infeasible = Infeasible(reasons=reasons)
    return DesignResult(
        spec=spec,
        candidates=candidates,
        infeasible=infeasible,
        search=SearchInfo(
            engine="enumerate+cpsat-tuning",
            proven_optimal=proven,
            elapsed_s=round(time.perf_counter() - t0, 4),
            combinations=len(combos.u) * len(model.capacitors),
            evaluated=len(combos.u),
            score_resolution=SCORE_RESOLUTION,
            dropped_by_full_model=dropped,
            time_limit_s=time_limit_s,
        ),
        cautions=CAUTIONS,
    )


def _design(
    model: SearchModel, pots: list[Pot], pool: _Combos, m: int, caps: list[int], control: str
) -> Design:
    res = model.resistors.parts
    c = [model.capacitors.parts[j] for j in caps]
    r4: Resistor | None = res[pool.i4[m]] if pool.i4[m] >= 0 else None
    wiper = 0.5
    first: Capacitor = c[0]
    return Design(
        u1=model.opamps[pool.u[m]].part,
        r1=res[pool.i1[m]],
        r2=res[pool.i2[m]],
        r3=res[pool.i3[m]],
        c1=first,
        rv1=pots[pool.v[m]],
        wiper=wiper,
        control=control,  # type: ignore[arg-type]
        r4=r4,
        range_caps=tuple(c[1:]),
    )


def _covers(
    ends: list[tuple[float, float, float, float]], low: float, high: float, overlap: float
) -> bool:
    if not ends or ends[0][2] > low or ends[-1][3] < high:
        return False
    if any(glo >= ghi for _, _, glo, ghi in ends):
        return False
    return all(ends[s][3] >= ends[s + 1][2] * (1 + overlap) for s in range(len(ends) - 1))


def _proxy_at(spec: Spec, design: Design) -> Spec:
    """For the analysis of a tuned design at its wiper: the nominal frequency there as target
    with a ±50 % band, so the yield counts the amplitude band only."""
    f = float(design.oscillator(rails_from_supply(spec.supply)).frequency_hz)
    freq = FrequencySpec(target_hz=f, tolerance_pct=50.0)
    return spec.model_copy(update={"frequency": freq, "tuning": None})


def _reasons(
    spec: Spec,
    model: SearchModel,
    pots: list[Pot],
    combos: _Combos,
    count: NDArray[np.int64],
    dropped: int,
    amplitude_drops: int = 0,
) -> list[str]:
    assert spec.tuning is not None
    tu = spec.tuning
    if not pots:
        return [f"no panel pot (pots.csv, kind panel) with stock for {spec.build.boards} boards"]
    if not any(o.target is not None for o in model.opamps):
        return [
            f"no op amp in the catalog can be used at {tu.high_hz:g} Hz: " + opamp_exclusions(model)
        ]
    if len(model.capacitors) == 0:
        return [
            "no range capacitor (capacitors.csv) of the allowed dielectrics "
            f"({', '.join(spec.limits.dielectrics)}) with stock for {spec.build.boards} boards "
            "and a voltage rating above the triangle peak"
        ]
    if dropped or amplitude_drops:
        out = []
        if amplitude_drops:
            a = spec.triangle
            out.append(
                f"{amplitude_drops} design(s) covered the span, but the triangle leaves "
                f"{a.amplitude_vpp:g} Vpp ±{a.tolerance_pct:g} % somewhere on the dial (the "
                "comparator's overshoot grows with frequency): widen the amplitude band, narrow "
                "the span or allow a faster op amp"
            )
        if dropped:
            out.append(
                f"{dropped} capacitor set(s) covered the span in the search model, but the full "
                "model's spread box opens a gap between ranges"
            )
        return out
    best = int(count.min()) if len(count) else MAX_RANGES + 1
    want = "any number of" if tu.ranges == "auto" else str(tu.ranges)
    ratio = tu.high_hz / tu.low_hz
    text = (
        f"no set of {want} ranges (at most {MAX_RANGES}) covers {tu.low_hz:g}..{tu.high_hz:g} Hz "
        f"(x{ratio:.3g}) with {tu.overlap_pct:g} % overlap at every corner"
    )
    if best <= MAX_RANGES and tu.ranges != "auto":
        text += f"; the fewest that work is {best}"
    return [text]
