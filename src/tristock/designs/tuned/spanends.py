"""The nominal rules at the ends of the span, for every k a combination allows.

The top of the highest range lies at the top of its dial (β = 1, R_eff = R3) at a nominal
P = k·R3·C that is at most some p_top (``bounds``); the bottom of the lowest range at a
nominal P at least some p_bottom. The rules of ``tuning.dial`` that fail at small P must
then hold at some P ≤ p_top, and the amplitude's floor at some P ≥ p_bottom. From
``loopbounds`` (nominal values, the op amp as catalogued, each at the k that is kindest):

- amplitude ≥ k_lo·span + both overshoot floors at p_top (``overshoot_floor``: at most as
  much at every smaller P), which must be ≤ the band's top;
- top peak ≥ VL·k_lo + the smallest threshold shift + the top overshoot's floor, which must
  be below VH;
- each slope, drive·k/P ≥ drive·k_lo/p_top, must be within the slew rate;
- the timing share ≥ ``share_floor`` at p_top, which must be within the limit;
- at the bottom, amplitude ≤ k_hi·span + both overshoot ceilings at p_bottom
  (``overshoot_ceiling``: at least as much at every larger P), which must reach the band's
  floor.

A combination that fails one of them cannot cover the span. ``nominal_ends_ok`` applies the
same rules to one capacitor's range (its P at each end known up to the k range).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.timing import timing_network
from tristock.designs.tuned.corners import Corners, col, corner_tables
from tristock.designs.tuned.dial import Limits
from tristock.designs.tuned.loopbounds import (
    CornerRows,
    overshoot_ceiling,
    overshoot_floor,
    rowwise,
    share_floor,
)
from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.network import dial_ends

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
B = NDArray[np.bool_]


def top_rules_ok(
    rows: CornerRows,
    k_lo: F64,
    k_hi: F64,
    p_top: F64,
    limits: Limits,
    peak: tuple[F64, F64, F64] | None = None,
) -> B:
    """The rules that fail at small P, for some P ≤ ``p_top`` and k in [k_lo, k_hi] (module
    docstring); ``peak`` = (smallest threshold shift, VL, VH) adds the top peak's test."""
    top, bottom = overshoot_floor(rows, k_lo, k_hi, p_top)
    share = share_floor(rows, k_lo, k_hi, p_top)
    rows, p_top, (k_lo, k_hi) = rowwise(rows, p_top, k_lo, k_hi)
    span, slew = rows.span, rows.slew
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        ok = k_lo * span + top + bottom <= limits.a_max
        if peak is not None:
            shift, vl, vh = peak
            ok &= vl * k_lo + shift + top < vh
        ok &= (rows.b * k_lo <= slew * p_top) & (rows.a * k_lo <= slew * p_top)
        ok &= share <= limits.share
    return np.asarray(ok)


def bottom_rules_ok(rows: CornerRows, k_lo: F64, k_hi: F64, p_bottom: F64, limits: Limits) -> B:
    """The amplitude can reach the band's floor at some P ≥ ``p_bottom``."""
    top, bottom = overshoot_ceiling(rows, k_lo, k_hi, p_bottom)
    rows, p_bottom, (k_hi,) = rowwise(rows, p_bottom, k_hi)
    with np.errstate(invalid="ignore", over="ignore"):
        return np.asarray(k_hi * rows.span + top + bottom >= limits.a_min)


def span_end_checks(
    model: TunedModel,
    u: I64,
    k_lo: F64,
    k_hi: F64,
    i3: I64,
    i4: I64,
    v: I64,
    p_top: F64,
    p_bottom: F64,
) -> B:
    """The nominal rules at the largest P the top of the highest range can have, and the
    amplitude floor at the smallest P the bottom of the lowest range can have (module
    docstring), for every k in [k_lo, k_hi]; a NaN P skips that end."""
    res = model.resistors
    assert model.spec.tuning is not None
    control = model.spec.tuning.control
    bottom, top = dial_ends(control)
    limits = Limits.of(model.spec)
    tables = corner_tables(model)["nom"]
    n = len(u)
    rv = np.array([p.value_ohm for p in model.pots])[v]
    r4 = np.where(i4 >= 0, res.value[np.maximum(i4, 0)], 0.0)
    vh = np.array([o.vh for o in model.opamps])[u]
    vl = np.array([o.vl for o in model.opamps])[u]
    vos1, ib1 = col(model, u, "offset_v"), col(model, u, "bias_a")
    vos2, ib2 = col(model, u, "comparator_offset_v"), col(model, u, "comparator_bias_a")
    r_par = res.value.min() / 2  # R1∥R2 ≥ this for any pair
    r_par_hi = res.value.max() / 2
    shift = np.minimum.reduce(
        [(1 + k) * (vos2 + ib2 * r) for k in (k_lo, k_hi) for r in (r_par, r_par_hi)]
    )
    ok = np.ones(n, dtype=bool)
    for alpha, p in ((top, p_top), (bottom, p_bottom)):
        r_eff, beta = timing_network(res.value[i3], rv, alpha, control, r4)
        r_eff = np.asarray(r_eff) * np.ones(n)
        beta = np.asarray(beta) * np.ones(n)
        vd = (vos1 + ib1 * r_eff) / beta
        a, b = vh - vd, vl + vd
        live = np.flatnonzero((a > 0) & (b > 0) & (p > 0) & np.isfinite(p))
        rows = CornerRows(tables, u[live], a[live], b[live])
        k = k_lo[live], k_hi[live]
        if alpha == top:
            peak = shift[live], vl[live], vh[live]
            ok[live] &= top_rules_ok(rows, *k, p[live], limits, peak)
        else:
            ok[live] &= bottom_rules_ok(rows, *k, p[live], limits)
    return ok


def nominal_ends_ok(model: TunedModel, c: Corners, k_a: F64, k_b: F64) -> B:
    """Per (combination, capacitor): whether the nominal rules of ``tuning.dial`` can hold
    at both ends of the dial for some k in [k_a, k_b]: the amplitude at the bottom (P at
    least k_a·(R_eff/β)·C) reaching the band's floor; at the top (P at most k_b·R3·C) the
    rules of ``top_rules_ok`` but the peak's.

    The capacitors are sorted by value, so both P rise with the capacitor's index. A top
    that fails at P fails at every P ≤ it (that is what ``top_rules_ok`` decides), so every
    smaller capacitor fails too; a bottom that fails at P fails for every larger one. A
    bisection over the index per combination therefore marks as failing only capacitors
    that do (exactly those the elementwise test would mark when it is monotone in P), in
    about log2(capacitors) evaluations instead of one per capacitor."""
    limits = Limits.of(model.spec)
    value = model.capacitors.value
    nc = len(value)
    n = len(c.u)
    top_rows, bottom_rows = c.nominal_top, c.nominal_bottom

    def top(j: I64) -> B:
        return top_rules_ok(top_rows, k_a, k_b, c.r3n * value[j] * k_b, limits)

    def bottom(j: I64) -> B:
        return bottom_rules_ok(bottom_rows, k_a, k_b, c.rbn * value[j] * k_a, limits)

    # first: the smallest index whose top can hold; last: the first whose bottom cannot
    first, hi = np.zeros(n, dtype=np.int64), np.full(n, nc, dtype=np.int64)
    lo, last = np.zeros(n, dtype=np.int64), np.full(n, nc, dtype=np.int64)
    while np.any(first < hi) or np.any(lo < last):
        mid = np.minimum((first + hi) // 2, nc - 1)
        good = top(mid)
        open_ = first < hi
        hi = np.where(open_ & good, mid, hi)
        first = np.where(open_ & ~good, mid + 1, first)
        mid = np.minimum((lo + last) // 2, nc - 1)
        good = bottom(mid)
        open_ = lo < last
        last = np.where(open_ & ~good, mid, last)
        lo = np.where(open_ & good, mid + 1, lo)
    j = np.arange(nc)[None, :]
    return np.asarray((j >= first[:, None]) & (j < last[:, None]))
