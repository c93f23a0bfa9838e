"""The full model's last word on one trimmed design: coverage over the spread box, drift.

``covers_many`` is the one place the trimmed search asks the analysis for the extremes of
the frequency over its spread box (every tolerance, each rail, temperature, op-amp offsets,
bias, slew and delay): ``worstcase.box_extremes`` (every corner, the balanced-rail points and
a bounded search inside the box). The search's probes are corners of that box, so they are
necessary conditions of it.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

from scipy.optimize import brentq

from tristock.analysis.worstcase import box_extremes_many
from tristock.circuits.board import Design, rails_from_supply
from tristock.spec.model import Spec


def coverage(design: Design, spec: Spec) -> tuple[float, float]:
    """(highest f any board of the box has at wiper 1 - m, lowest f any has at wiper m), Hz.
    Every board can be trimmed to the target inside the margins when the first is at or below
    the target and the second at or above it (f is continuous in the wiper)."""
    ((reach, _),) = covers_many([(design, spec)])
    if math.isnan(reach[0]):
        raise ValueError("some board of the spread box cannot oscillate")
    return reach


def covers(design: Design, spec: Spec) -> tuple[bool, tuple[float, float]]:
    """Whether every board of the box reaches the target inside the margins, and the reach
    (``coverage``; NaN where a board of the box cannot oscillate, which fails)."""
    ((reach, ok),) = covers_many([(design, spec)])
    return ok, reach


def covers_many(
    designs: Sequence[tuple[Design, Spec]],
) -> list[tuple[tuple[float, float], bool]]:
    """(reach, whether it covers the target) of each (design, spec), as ``covers`` gives it:
    the box searches at both wipers of every design share the model's calls
    (``worstcase.box_extremes_many``, each the answer it gets alone). A batch in which some
    board cannot oscillate is redone a design at a time, so only that design fails."""
    wipers = []
    for design, spec in designs:
        assert spec.trim is not None
        m = spec.trim.margin_pct / 100
        wipers += [(dataclasses.replace(design, wiper=1 - m), spec),
                   (dataclasses.replace(design, wiper=m), spec)]  # fmt: skip
    try:
        boxes = box_extremes_many(wipers, ("frequency_hz",))
    except ValueError:
        if len(designs) == 1:
            return [((math.nan, math.nan), False)]
        return [found for one in designs for found in covers_many([one])]
    out = []
    for n, (_, spec) in enumerate(designs):
        reach = (boxes[2 * n]["frequency_hz"][1], boxes[2 * n + 1]["frequency_hz"][0])
        target = spec.target.target_hz
        out.append((reach, reach[0] <= target <= reach[1]))
    return out


def drift_after_trim(design: Design, spec: Spec) -> float:
    """max |f(T)/f(25 °C) - 1| over the two temperature ends with the wiper where it is (the
    full model, ``Design.oscillator``; rails nominal, op amp as catalogued)."""
    env = spec.environment
    rails = rails_from_supply(spec.supply)
    f25 = float(design.oscillator(rails, 25.0).frequency_hz)
    ends = (env.temp_min_c, env.temp_max_c)
    return max(abs(float(design.oscillator(rails, t).frequency_hz) / f25 - 1) for t in ends)


def nominal_wiper(design: Design, spec: Spec) -> float | None:
    """The wiper in [0, 1] where the nominal board (``Design.oscillator`` at 25 °C, nominal
    rails) runs at the target, or None when the trimmer's travel does not reach it."""
    rails = rails_from_supply(spec.supply)
    target = spec.target.target_hz

    def error(alpha: float) -> float:
        try:
            f = float(dataclasses.replace(design, wiper=alpha).oscillator(rails).frequency_hz)
        except ValueError:
            return math.nan
        return math.log(f / target)

    lo, hi = error(0.0), error(1.0)
    if not (lo >= 0 >= hi):
        return None
    if lo == 0:
        return 0.0
    return float(brentq(error, 0.0, 1.0, xtol=1e-15, rtol=1e-15))


def frequency_range(design: Design, spec: Spec) -> list[float]:
    """Nominal frequency (Hz) with all of RV1 added (wiper 1) and none (wiper 0)."""
    rails = rails_from_supply(spec.supply)
    return [
        float(dataclasses.replace(design, wiper=w).oscillator(rails).frequency_hz)
        for w in (1.0, 0.0)
    ]
