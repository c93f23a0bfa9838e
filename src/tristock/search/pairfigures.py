"""What a ratio or a divider pair allows: its P window and the floors of its amplitude and
timing-share terms (``search.bounds`` over a ``StageLoop``), and the loops of pairs.

``figures(model, products, loop, k)`` answers, for each element, the P range
[``p_lo``, ``p_hi``] outside which no row through it can meet the frequency band (the
window, cut to what the products R3·C1 can make and to the timing-share limit's floor), the
amplitude's ln(A/A_target) ends over that range and the timing share's floor there, and
``ok``: whether a row can meet the spec at all. The loop is any whose level intervals hold
every row the element stands for: a stage's (``StageOption.loop``: every row of the stage;
the engine's pairs share these per distinct ratio k = R1/R2 and equal loop), or a pair's
(``pair_loops``: the stage's with the intervals of ``SearchForm.pair_levels``, where the
form's ``levels_by_pair`` says the pair narrows them).

Figures of the same rows from two valid loops may be combined by ``narrowed``: the larger
lower ends and the smaller upper ends, each still a bound of every row, so a pair's figures
are never wider than its ratio's.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.searchform import StageLoop
from tristock.search.bounds import p_ceiling, p_floor, range_bounds, share_p_floor, window
from tristock.search.model import SearchModel
from tristock.search.products import ProductIndex

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]

#: The period band is widened by this relative amount before windows are taken, so a row on
#: the band's edge whose computed period rounds differently from the bounds' stays inside.
PERIOD_EDGE = 1e-12


@dataclass
class Figures:
    """Per element (a ratio k of one loop class, or a pair): what its rows allow (module
    docstring); NaN figures where ``ok`` is False."""

    k: F64
    p_lo: F64
    p_hi: F64
    share: F64
    e_a_lo: F64
    e_a_hi: F64
    ok: NDArray[np.bool_]

    def take(self, sel: I64 | NDArray[np.bool_]) -> Figures:
        return Figures(*(getattr(self, n)[sel] for n in FIELDS))

    @staticmethod
    def empty() -> Figures:
        f = np.zeros(0)
        return Figures(f, f, f, f, f, f, np.zeros(0, dtype=bool))

    @staticmethod
    def concat(parts: list[Figures]) -> Figures:
        return Figures(*(np.concatenate([getattr(f, n) for f in parts]) for n in FIELDS))


FIELDS = tuple(Figures.__dataclass_fields__)


def narrowed(a: Figures, b: Figures) -> Figures:
    """The figures of the same rows from two loops that both hold them: each bound the
    tighter of the two (the larger P floor, share floor and amplitude lower end, the smaller
    P ceiling and amplitude upper end), ``ok`` where both are."""
    with np.errstate(invalid="ignore"):
        return Figures(
            a.k,
            np.fmax(a.p_lo, b.p_lo),
            np.fmin(a.p_hi, b.p_hi),
            np.fmax(a.share, b.share),
            np.fmax(a.e_a_lo, b.e_a_lo),
            np.fmin(a.e_a_hi, b.e_a_hi),
            a.ok & b.ok & (np.fmax(a.p_lo, b.p_lo) <= np.fmin(a.p_hi, b.p_hi)),
        )


def band_periods(model: SearchModel) -> tuple[float, float]:
    """The frequency band's shortest and longest periods (s), widened by ``PERIOD_EDGE``."""
    fa, fb = model.band_f
    t_target = 1.0 / model.spec.target.target_hz
    t_min = float(t_target * np.exp(-np.array(fb)) * (1 - PERIOD_EDGE))
    return t_min, float(t_target * np.exp(-np.array(fa)) * (1 + PERIOD_EDGE))


def figures(model: SearchModel, products: ProductIndex, loop: StageLoop, k: F64) -> Figures:
    """The window, amplitude and share floors of ratio ``k[n]`` on loop ``loop[n]``.

    A screen comes first: every row's P lies in [floor, ceiling] (the products' range,
    the timing share's floors ``bounds.share_p_floor`` and ``bounds.p_floor``, and
    ``bounds.p_ceiling``), and the amplitude and share bounds over that range, two
    timings per element, already rule most out; only the others get their window
    (a root search at each end) and their figures. An element ruled out is not ``ok``."""
    spec = model.spec
    ln_min, ln_max = products.ln_min, products.ln_max
    aa, ab = model.band_a
    t_min, t_max = band_periods(model)
    floor = np.maximum(k * math.exp(ln_min), share_p_floor(loop, k, spec.limits.max_timing_share))
    screen_floor = np.maximum(floor, p_floor(loop, t_min, spec.limits.max_timing_share))
    ceiling = np.minimum(k * math.exp(ln_max), p_ceiling(loop, k, t_max))
    e_a_lo, e_a_hi, share = amplitude_logs(model, loop, k, screen_floor, ceiling)
    with np.errstate(invalid="ignore"):
        out = (screen_floor > ceiling) | (e_a_hi < aa) | (e_a_lo > ab)
        out |= share > spec.limits.max_timing_share
    nan = np.full(len(k), np.nan)
    fig = Figures(k, nan, nan.copy(), nan.copy(), nan.copy(), nan.copy(), ~out)
    n = np.flatnonzero(~out)
    if len(n) == 0:
        return fig
    loop, kn = loop.take(n), k[n]
    w = window(loop, kn, np.full(len(kn), t_min), np.full(len(kn), t_max))
    # P outside what the products can make is no use either, nor P below the
    # timing-share limit's floor.
    p_lo, p_hi = np.maximum(w.lo, floor[n]), np.minimum(w.hi, kn * math.exp(ln_max))
    lo, hi, share = amplitude_logs(model, loop, kn, p_lo, p_hi)
    ok = (p_lo <= p_hi) & (hi >= aa) & (lo <= ab)
    ok &= share <= spec.limits.max_timing_share
    for name, value in zip(FIELDS[1:], (p_lo, p_hi, share, lo, hi, ok), strict=True):
        getattr(fig, name)[n] = value
    return fig


def amplitude_logs(
    model: SearchModel, loop: StageLoop, k: F64, p_lo: F64, p_hi: F64
) -> tuple[F64, F64, F64]:
    """ln(A/A_target) at the ends of the amplitude bounds over [p_lo, p_hi], and the
    floor of the timing share there (``bounds.range_bounds``)."""
    amp, share = range_bounds(loop, k, p_lo, p_hi)
    a_t = model.spec.triangle.amplitude_vpp
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.log(amp.lo / a_t), np.log(amp.hi / a_t), share


def r3_range(model: SearchModel) -> tuple[float, float]:
    """The integrator element's eligible values' ends (Ω): what a pair leaves unknown."""
    values = model.resistors.value
    if len(values) == 0:
        return math.inf, -math.inf
    return float(np.min(values)), float(np.max(values))


def pair_levels(model: SearchModel, u: I64, i1: I64, i2: I64) -> F64:
    """The level intervals (vh_lo, vh_hi, vl_lo, vl_hi) of each pair (stage ``u``, R1 ``i1``,
    R2 ``i2``) as an (n, 4) array (``SearchForm.pair_levels`` on the nominal rails, R3 over
    the eligible values); pairs of equal stage and values are computed once."""
    res = model.resistors
    if len(u) == 0:
        return np.zeros((0, 4))
    key = np.stack([u.astype(np.float64), res.value[i1], res.value[i2]], axis=1)
    uniq, back = np.unique(key, axis=0, return_inverse=True)
    found = model.form.pair_levels(
        model.stages, uniq[:, 0].astype(np.int64), uniq[:, 1], uniq[:, 2], r3_range(model),
        model.rails,
    )  # fmt: skip
    return np.stack([np.asarray(x, dtype=np.float64) for x in found], axis=1)[
        np.asarray(back).reshape(-1)
    ]


def pair_loops(model: SearchModel, u: I64, levels: F64) -> StageLoop:
    """The loops of pairs of stage ``u`` with level intervals ``levels`` (an (n, 4) array
    from ``pair_levels``; (n, 0): the stages' own loops)."""
    loop = model.loops(u)
    if levels.shape[1] == 0:
        return loop
    return model.form.pair_loop(loop, (levels[:, 0], levels[:, 1], levels[:, 2], levels[:, 3]))


def loop_classes(loops: StageLoop) -> tuple[I64, I64]:
    """The class of each loop (equal loops, every field bit for bit, NaN equal to NaN, share
    one) and one position of each class."""
    fields = [np.asarray(f, dtype=np.float64) for f in loops]
    n = max((len(f) for f in fields if f.ndim), default=0)
    if n == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    columns = [np.broadcast_to(f, (n,)) for f in fields]
    key = np.stack([np.nan_to_num(c, nan=0.0) for c in columns] + [np.isnan(c) for c in columns])
    _, first, inverse = np.unique(key.T, axis=0, return_index=True, return_inverse=True)
    return np.asarray(inverse, dtype=np.int64).reshape(-1), np.asarray(first, dtype=np.int64)


#: Ratios (or pairs) whose figures are computed in one call, between deadline checks.
RATIO_BATCH = 2048


class RatioTable:
    """The figures of each distinct ratio k = R1/R2 per loop class (``loop_classes``), kept
    sorted by k: stage options of equal loops share them (the figures depend on the loop and
    k alone), e.g. one U1 and U2 with any pull-up R5."""

    def __init__(self, model: SearchModel, products: ProductIndex, loops: StageLoop) -> None:
        self.model = model
        self.products = products
        self.loops = loops
        self.by_class: dict[int, Figures] = {}

    def learn(self, classes: list[tuple[int, F64]], deadline: float) -> bool:
        """Compute the figures of every ratio of ``classes`` ((loop class, ratios) each) that
        no kept one has, all classes together (the bounds are vectorised over loops too), in
        batches between deadline checks; False if the deadline came first."""
        wanted: dict[int, list[F64]] = {}
        for cls, k in classes:
            wanted.setdefault(cls, []).append(k)
        us, ks = [], []
        for cls, parts in wanted.items():
            uk = np.unique(np.concatenate(parts))
            known = self.by_class.get(cls)
            if known is not None and len(known.k):
                at = np.minimum(np.searchsorted(known.k, uk), len(known.k) - 1)
                uk = uk[known.k[at] != uk]
            us.append(np.full(len(uk), cls, dtype=np.int64))
            ks.append(uk)
        if not us:
            return True
        u_all, k_all = np.concatenate(us), np.concatenate(ks)
        fresh: list[Figures] = []
        for start in range(0, len(k_all), RATIO_BATCH):
            if time.perf_counter() > deadline:
                return False
            part = slice(start, start + RATIO_BATCH)
            loop = self.loops.take(u_all[part])
            fresh.append(figures(self.model, self.products, loop, k_all[part]))
        if not fresh:
            return True
        merged = Figures.concat(fresh)
        for cls in np.unique(u_all).tolist():
            new = merged.take(u_all == cls)
            known = self.by_class.get(cls)
            if known is not None:
                new = Figures.concat([known, new])
            self.by_class[cls] = new.take(np.argsort(new.k, kind="stable"))
        return True

    def lookup(self, cls: int, uk: F64) -> Figures:
        """The kept figures of each k in ``uk`` (sorted, distinct, all learnt) of a class."""
        known = self.by_class[cls]
        return known.take(np.searchsorted(known.k, uk))
