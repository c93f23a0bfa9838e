"""Tuned designs as reported: parts, ranges, dial law; and why a spec has none."""

from __future__ import annotations

import dataclasses
import math

from tristock.analysis.bundle import analyse
from tristock.circuits.board import Design, rails_from_supply
from tristock.designs.candidate import candidate
from tristock.designs.results import Candidate, RangeOut, TuningOut
from tristock.designs.tuned.coverage import RangeVerdict, proxy_spec_at
from tristock.designs.tuned.model import MAX_RANGES, TunedModel
from tristock.designs.tuned.network import dial_ends
from tristock.spec.model import Spec
from tristock.stock.parts import Resistor

DIAL_POINTS = 11


def design_from(
    model: TunedModel, row: tuple[int, int, int, int, int, int], chain: tuple[int, ...]
) -> Design:
    """The Design of a combination and a chain (capacitor indices, C1 first), wiper at mid
    travel on C1."""
    assert model.spec.tuning is not None
    u, i1, i2, i3, i4, v = row
    res = model.resistors.parts
    caps = [model.capacitors.parts[j] for j in chain]
    r4: Resistor | None = res[i4] if i4 >= 0 else None
    return Design(
        u1=model.opamps[u].part,
        r1=res[i1],
        r2=res[i2],
        r3=res[i3],
        c1=caps[0],
        rv1=model.pots[v],
        wiper=0.5,
        control=model.spec.tuning.control,
        r4=r4,
        range_caps=tuple(caps[1:]),
    )


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


def tuned_candidate(
    spec: Spec,
    design: Design,
    verdicts: list[RangeVerdict],
    rank: int,
    score: int,
    samples: int,
    seed: int,
) -> Candidate:
    """One answer: the analysis at mid travel on C1 (``coverage.proxy_spec_at``), and every
    range's nominal and guaranteed ends."""
    assert spec.tuning is not None
    proxy = proxy_spec_at(spec, design)
    c = candidate(proxy, design, analyse(design, proxy, samples=samples, seed=seed), rank, score)
    rails = rails_from_supply(spec.supply)
    bottom, top = dial_ends(spec.tuning.control)
    ranges = []
    for s, v in enumerate(verdicts):
        at = dataclasses.replace(design, selected=s)
        lo = float(dataclasses.replace(at, wiper=bottom).oscillator(rails).frequency_hz)
        hi = float(dataclasses.replace(at, wiper=top).oscillator(rails).frequency_hz)
        ranges.append(
            RangeOut(
                capacitor=f"C{s + 1}",
                low_hz=lo,
                high_hz=hi,
                guaranteed_low_hz=v.gl,
                guaranteed_high_hz=v.gh,
            )
        )
    c.tuning = TuningOut(
        control=spec.tuning.control, ranges=ranges, dial_law=dial_law(design, spec)
    )
    return c


def reasons(
    model: TunedModel, fewest_bound: int, dropped: int, fewest_found: int | None
) -> list[str]:
    """Why no design meets the spec, in plain words with the numbers that bind."""
    spec = model.spec
    assert spec.tuning is not None
    tu = spec.tuning
    boards = spec.build.boards
    if not model.pots:
        return [f"no panel pot (pots.csv, kind panel) with stock for {boards} boards"]
    if not model.opamps:
        why = "; ".join(
            f"{e.part_id}: {e.reason}" for e in model.exclusions if e.designator == "U1"
        )
        return [f"no op amp in the catalog can be used on these rails: {why or 'none listed'}"]
    if len(model.capacitors) == 0:
        return [
            "no range capacitor (capacitors.csv) of the allowed dielectrics "
            f"({', '.join(spec.limits.dielectrics)}) with stock for {boards} boards "
            "and a voltage rating above the triangle peak"
        ]
    out = []
    if dropped:
        out.append(
            f"{dropped} design(s) covered the span at the search's corners, but the full "
            "spread box (or the amplitude guarantee) opens a gap"
        )
    want = "any number of" if tu.ranges == "auto" else str(tu.ranges)
    ratio = tu.high_hz / tu.low_hz
    text = (
        f"no set of {want} ranges (at most {MAX_RANGES}) covers {tu.low_hz:g}..{tu.high_hz:g} Hz "
        f"(x{ratio:.3g}) with {tu.overlap_pct:g} % overlap at every corner, the triangle within "
        f"{spec.triangle.amplitude_vpp:g} Vpp ±{spec.triangle.tolerance_pct:g} % and op-amp "
        f"timing within {spec.limits.max_timing_share:.0%} of the period over the whole dial"
    )
    if fewest_found is not None and tu.ranges != "auto":
        text += f"; the fewest that work is {fewest_found}"
    elif fewest_bound > MAX_RANGES:
        text += "; no combination of op amp, pot and resistors makes a usable range"
    out.append(text)
    top = fastest_top(model)
    if top is not None and top[1] < tu.high_hz:
        out.append(
            f"the fastest op amp, {top[0]}, keeps its timing within "
            f"{spec.limits.max_timing_share:.0%} of the period (limits.max_timing_share) only up "
            f"to about {top[1]:.4g} Hz at nominal values, below the {tu.high_hz:g} Hz the top "
            "range must guarantee"
        )
    return out


def fastest_top(model: TunedModel) -> tuple[str, float] | None:
    """The op amp with the highest nominal frequency at which the timing share reaches the
    limit (symmetric drives, the amplitude's k), and that frequency (Hz)."""
    from tristock.search.bounds import loop_timing

    best: tuple[str, float] | None = None
    s = model.spec.limits.max_timing_share
    k = model.spec.triangle.amplitude_vpp
    for o in model.opamps:
        m = o.model
        kk = min(k / (o.vh + o.vl), 0.99)
        lo, hi = 1e-12, 10.0
        for _ in range(200):
            p = math.sqrt(lo * hi)
            lt = loop_timing(
                kk, p, o.vh + o.vl, o.vh, o.vl, slew_rise=m.slew_rise_v_per_s,
                slew_fall=m.slew_fall_v_per_s, delay=m.delay_s, gbw=m.gbw_hz,
            )  # fmt: skip
            if float(lt.timing_share) > s:
                lo = p
            else:
                hi = p
        lt = loop_timing(
            kk, hi, o.vh + o.vl, o.vh, o.vl, slew_rise=m.slew_rise_v_per_s,
            slew_fall=m.slew_fall_v_per_s, delay=m.delay_s, gbw=m.gbw_hz,
        )  # fmt: skip
        f = 1.0 / float(lt.period_s)
        if best is None or f > best[1]:
            best = (o.part.id, f)
    return best
