"""The full model's verdict on a tuned design: guaranteed ranges and the spec's guarantee.

A range's guaranteed ends come from the spread box of ``tristock.analysis`` at each end of
the dial: gl the highest frequency any board has at the bottom (every board reaches down to
it), gh the lowest at the top. ``box_extremes`` is the one call into the analysis for that
(its corner brute force today); the search's own corners (``network.Corner``) are points of
the same box, so each end's extremes are widened to include them: the search filters with
those corners, and this makes its filters relaxations of this verdict whatever method the
analysis uses for the box. A board of the box that cannot oscillate fails the range.

The amplitude follows ``limits.guarantee``: nominal over the whole dial (``tuning.dial``,
always); under "worst_case" also the box extremes at both ends of every range; under "yield"
also the Monte Carlo share of boards in the amplitude band at both ends of every range, each
end counted on its own (``analysis.yield_count`` against a ±50 % window around that end's
nominal frequency, so only the amplitude band decides), at least ``limits.min_yield``.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass

from tristock.analysis.montecarlo import yield_count
from tristock.analysis.worstcase import box_extremes_many
from tristock.circuits.board import Design, rails_from_supply
from tristock.designs.tuned.network import dial_ends
from tristock.spec.model import FrequencySpec, Spec


@dataclass(frozen=True)
class EndExtremes:
    """Frequency (Hz) and amplitude (Vpp) extremes over the box at one end of one range."""

    f_lo: float
    f_hi: float
    a_lo: float
    a_hi: float


def box_extremes(designs: Sequence[Design], spec: Spec) -> list[EndExtremes] | None:
    """The analysis's extremes over the spread box of each design at its wiper and range,
    searched together (``worstcase.box_extremes_many``: each the answer it gets alone); None
    when some board of some box cannot oscillate (the model then refuses the whole call, as
    it refuses the one end alone). The single place the box method is chosen."""
    metrics = ("frequency_hz", "amplitude_vpp")
    try:
        found = box_extremes_many([(d, spec) for d in designs], metrics)
    except ValueError:
        return None
    ends = []
    for ext in found:
        (f_lo, f_hi), (a_lo, a_hi) = ext["frequency_hz"], ext["amplitude_vpp"]
        if not all(math.isfinite(x) for x in (f_lo, f_hi, a_lo, a_hi)):
            return None
        ends.append(EndExtremes(f_lo, f_hi, a_lo, a_hi))
    return ends


@dataclass(frozen=True)
class RangeVerdict:
    """One range: guaranteed ends (Hz), amplitude extremes over both ends (Vpp), and whether
    the box could be evaluated at all."""

    gl: float
    gh: float
    a_lo: float
    a_hi: float
    ok: bool


def range_verdicts(
    designs: Sequence[Design],
    spec: Spec,
    selected: int,
    probes: Sequence[tuple[float, float, float, float]],
) -> list[RangeVerdict]:
    """Guaranteed ends of range ``selected`` of each design, their boxes searched together
    (each the answer it gets alone; one design at a time when some box cannot oscillate, so
    that only its own range fails). ``probes`` are the search's corner values (frequency at
    the bottom corner, at the top corner, amplitude high, amplitude low; NaN when not
    evaluated), which widen the box's extremes (module docstring)."""
    assert spec.tuning is not None
    bottom, top = dial_ends(spec.tuning.control)
    boards = [
        dataclasses.replace(d, selected=selected, wiper=w) for d in designs for w in (bottom, top)
    ]
    ends = box_extremes(boards, spec)
    if ends is None and len(designs) > 1:
        return [
            range_verdicts([d], spec, selected, [p])[0]
            for d, p in zip(designs, probes, strict=True)
        ]
    if ends is None:
        return [RangeVerdict(math.inf, 0.0, math.nan, math.nan, False)]
    return [_widened(ends[2 * i], ends[2 * i + 1], p) for i, p in enumerate(probes)]


def _widened(
    lo: EndExtremes, hi: EndExtremes, probes: tuple[float, float, float, float]
) -> RangeVerdict:
    f_bottom, f_top, a_big, a_small = probes
    gl = max(lo.f_hi, f_bottom) if math.isfinite(f_bottom) else lo.f_hi
    gh = min(hi.f_lo, f_top) if math.isfinite(f_top) else hi.f_lo
    a_hi = max(lo.a_hi, hi.a_hi, a_big) if math.isfinite(a_big) else max(lo.a_hi, hi.a_hi)
    a_lo = min(lo.a_lo, hi.a_lo, a_small) if math.isfinite(a_small) else min(lo.a_lo, hi.a_lo)
    return RangeVerdict(gl, gh, a_lo, a_hi, True)


def amplitude_guaranteed(spec: Spec, verdict: RangeVerdict) -> bool:
    """Under ``worst_case``: the amplitude's box extremes inside the band (nominal and yield
    are decided elsewhere)."""
    if spec.limits.guarantee != "worst_case":
        return True
    a0 = spec.triangle.amplitude_vpp
    (aa, ab) = spec.amplitude_band_ln
    return a0 * math.exp(aa) <= verdict.a_lo and verdict.a_hi <= a0 * math.exp(ab)


def proxy_spec_at(spec: Spec, design: Design) -> Spec:
    """For the analysis of a tuned board at its wiper and range: the nominal frequency there
    as the target with a ±50 % band, so a yield counts the amplitude band."""
    f = float(design.oscillator(rails_from_supply(spec.supply)).frequency_hz)
    freq = FrequencySpec(target_hz=f, tolerance_pct=50.0)
    return spec.model_copy(update={"frequency": freq, "tuning": None})


def yield_holds(spec: Spec, design: Design, selected: int, samples: int, seed: int) -> bool:
    """Under ``yield``: the amplitude yield at both ends of range ``selected``."""
    if spec.limits.guarantee != "yield":
        return True
    assert spec.tuning is not None
    allowed = math.floor((1.0 - spec.limits.min_yield) * samples + 1e-9)
    for wiper in dial_ends(spec.tuning.control):
        at = dataclasses.replace(design, selected=selected, wiper=wiper)
        proxy = proxy_spec_at(spec, at)
        try:
            passed, exact = yield_count(at, proxy, samples=samples, seed=seed, max_failures=allowed)
        except ValueError:
            return False
        if not exact or passed < spec.limits.min_yield * samples:
            return False
    return True
