"""Every range a combination can make, with each capacitor: exact nominal values and corners.

For a batch of combinations and every eligible capacitor this evaluates, with the full
model:

- the search's corners (``network.FAST_BOTTOM`` at the bottom of the dial,
  ``network.SLOW_TOP`` at the top, and under ``worst_case`` the amplitude corners at both
  ends): optimistic range ends gl' ≤ gl and gh' ≥ gh (the verdict's box includes the corners,
  ``coverage``), slackened by 1e-12 so that rounding never drops a range the verdict keeps;
- for the capacitors whose optimistic range reaches into the span, the nominal rules over
  the whole dial (``dial.check_dial``) and the nominal frequencies at both ends.

A capacitor left unusable here cannot take part in an accepted design with this combination.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.designs.tuned.chains import Ranges, reaches_span
from tristock.designs.tuned.dial import Limits, check_dial
from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.network import (
    AMP_HIGH,
    AMP_LOW,
    FAST_BOTTOM,
    SLOW_TOP,
    Shared,
    corner_at,
    dial_ends,
    nominal_board,
)

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]
SLACK = 1e-12


@dataclass
class RangeData:
    """``Ranges`` (optimistic ends) plus, per (combination, capacitor), the corner values as
    computed (Hz, Vpp; NaN where not evaluated), the nominal ends (Hz) and whether the dial
    check was decided at every wiper position (``dial.DialResult.certified``)."""

    ranges: Ranges
    corner_bottom: F64
    corner_top: F64
    amp_high: F64
    amp_low: F64
    f_bottom: F64
    f_top: F64
    certified: NDArray[np.bool_]


def evaluate_ranges(model: TunedModel, sh: Shared, allowed: NDArray[np.bool_]) -> RangeData:
    """Range data of every combination in ``sh`` with every capacitor (module docstring),
    evaluated where ``allowed`` (combinations, capacitors) says the range can count at all
    (``cores.tighten``); the others are unusable, their values NaN."""
    spec = model.spec
    assert spec.tuning is not None
    tu = spec.tuning
    control = tu.control
    bottom, top = dial_ends(control)
    cap = model.capacitors
    nb, nc = len(sh), len(cap)
    flat = sh.take(np.repeat(np.arange(nb), nc))
    j = np.tile(np.arange(nc, dtype=np.int64), nb)
    pair = np.flatnonzero(allowed.reshape(-1))
    f_lo, f_hi = np.full(nb * nc, np.nan), np.full(nb * nc, np.nan)
    for f, corner, alpha in ((f_lo, FAST_BOTTOM, bottom), (f_hi, SLOW_TOP, top)):
        at = corner_at(model, flat.take(pair), j[pair], corner, alpha, control)
        f[pair] = at.pred.frequency_hz
    with np.errstate(invalid="ignore"):
        gl = f_lo * (1 - SLACK)
        gh = f_hi * (1 + SLACK)
        usable = np.isfinite(gl) & np.isfinite(gh) & reaches_span(gl, gh, tu.low_hz, tu.high_hz)
    amp_high = np.full(len(j), np.nan)
    amp_low = np.full(len(j), np.nan)
    if spec.limits.guarantee == "worst_case":
        limits = Limits.of(spec)
        for alpha in (bottom, top):
            idx = np.flatnonzero(usable)
            part = flat.take(idx)
            hi = np.asarray(
                corner_at(model, part, j[idx], AMP_HIGH, alpha, control).pred.amplitude_vpp
            )
            lo = np.asarray(
                corner_at(model, part, j[idx], AMP_LOW, alpha, control).pred.amplitude_vpp
            )
            amp_high[idx] = np.fmax(amp_high[idx], hi)
            amp_low[idx] = np.fmin(amp_low[idx], lo)
            with np.errstate(invalid="ignore"):
                good = (hi <= limits.a_max * (1 + SLACK)) & (lo >= limits.a_min * (1 - SLACK))
            usable[idx[~good]] = False
    f_bottom = np.full(len(j), np.nan)
    f_top = np.full(len(j), np.nan)
    certified = np.ones(len(j), dtype=bool)
    idx = np.flatnonzero(usable)
    if len(idx):
        part = flat.take(idx)
        board = nominal_board(model, part, j[idx])
        dial = check_dial(board, control, (bottom, top), Limits.of(spec), cap.voltage[j[idx]])
        usable[idx[~dial.ok]] = False
        f_bottom[idx] = dial.f_bottom
        f_top[idx] = dial.f_top
        certified[idx] = dial.certified
    shape = (nb, nc)
    return RangeData(
        ranges=Ranges(
            usable=usable.reshape(shape),
            gl=np.where(usable, gl, np.inf).reshape(shape),
            gh=np.where(usable, gh, 0.0).reshape(shape),
            cost=model.capacitor_cost,
            value=cap.value,
        ),
        corner_bottom=f_lo.reshape(shape),
        corner_top=f_hi.reshape(shape),
        amp_high=amp_high.reshape(shape),
        amp_low=amp_low.reshape(shape),
        f_bottom=f_bottom.reshape(shape),
        f_top=f_top.reshape(shape),
        certified=certified.reshape(shape),
    )
