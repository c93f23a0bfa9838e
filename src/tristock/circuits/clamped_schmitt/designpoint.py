"""The zener-clamped loop's design point: a rule of the circuit this package builds, and the
square levels it leaves a search stage.

**The rule** (common practice: a zener's voltage and dynamic resistance are specified at its
test current Izt, and a clamp is designed to run near it): over the triangle's range (its
two thresholds) the zener in breakdown carries between ``DESIGN_CURRENT`` (0.5..2) times its
test current, on each side of the square. The currents are the model's own: with the level
line S0 + g·vt (``physics``), I(vt) = I0 + vt·(1/Rl - g/Rth), I0 = |E(Vo, 0) - S0|/Rth the
current with the triangle at the reference (closed form, no root search). A board outside
it is not this circuit: the topology's check reports it as an error (``clamp_design_point``)
and the exact search's rows (``searchform.predict_rows``) are invalid there, both through
``threshold_currents``.

**Levels under the rule** (``design_levels``; notation of ``clamplevels``). The square level
S with U1's output at Vo solves (Vo - S)·G5 + (Vi - S)·G3 + (vt - S)·Gl = I_pair(S), and
the pair's voltage is V(I) = v0 + m·ln I + r·I (``circuits.diode``), so S = V(I) exactly.
With the square high, dS/dvt = g(vt) = Gl/(G5 + G3 + Gl + 1/rd), rd = m/I + r: S rises with
vt, I with S, so rd falls and g falls: S(vt) is concave, below its tangent at vt = 0, the
model's S0 + g0·vt; with the square low S(vt) is convex and |S| likewise below |S0 + g0·vt|.
The model uses the high level over [vt_b, turn_t] and the low over [turn_b, vt_t]
(``physics``: the turns lie past the thresholds by the edges' overshoots), so for a row that
meets the rule:
- lower ends: |S| (exact or linearised) is at least its exact value at the threshold where it
  is least, V(I) with I at least the line's current there (the exact level lies below the
  tangent, so it draws more current), itself ≥ 0.5·Izt: at least V(0.5·Izt);
- upper ends, from the rule: along the line, dS/dI = g/(1/Rl - g/Rth) = rd0, so the line is
  the tangent of the pair's V(I) at I0: S(vt) = V(I0) + rd0·(I(vt) - I0). At the far
  threshold I(vt) ≤ 2·Izt, and I0 ≥ 0.5·Izt (I0 lies between the thresholds' currents);
  V is concave in I, so the tangent at I0 taken at 2·Izt falls as I0 grows: S ≤ V(0.5·Izt)
  + rd(0.5·Izt)·1.5·Izt at both thresholds. Past them, to the turns, the line rises by at
  most g0·(turn - threshold) ≤ G·``turn_v`` (the caller's bound of the turns' reach past the
  thresholds: by the timing share s of a row, (a·d_f + b·d_r)/RC' ≤ k·span·s/(1 - s),
  ``search.bounds.overshoot_fraction_cap`` at the row's own period, so at most
  2·A_max·s/(1 - s) for the rows claimed);
- upper ends, from the loads: |S0| = V(I0) with I0 (at vt = 0, between the thresholds, where
  the linear I(vt) lies between its ends) ≤ 2·Izt, and
  g0 ≤ G = Gl_max/(G5 + G3_min + Gl_max + 1/rd(0.5·Izt)) (g rises with Gl and falls with G3
  and 1/rd, and I0 ≥ 0.5·Izt), so |S0 + g0·v| ≤ V(2·Izt) + G·X for |v| ≤ X; the exact
  level lies below the linearised one.
X bounds the triangle's excursion: a row whose triangle (turn to turn) spans at most twice
the band's largest amplitude A_max, with its centre at (1 + k)·s2 (s2 = Vos2 + Ib2·(R1 ∥ R2),
k = R1/R2 ≤ A_max/span_lo, rows with larger k miss the band), stays within
X = 2·A_max + (1 + A_max/span_lo)·|Vos2| + Ib2·R_max; rows swinging wider are outside the
amplitude band, and the search's run-time guard (``search.rows``) holds every row it
evaluates to the bounds regardless.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.clamped_schmitt.physics import Clamp, ClampPoint
from tristock.circuits.topology import FloatArray, Value

#: The clamp's design point: the zener current over the triangle's range within these
#: multiples of its test current (the rule above).
DESIGN_CURRENT = (0.5, 2.0)


def threshold_currents(
    net: Clamp,
    outputs: tuple[Value, Value],
    rest: tuple[Value, Value],
    thresholds: tuple[Value, Value],
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """(least, most) pair current with the square high (D1 in breakdown), then (least, most)
    with it low (D2), on the model's level line at the triangle's two thresholds
    (``thresholds``, V from the reference): U1's output at +VH / -VL (``outputs``), the
    levels S0 with the triangle at the reference (``rest``: S_H and the magnitude S_L, as
    ``Clamp.level`` gives them) (A)."""
    vh, vl = (np.asarray(x, dtype=float) for x in outputs)
    s_h, s_l = np.asarray(rest[0], dtype=float), -np.asarray(rest[1], dtype=float)
    out: list[FloatArray] = []
    for vo, s0, high in ((vh, s_h, True), (-vl, s_l, False)):
        e0 = net.source(vo, 0.0)
        i0 = (e0 - s0) / net.rth if high else (s0 - e0) / net.rth
        g = net.slope(np.maximum(i0, 1e-18), high)  # a pair at rest: rd large, g = Rth/Rl
        per_volt = 1.0 / net.rl - g / net.rth  # dI/dvt on the line (same sign both sides)
        ends = [i0 + np.asarray(vt, dtype=float) * (per_volt if high else -per_volt)
                for vt in thresholds]  # fmt: skip
        out += [np.minimum(*ends), np.maximum(*ends)]
    return out[0], out[1], out[2], out[3]


def at_design_point(
    currents: tuple[FloatArray, FloatArray, FloatArray, FloatArray], izt1: Value, izt2: Value
) -> NDArray[np.bool_]:
    """Whether ``threshold_currents`` lie within ``DESIGN_CURRENT`` times the test currents
    ``izt1`` (D1, square high) and ``izt2`` (D2, square low)."""
    lo, hi = DESIGN_CURRENT
    least_h, most_h, least_l, most_l = currents
    ok = (least_h >= lo * np.asarray(izt1)) & (most_h <= hi * np.asarray(izt1))
    ok &= (least_l >= lo * np.asarray(izt2)) & (most_l <= hi * np.asarray(izt2))
    return np.asarray(ok)


def design_levels(
    cols: Mapping[str, FloatArray],
    load: Sequence[float | FloatArray],
    at_rest: Sequence[FloatArray] | None = None,
    turn_v: float | FloatArray = np.inf,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """(VH_lo, VH_hi, VL_lo, VL_hi) of every row of each stage that meets the rule (module
    docstring), from the stage's columns (``clamplevels.candidate_columns`` layout) and its
    loads (``clamplevels.LoadRange``: R3 and R1 + R2 ranges, A_max). ``at_rest``, when
    given, is (least, most) |S0| with the square high, then low, over every row of each
    stage (``clamplevels.rest_levels``): the ends are narrowed to them, the lower ones less
    G·X (the exact level moves from S0 at a slope at most G while the current stays at least
    0.5·Izt, which the rule holds from vt = 0 to the thresholds), the upper ones plus it.
    ``turn_v`` (V) bounds how far the turns lie past the thresholds (module docstring): the
    upper ends are then at most the rule's tangent bound plus G·``turn_v``."""
    c = {k: np.asarray(v, dtype=float) for k, v in cols.items()}
    _, r3_hi, rl_lo, rl_hi, a_max = (np.asarray(x, dtype=float) for x in load)
    one = np.ones(np.shape(c["r5"]))
    point = ClampPoint(
        r1=0.5 * rl_lo * one, r2=0.5 * rl_lo * one, r3=r3_hi * one, c1=one, v_pos=one,
        v_neg=-one, **{k: v for k, v in c.items()},
    )  # fmt: skip
    net = Clamp.of(point)
    lo, hi = DESIGN_CURRENT
    gl, g5, g3 = 1.0 / rl_lo, 1.0 / c["r5"], 1.0 / r3_hi
    out: list[FloatArray] = []
    ends = []
    for chain, izt in ((net.up, c["izt1"]), (net.down, c["izt2"])):
        floor = chain.voltage(lo * izt)
        tangent = floor + chain.resistance(lo * izt) * (hi - lo) * izt
        ends.append((floor, chain.voltage(hi * izt), chain.resistance(lo * izt), tangent))
    span_lo = ends[0][0] + ends[1][0]
    reach = 2.0 * a_max + (1.0 + a_max / span_lo) * np.abs(c["vos2"]) + np.abs(c["ib2"]) * rl_hi
    for side, (floor, ceiling, rd_max, tangent) in enumerate(ends):
        g_max = gl / (g5 + g3 + gl + 1.0 / rd_max)
        if at_rest is not None:
            least, most = at_rest[2 * side], at_rest[2 * side + 1]
            floor = np.maximum(floor, least - g_max * reach)
            ceiling = np.minimum(ceiling, most)
        top = np.minimum(ceiling + g_max * reach, tangent + g_max * turn_v)
        out += [np.asarray(floor), np.asarray(np.maximum(top, floor))]
    return out[0], out[1], out[2], out[3]
