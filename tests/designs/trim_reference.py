"""A brute force over the FULL circuit model for trimmed designs (shared by the trimmed
search's tests; not a test module).

Reference, written here and independent of the search's pairs, windows, bounds, probes and
walk: every (U1, R1, R2, R3, C1, RV1) of a small catalog evaluated with
``physics.predict`` (itself checked against ngspice), the trimmer wired in series
(R_eff = R3 + α·RV, ``timing.timing_network``), accepted by the rules the README and
``designs.trimmed.rows`` state: the nominal board (25 °C, nominal rails, op amp as catalogued)
reaches the target inside the margins, f(m) ≥ f_target ≥ f(1 - m); at the nominal wiper α0
(bisection on the full model here) the amplitude lies in its band, the peaks inside the
integrator's swing, its slew covers the slope, the timing share 1 - T_ideal/T is within
``max_timing_share`` and C1's rating covers the peak with the amplitude margin; the drift
after trimming (full model at both temperature ends, wiper at α0) is within the limit; stock
covers the boards (a code in two positions twice) and the cost the cap. Ranked by
(resolution, drift, cost) in the documented integer steps, then stock codes, the resolution
being |d ln f/dα| at α0 from the documented Richardson difference. The box coverage of each,
in that order, comes from the analysis itself (``box_frequency`` at m and 1 - m).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.analysis.worstcase import box_extremes
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.designs.trimmed import design_trimmed
from tristock.search.model import SCORE_RESOLUTION
from tristock.spec.loading import parse_spec
from tristock.spec.model import Spec
from tristock.stock import eseries
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

F64 = NDArray[np.float64]
TIME_LIMIT_S = 120.0
SAMPLES = 200
Ids = tuple[str, ...]


# --------------------------------------------------------------------------------------------
# The brute force


def _eligible_opamp(u: OpAmp, spec: Spec) -> bool:
    s = spec.supply
    span_lo, span_hi = (
        s.span_v * (1 - s.tolerance_pct / 100),
        s.span_v * (1 + s.tolerance_pct / 100),
    )
    return (
        u.supply_min_v <= span_lo
        and span_hi <= u.supply_max_v
        and u.stock >= spec.build.boards * u.packages_per_board
    )


def _period(u: OpAmp, vh: float, vl: float, r1: F64, r2: F64, r: F64, c: F64) -> F64:
    """The nominal board's period (s), the op amp as ``OpAmpModel.from_part``; NaN where the
    integrator error voltage reaches a square level."""
    ve = u.offset_v + u.bias_a * r
    ok = (vh - ve > 0) & (vl + ve > 0)
    out = np.full(len(r), np.nan)
    if ok.any():
        p = predict(r1[ok], r2[ok], r[ok], c[ok], vh, vl, slew_rise=u.slew_v_per_s,
                    slew_fall=u.slew_v_per_s, delay=u.delay_s, gbw=u.gbw_hz,
                    integrator_gbw=u.gbw_hz, vos1=u.offset_v, ib1=u.bias_a, vos2=u.offset_v,
                    ib2=u.bias_a)  # fmt: skip
        out[ok] = p.period_s
    return out


def accepted_rows(
    spec: Spec, catalog: Catalog, choices: dict[str, list[Any]] | None = None
) -> list[tuple[tuple[Any, ...], Design]]:
    """Every combination the rules accept before the box coverage check, ranked; ``choices``
    narrows designators (U1, R1, R2, R3, C1, RV1) to the parts listed."""
    assert spec.trim is not None
    rails = rails_from_supply(spec.supply)
    boards = spec.build.boards
    lim = spec.limits
    f_t = spec.target.target_hz
    t_t = 1.0 / f_t
    m = spec.trim.margin_pct / 100
    ta = spec.triangle.tolerance_pct / 100
    a_t = spec.triangle.amplitude_vpp
    env = spec.environment
    res = [r for r in catalog.resistors if r.stock >= boards]
    caps = [c for c in catalog.capacitors if c.stock >= boards and c.dielectric in lim.dielectrics]
    pots = [p for p in catalog.pots if p.kind == "trimmer" and p.stock >= boards]
    pick = choices or {}
    lists = [[x for x in table if x in pick.get(name, table)]
             for name, table in (("R1", res), ("R2", res), ("R3", res), ("C1", caps),
                                 ("RV1", pots))]  # fmt: skip
    out = []
    grid = np.indices(tuple(len(x) for x in lists)).reshape(5, -1)
    i1, i2, i3, j, v = grid
    r1, r2, r3 = (np.array([r.value_ohm for r in lists[n]])[g] for n, g in enumerate(grid[:3]))
    c = np.array([x.value_f for x in lists[3]])[j]
    rv = np.array([p.value_ohm for p in lists[4]])[v]
    for u in [o for o in catalog.opamps if o in pick.get("U1", catalog.opamps)]:
        if not _eligible_opamp(u, spec):
            continue
        try:
            vh, vl = square_levels(rails, OpAmpModel.from_part(u))
        except ValueError:
            continue
        t_m = _period(u, vh, vl, r1, r2, r3 + m * rv, c)
        t_far = _period(u, vh, vl, r1, r2, r3 + (1 - m) * rv, c)
        n = np.flatnonzero((t_m <= t_t) & (t_far >= t_t))
        if len(n) == 0:
            continue
        # α0 by bisection (T rises with α; checked below on a grid)
        lo, hi = np.full(len(n), m), np.full(len(n), 1 - m)
        for _ in range(80):
            mid = (lo + hi) / 2
            below = _period(u, vh, vl, r1[n], r2[n], r3[n] + mid * rv[n], c[n]) <= t_t
            lo, hi = np.where(below, mid, lo), np.where(below, hi, mid)
        alpha = (lo + hi) / 2
        for x, a0 in zip(n.tolist(), alpha.tolist(), strict=True):
            d = Design(u, lists[0][i1[x]], lists[1][i2[x]], lists[2][i3[x]], lists[3][j[x]],
                       rv1=lists[4][v[x]], wiper=a0)  # fmt: skip
            key = _key(spec, d, vh, vl, m, t_t, a_t, ta, env.temp_min_c, env.temp_max_c)
            if key is not None:
                out.append((key, d))
    out.sort(key=lambda item: item[0])
    return out


def _key(
    spec: Spec, d: Design, vh: float, vl: float, m: float, t_t: float, a_t: float, ta: float,
    t_lo: float, t_hi: float,
) -> tuple[Any, ...] | None:  # fmt: skip
    """The rank key of one design at its wiper, or None when a rule rejects it."""
    assert d.rv1 is not None
    u, lim = d.u1, spec.limits
    one = np.ones(1)
    r1, r2, r3, c, rv = (x * one for x in (d.r1.value_ohm, d.r2.value_ohm, d.r3.value_ohm,
                                           d.c1.value_f, d.rv1.value_ohm))  # fmt: skip
    r_eff = r3 + d.wiper * rv
    p = predict(r1, r2, r_eff, c, vh, vl, slew_rise=u.slew_v_per_s, slew_fall=u.slew_v_per_s,
                delay=u.delay_s, gbw=u.gbw_hz, integrator_gbw=u.gbw_hz, vos1=u.offset_v,
                ib1=u.bias_a, vos2=u.offset_v, ib2=u.bias_a)  # fmt: skip
    ve = u.offset_v + u.bias_a * float(r_eff[0])
    a, b = vh - ve, vl + ve
    rc = float(r_eff[0] * c[0])
    k = d.r1.value_ohm / d.r2.value_ohm
    amp, period = float(p.amplitude_vpp[0]), float(p.period_s[0])
    peak = max(abs(float(p.peak_high_v[0])), abs(float(p.peak_low_v[0])))
    ok = math.log1p(-ta) <= math.log(amp / a_t) <= math.log1p(ta)
    ok &= float(p.peak_high_v[0]) < vh and float(p.peak_low_v[0]) > -vl
    ok &= b / rc <= u.slew_v_per_s and a / rc <= u.slew_v_per_s
    ok &= 1 - (vh + vl) ** 2 * k * rc / (a * b) / period <= lim.max_timing_share
    ok &= d.c1.voltage_v >= peak * (1 + ta)
    ok &= all(p_.stock >= spec.build.boards * n for p_, n in _uses(d))
    ok &= lim.max_cost is None or d.cost_per_board <= lim.max_cost + 1e-12
    if not ok:
        return None
    # f falls along the whole travel (the model's ground for a trim)
    travel = np.linspace(0.0, 1.0, 11)
    t_grid = _period(
        u, vh, vl, r1 * np.ones(11), r2 * np.ones(11), r3 + travel * rv, c * np.ones(11)
    )
    assert np.all(np.diff(t_grid) > 0)
    f25 = 1.0 / period
    drift = 0.0
    for temp in (t_lo, t_hi):

        def at(x: float, tc: float, temp: float = temp) -> F64:
            return np.asarray(x * (1 + tc * 1e-6 * (temp - 25.0))) * one

        r_t = at(d.r3.value_ohm, d.r3.tempco_ppm) + d.wiper * at(d.rv1.value_ohm, d.rv1.tempco_ppm)
        t_temp = _period(u, vh, vl, at(d.r1.value_ohm, d.r1.tempco_ppm),
                         at(d.r2.value_ohm, d.r2.tempco_ppm), r_t,
                         at(d.c1.value_f, d.c1.tempco_ppm or 0.0))  # fmt: skip
        drift = max(drift, abs(1.0 / float(t_temp[0]) / f25 - 1))
    assert spec.trim is not None
    limit = spec.trim.drift_after_trim_pct
    if limit is not None and drift > limit / 100:
        return None

    def slope(h: float) -> float:
        up = _period(u, vh, vl, r1, r2, r_eff * math.exp(h), c)
        down = _period(u, vh, vl, r1, r2, r_eff * math.exp(-h), c)
        return float((math.log(up[0]) - math.log(down[0])) / (2 * h))

    resolution = abs(d.rv1.value_ohm / float(r_eff[0]) * (4 * slope(5e-4) - slope(1e-3)) / 3)
    ids = tuple(x.id for x in (d.u1, d.r1, d.r2, d.r3, d.c1, d.rv1))
    return (round(resolution / SCORE_RESOLUTION), round(drift / SCORE_RESOLUTION),
            round(d.cost_per_board * 1e4), *ids)  # fmt: skip


def _uses(d: Design) -> list[tuple[Any, int]]:
    counts = d.uses()
    parts = {p.id: p for p in d.parts().values()}
    return [(parts[pid], n) for pid, n in counts.items()]


def box_frequency(design: Design, spec: Spec) -> tuple[float, float]:
    """(lowest, highest) frequency over the analysis's spread box: the analysis's own box
    bound (``worstcase.box_extremes``), called from this one place."""
    return box_extremes(design, spec, ("frequency_hz",))["frequency_hz"]


def box_covers(spec: Spec, d: Design) -> bool:
    """Every board of the analysis's box reaches the target inside the margins."""
    assert spec.trim is not None
    m = spec.trim.margin_pct / 100
    try:
        near = box_frequency(dataclasses.replace(d, wiper=m), spec)
        far = box_frequency(dataclasses.replace(d, wiper=1 - m), spec)
    except ValueError:
        return False
    return far[1] <= spec.target.target_hz <= near[0]


def reference(spec: Spec, catalog: Catalog, top: int) -> list[Ids]:
    """The brute force's top ``top`` (stock codes U1, R1, R2, R3, C1, RV1)."""
    out: list[Ids] = []
    for key, d in accepted_rows(spec, catalog):
        if len(out) >= top:
            break
        if box_covers(spec, d):
            out.append(tuple(key[3:]))
    return out


def searched(spec: Spec, catalog: Catalog) -> tuple[list[Ids], bool]:
    result = design_trimmed(spec, catalog, time_limit_s=TIME_LIMIT_S, samples=SAMPLES)
    ids = [tuple(c.parts[d].id for d in ("U1", "R1", "R2", "R3", "C1", "RV1"))
           for c in result.candidates]  # fmt: skip
    return ids, result.search.proven_optimal


# --------------------------------------------------------------------------------------------
# Catalogs


#: Invented op-amp classes (typical of their kind, not any real part).
OPAMPS = (
    OpAmp("TU-J2", 2, 5.0, 36.0, 1.5, 1.5, 13.0, 3e6, 1.2e-6, 3e-3, 3e-11, 0.02, 0.25, 10**4),
    OpAmp("TU-B1", 1, 5.0, 36.0, 1.5, 1.0, 0.5, 1e6, 6e-6, 2e-3, 8e-8, 0.02, 0.12, 10**4),
    OpAmp("TU-R2", 2, 4.0, 36.0, 0.1, 0.1, 5.0, 1e7, 0.8e-6, 0.5e-3, 1e-9, 0.03, 0.6, 10**4),
)


def small_catalog() -> Catalog:
    """19 E12 resistors 2.2 kΩ..68 kΩ, three C0G capacitors, three trimmers, two op amps."""
    values = eseries.values("E12", 2.2e3, 68e3)  # IEC 60063
    res = tuple(Resistor(f"TR-{v:g}", v, 1.0, 100.0, "E12", 0.1, "0603", 0.01, 1000)
                for v in values)  # fmt: skip
    caps = tuple(Capacitor(f"TC-{v:g}", v, "C0G", 2.0, 0.0, None, 50.0, "0805", 0.05, 1000)
                 for v in (2.2e-9, 4.7e-9, 10e-9))  # fmt: skip
    pots = tuple(Pot(f"TV-{v:g}", v, 10.0, 100.0, "trimmer", cost, 1000)
                 for v, cost in ((2e3, 0.5), (5e3, 0.4), (10e3, 0.3)))  # fmt: skip
    return Catalog(Path("<memory>"), res, caps, OPAMPS[:2], pots)


def small_spec(**trim: Any) -> Spec:
    return parse_spec({
        "supply": {"positive_v": 12.0, "negative_v": -12.0, "tolerance_pct": 2.0},
        "frequency": {"target_hz": 5000.0, "tolerance_pct": 0.5},
        "triangle": {"amplitude_vpp": 8.0, "tolerance_pct": 5.0},
        "environment": {"temp_min_c": 0.0, "temp_max_c": 50.0},
        "trim": {"margin_pct": 10.0, **trim},
    })  # fmt: skip
