"""Brute force over the full model for tuned designs, written apart from the search.

Every (U1, R1, R2, R3, RV1[, R4]) of a catalog with every capacitor is checked by the rules
the README states: at nominal values (``Design.oscillator``, i.e. ``circuit.predict``
through ``circuit.timing_network``) at both ends of the dial and at ``DIAL_GRID`` positions
between them (the loop oscillates; amplitude in band; peaks inside the integrator's swing;
integrator slew at least each ramp's slope; timing share within the limit; capacitor rating
over the peak with the amplitude margin); then the spread box of ``worstcase.box_extremes``
at both ends of the dial gives the guaranteed range (and, under ``worst_case``, the
amplitude's extremes). Chains are every set of capacitors (``itertools.combinations``) in
descending value; a design is accepted when its guaranteed ranges cover the span with the
overlap, every range reaches into the span, stock covers the boards (a code in several
positions once per position) and the cost is within the cap. Ranked by fewest ranges (all
answers with the fewest an accepted design has, for "auto"), cost (micro-units), evenness
(largest nominal ln(f_top(Cs)/f_bottom(Cs+1)) - ln(1 + o), to 1e-6), stock codes.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections import Counter
from typing import Any

import numpy as np

from tristock.analysis.worstcase import box_extremes
from tristock.circuits.board import Design, rails_from_supply
from tristock.circuits.rails import OpAmpModel, square_levels
from tristock.search.model import in_series
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

DIAL_GRID = 9


def eligible(
    spec: Spec, catalog: Catalog
) -> tuple[list[OpAmp], list[Resistor], list[Capacitor], list[Pot]]:
    lim, boards = spec.limits, spec.build.boards
    rails = rails_from_supply(spec.supply)
    ops = []
    for o in catalog.opamps:
        if lim.opamps is not None and o.id not in lim.opamps:
            continue
        if o.stock < boards * o.packages_per_board:
            continue
        s = spec.supply
        lo, hi = s.span_v * (1 - s.tolerance_pct / 100), s.span_v * (1 + s.tolerance_pct / 100)
        if lo < o.supply_min_v or hi > o.supply_max_v:
            continue
        try:
            square_levels(rails, OpAmpModel.from_part(o))
        except ValueError:
            continue
        ops.append(o)
    res = [
        r
        for r in catalog.resistors
        if lim.resistance_min_ohm <= r.value_ohm <= lim.resistance_max_ohm
        and (lim.resistor_series is None or in_series(r, lim.resistor_series))
        and r.stock >= boards
    ]
    a_lo = spec.triangle.amplitude_vpp * (1 - spec.triangle.tolerance_pct / 100)
    floor = a_lo / 2 * (1 + spec.triangle.tolerance_pct / 100)
    caps = [
        c
        for c in catalog.capacitors
        if c.dielectric in lim.dielectrics
        and not c.is_polarised
        and c.stock >= boards
        and c.voltage_v >= floor
    ]
    pots = [p for p in catalog.pots if p.kind == "panel" and p.stock >= boards]
    return ops, res, caps, pots


def nominal_ok(spec: Spec, d: Design) -> tuple[bool, float, float]:
    """The nominal rules at the dial's ends and grid; and the nominal f at bottom and top."""
    assert spec.tuning is not None
    rails = rails_from_supply(spec.supply)
    (aa, ab) = spec.amplitude_band_ln
    a0 = spec.triangle.amplitude_vpp
    margin = spec.triangle.tolerance_pct / 100
    bottom, top = (1.0, 0.0) if spec.tuning.control == "series" else (0.0, 1.0)
    wipers = sorted({bottom, top, *np.linspace(0, 1, DIAL_GRID).tolist()})
    f_ends = {}
    for w in wipers:
        at = dataclasses.replace(d, wiper=w)
        try:
            osc = at.oscillator(rails)
            p = osc.prediction()
        except ValueError:
            return False, math.nan, math.nan
        vh, vl = float(p.square_high_v), -float(p.square_low_v)
        m = osc.opamp
        ve = m.offset_v + m.bias_a * osc.r3
        a, b = vh - ve, vl + ve
        if not (a > 0 and b > 0):
            return False, math.nan, math.nan
        amp = float(p.amplitude_vpp)
        if not (a0 * math.exp(aa) <= amp <= a0 * math.exp(ab)):
            return False, math.nan, math.nan
        if not (float(p.peak_high_v) < vh and float(p.peak_low_v) > -vl):
            return False, math.nan, math.nan
        rc = osc.r3 * osc.c1
        if not (b <= m.slew_rise_v_per_s * rc and a <= m.slew_fall_v_per_s * rc):
            return False, math.nan, math.nan
        ideal = (vh + vl) ** 2 * osc.k * rc / (a * b)
        if 1 - ideal / float(p.period_s) > spec.limits.max_timing_share:
            return False, math.nan, math.nan
        peak = max(abs(float(p.peak_high_v)), abs(float(p.peak_low_v)))
        if d.timing_capacitor.voltage_v < peak * (1 + margin):
            return False, math.nan, math.nan
        f_ends[w] = float(p.frequency_hz)
    return True, f_ends[bottom], f_ends[top]


def box(spec: Spec, d: Design) -> tuple[float, float, float, float] | None:
    """(gl, gh, amplitude min, amplitude max) over the box at both ends of the dial."""
    assert spec.tuning is not None
    bottom, top = (1.0, 0.0) if spec.tuning.control == "series" else (0.0, 1.0)
    try:
        lo = box_extremes(dataclasses.replace(d, wiper=bottom), spec)
        hi = box_extremes(dataclasses.replace(d, wiper=top), spec)
    except ValueError:
        return None
    return (
        lo["frequency_hz"][1],
        hi["frequency_hz"][0],
        min(lo["amplitude_vpp"][0], hi["amplitude_vpp"][0]),
        max(lo["amplitude_vpp"][1], hi["amplitude_vpp"][1]),
    )


def reference(spec: Spec, catalog: Catalog) -> list[tuple[Any, ...]]:
    """Rank keys and stock codes of the brute force's top ``spec.ranking.top``:
    (n, cost, evenness, ids)."""
    keyed = accepted(spec, catalog)
    if spec.tuning is not None and spec.tuning.ranges == "auto" and keyed:
        keyed = [k for k in keyed if k[0] == keyed[0][0]]
    return keyed[: spec.ranking.top]


def accepted(spec: Spec, catalog: Catalog) -> list[tuple[Any, ...]]:
    """Every accepted design's (n, cost, evenness, ids), in rank order, any range count."""
    assert spec.tuning is not None
    tu = spec.tuning
    ops, res, caps, pots = eligible(spec, catalog)
    divider = tu.control == "divider"
    low, high, o = tu.low_hz, tu.high_hz, tu.overlap_pct / 100
    a0 = spec.triangle.amplitude_vpp
    (aa, ab) = spec.amplitude_band_ln
    keyed = []
    caps = sorted(caps, key=lambda c: (-c.value_f, c.id))
    r4s: list[Resistor | None] = list(res) if divider else [None]
    for u, r1, r2, r3, pot, r4 in itertools.product(ops, res, res, res, pots, r4s):
        ranges: dict[int, tuple[float, float, float, float]] = {}
        for x, cap in enumerate(caps):
            d = Design(u, r1, r2, r3, cap, rv1=pot, control=tu.control, r4=r4)
            ok, f_bottom, f_top = nominal_ok(spec, d)
            if not ok:
                continue
            b = box(spec, d)
            if b is None:
                continue
            gl, gh, amp_lo, amp_hi = b
            if not (gl < gh and gh >= low and gl <= high):
                continue
            if spec.limits.guarantee == "worst_case" and not (
                a0 * math.exp(aa) <= amp_lo and amp_hi <= a0 * math.exp(ab)
            ):
                continue
            ranges[x] = (gl, gh, f_bottom, f_top)
        usable = sorted(ranges)
        for n in range(1, 9):
            if tu.ranges != "auto" and n != tu.ranges:
                continue
            for chain in itertools.combinations(usable, n):
                values = [caps[x].value_f for x in chain]
                if any(a <= b for a, b in itertools.pairwise(values)):
                    continue
                ends = [ranges[x] for x in chain]
                if ends[0][0] > low or ends[-1][1] < high:
                    continue
                if any(a[1] < b[0] * (1 + o) for a, b in itertools.pairwise(ends)):
                    continue
                d = Design(
                    u, r1, r2, r3, caps[chain[0]], rv1=pot, control=tu.control, r4=r4,
                    range_caps=tuple(caps[x] for x in chain[1:]),
                )  # fmt: skip
                uses = Counter(p.id for p in d.parts().values())
                uses[u.id] = u.packages_per_board
                if any(catalog.get(pid).stock < spec.build.boards * k for pid, k in uses.items()):
                    continue
                cost = sum(
                    round(p.unit_cost * 1e6) * (u.packages_per_board if name == "U1" else 1)
                    for name, p in d.parts().items()
                )
                if spec.limits.max_cost is not None and cost > round(spec.limits.max_cost * 1e6):
                    continue
                even = 0
                if n > 1:
                    worst = max(math.log(a[3] / b[2]) for a, b in itertools.pairwise(ends))
                    even = int(np.rint((worst - math.log1p(o)) / 1e-6))
                ids = (
                    u.id, r1.id, r2.id, r3.id, r4.id if r4 else "", pot.id,
                    *(caps[x].id for x in chain),
                )  # fmt: skip
                keyed.append((n, cost, even, ids))
    keyed.sort()
    return keyed
