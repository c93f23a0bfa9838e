"""Worst case over the whole spread box: extremes of frequency, amplitude and duty.

The box is every combination of the spread variables the design's topology declares
(``Topology.spread``; for the op-amp Schmitt loop: tolerances, each rail, temperature, op-amp
offsets, bias, slew and delay), each a deviation z in [-1, 1].
An extreme is sought for each of the six objectives max ±ln y, y one of frequency, triangle
amplitude and duty, in three steps (``WorstCase.method``):

1. **Corners.** With n <= ``max_corner_variables`` spread variables all 2^n corners are
   evaluated in one batch ("corners"); beyond that each extreme starts from every variable at
   its better end (one-at-a-time probes) and takes the best single or pair flip while one
   improves it ("local_search").
2. **Balanced swing.** The period goes as (VH + VL)²/(VH·VL), smallest where the two drives
   are equal, so with independent rails the frequency maximum can lie inside the rail box,
   near its diagonal VH - Ve = VL + Ve (Ve the integrator's error voltage). From each of the
   best corners of an extreme, each rail is moved (the other rail at either end) to the point
   where the drives balance: the topology's ``drive_imbalance`` is affine in a rail, so that
   point is exact.
3. **Projected Newton** ("+box" in the method): ``boxnewton.maximise`` from the
   ``CORNER_STARTS`` best corners and ``BALANCED_STARTS`` best balanced points of each
   extreme, all rows batched, over every variable as a continuous one (finite-difference
   gradient and Hessian inside the box, variables pushing out of it held at their bound, a
   projected line search) until no step gains more than 1e-14 in ln y.

What is proven and what is not:

- Every reported extreme is the model's value at the reported setting (a point of the box),
  and is at least as extreme as every corner (all of them up to ``max_corner_variables``) and
  every balanced-swing point examined.
- Ideal switch (no slew, delay, GBW, offset or bias): f = VH·VL/(k·R3·C1·(VH + VL)²) depends on
  the rails only through r = VH/VL, as r/(1 + r)², largest at r = 1 and falling away on both
  sides; over the rail box r runs between its corner values, so the rail extremes of f are a
  corner or the balanced line: steps 1 and 2 alone are exact there. Amplitude (VH + VL)·k and
  duty VL/(VH + VL) are monotone in each rail.
- Part values (no pot): with zero bias current and infinite GBW, a = VH - Ve, b = VL + Ve and
  the switching delays do not depend on R1, R2, R3 or C1. Period and duty depend on them only
  through the ramp term k·(VH + VL)·R3·C1 (the period is affine and increasing in it, the
  duty a ratio of two affine functions of it, so monotone), and the amplitude
  (VH + VL)·k + (overshoot terms)/(R3·C1) rises with k and falls with R3·C1: each part sits
  at an end of its tolerance at every extreme. Temperature moves several values by linear
  factors (1 + tc·ΔT) whose product is not monotone in general (R3 at +50 and C1 at
  -50 ppm/°C make R3·C1 largest at 25 °C, by 2.5e-9·ΔT²): it is searched as a continuous
  variable like the rest.
- With slew, delay, GBW, offsets and bias the objectives are smooth but not concave; step 3 is
  a bounded local optimiser from several starts, which finds a local extreme (every free
  variable stationary, every held one pushing out of the box). That is not a proof of the
  global extreme in general. The tests check it against brute force over the model (a dense
  rail grid times every corner of the other variables).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from tristock.analysis.boxsearch import search_extremes
from tristock.analysis.memo import Memo, box_key
from tristock.analysis.spread import METRICS, SpreadVariable, check_inputs, spread_board
from tristock.circuits.board import AnyBoard
from tristock.spec.model import Spec

FloatArray = npt.NDArray[np.float64]

#: Up to this many spread variables ``worst_case`` evaluates every one of the 2^n corners.
MAX_CORNER_VARIABLES = 12
#: The same for ``box_extremes`` (coverage proofs of trimmed and tuned designs).
BOX_CORNER_VARIABLES = 16
#: The six objectives: (column of METRICS, sign), lo before hi.
_OBJECTIVES = tuple((m, s) for m in range(len(METRICS)) for s in (-1.0, 1.0))


@dataclass(frozen=True)
class WorstCase:
    """Extremes of frequency (Hz), triangle amplitude (Vpp) and duty_high over the spread box.

    ``corners`` maps "<metric>_lo"/"<metric>_hi" (metric one of frequency_hz, amplitude_vpp,
    duty_high) to the setting of every spread variable there, as text ({"R1": "9.9 kΩ
    (-1 %)", "V-": "-9.6 V (-4.05 %)", ...}); a setting may lie inside the box. ``method`` is
    "corners+box" or "local_search+box" (module docstring: first step, then balanced swing and
    projected Newton). ``evaluations`` counts model evaluations. ``deviations`` gives the
    same settings as numbers: the deviation z in [-1, 1] of each of ``variables``, in order
    (``tristock.analysis.spread``; library only, not in ``to_dict``).
    """

    frequency_hz: tuple[float, float]
    amplitude_vpp: tuple[float, float]
    duty_high: tuple[float, float]
    corners: dict[str, dict[str, str]]
    method: str
    variables: tuple[str, ...]
    evaluations: int
    deviations: dict[str, tuple[float, ...]] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency_hz": list(self.frequency_hz),
            "amplitude_vpp": list(self.amplitude_vpp),
            "duty_high": list(self.duty_high),
            "method": self.method,
            "variables": list(self.variables),
            "evaluations": self.evaluations,
            "corners": {k: dict(v) for k, v in self.corners.items()},
        }


def worst_case(
    design: AnyBoard, spec: Spec, *, max_corner_variables: int = MAX_CORNER_VARIABLES
) -> WorstCase:
    """Worst-case extremes of f, triangle amplitude and duty over the spread box (the
    topology's variables: tolerances, rails, temperature, op-amp spread), by corners,
    balanced-swing points and projected Newton (the module docstring says how, and what that
    proves)."""
    return worst_cases([design], spec, max_corner_variables=max_corner_variables)[0]


def worst_cases(
    designs: Sequence[AnyBoard], spec: Spec, *, max_corner_variables: int = MAX_CORNER_VARIABLES
) -> list[WorstCase]:
    """``worst_case`` of each design, the Newton steps of all of them batched (each design's
    answer is the one it gets alone, to the bit).

    The box depends on the board (every field of every part) and on the spec's supply and
    environment only, not on its bands: answers are remembered for the process
    (``REMEMBERED``, ``analysis.memo``), so a board met again under another target is not
    searched again."""
    for design in designs:
        check_inputs(design, spec)
    if isinstance(max_corner_variables, bool) or not isinstance(max_corner_variables, int):
        raise TypeError(f"max_corner_variables: expected an int, got {max_corner_variables!r}")
    if max_corner_variables < 0:
        raise ValueError(f"max_corner_variables: must be >= 0, got {max_corner_variables}")
    keys = [box_key(design, spec, max_corner_variables) for design in designs]
    known = [REMEMBERED.get(key) for key in keys]
    todo = [n for n, wc in enumerate(known) if wc is None]
    problems = [spread_board(designs[n], spec) for n in todo]
    found = search_extremes(problems, _OBJECTIVES, max_corner_variables)
    for n, (_, variables), result in zip(todo, problems, found, strict=True):
        known[n] = wc = _worst_case_of(variables, *result)
        REMEMBERED.put(keys[n], wc)
    return [_copy(wc) for wc in known if wc is not None]


def _copy(wc: WorstCase) -> WorstCase:
    """A copy whose dicts the caller may change without touching the remembered one."""
    corners = {key: dict(setting) for key, setting in wc.corners.items()}
    return dataclasses.replace(wc, corners=corners, deviations=dict(wc.deviations))


#: The worst cases ``worst_cases`` remembers (``analysis.memo``; a few kB each).
REMEMBERED: Memo[WorstCase] = Memo(max_items=4096, max_bytes=64 << 20)


def _worst_case_of(
    variables: list[SpreadVariable], rows: FloatArray, vals: FloatArray, method: str,
    evaluations: int,
) -> WorstCase:  # fmt: skip
    bounds, corners, deviations = {}, {}, {}
    for o, (m, s) in enumerate(_OBJECTIVES):
        key = f"{METRICS[m]}_{'hi' if s > 0 else 'lo'}"
        bounds[key] = float(vals[o])
        corners[key] = {v.name: v.describe(float(rows[o, i])) for i, v in enumerate(variables)}
        deviations[key] = tuple(float(x) for x in rows[o])
    return WorstCase(
        frequency_hz=(bounds["frequency_hz_lo"], bounds["frequency_hz_hi"]),
        amplitude_vpp=(bounds["amplitude_vpp_lo"], bounds["amplitude_vpp_hi"]),
        duty_high=(bounds["duty_high_lo"], bounds["duty_high_hi"]),
        corners=corners,
        deviations=deviations,
        method=method,
        variables=tuple(v.name for v in variables),
        evaluations=evaluations,
    )


def box_extremes(
    design: AnyBoard, spec: Spec, metrics: Sequence[str] = METRICS
) -> dict[str, tuple[float, float]]:
    """(min, max) over the spread box of each of ``metrics`` (frequency_hz, amplitude_vpp,
    duty_high): the search of ``worst_case`` with every corner up to ``BOX_CORNER_VARIABLES``
    variables. The coverage bound of trimmed and tuned designs."""
    (found,) = box_extremes_many([(design, spec)], metrics)
    return found


def box_extremes_many(
    boards: Sequence[tuple[AnyBoard, Spec]], metrics: Sequence[str] = METRICS
) -> list[dict[str, tuple[float, float]]]:
    """``box_extremes`` of several (board, spec), their searches sharing the model's calls
    (``boxsearch.search_extremes``: each gets the answer it gets alone)."""
    for design, spec in boards:
        check_inputs(design, spec)
    unknown = [m for m in metrics if m not in METRICS]
    if unknown or not metrics:
        raise ValueError(f"metrics: expected some of {', '.join(METRICS)}, got {list(metrics)}")
    problems = [spread_board(design, spec) for design, spec in boards]
    wanted = [METRICS.index(m) for m in dict.fromkeys(metrics)]
    objectives = [(m, s) for m in wanted for s in (-1.0, 1.0)]
    return [
        {METRICS[m]: (float(vals[2 * i]), float(vals[2 * i + 1])) for i, m in enumerate(wanted)}
        for _, vals, _, _ in search_extremes(problems, objectives, BOX_CORNER_VARIABLES)
    ]


__all__ = [
    "BOX_CORNER_VARIABLES",
    "MAX_CORNER_VARIABLES",
    "REMEMBERED",
    "WorstCase",
    "box_extremes",
    "box_extremes_many",
    "worst_case",
    "worst_cases",
]
