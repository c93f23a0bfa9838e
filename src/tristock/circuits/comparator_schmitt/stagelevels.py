"""The square levels of a comparator-IC stage over every row it can be in: the level intervals
of its ``StageLoop`` (``searchform``). Volts from the reference node.

U2's low state holds the square at -L, L = Vref - (V- + VOL), for every row. Its high state:

- push-pull: Hs = V+ - headroom - Vref, the same for every row (equal interval ends);
- open drain: the pull-up R5 from V+ (Hs = V+ - Vref) into the load, R3 to the integrator's
  input (at Vos1) and R1 + R2 to the triangle vt: the level v_high(vt) = vs0 + γ·vt of
  ``physics.high_level``, the mean of Hs, Vos1 and vt weighted by 1/R5, 1/R3, 1/(R1 + R2).

The bounds (``search.bounds``) take the span VH + VL and the drives a = VH - Ve, b = VL + Ve
as independent inputs over boxes. Written out, the open-drain period is T = t1 + d_f + t_L
(``physics``): the high ramp t1 from the top turn v_top down to the bottom threshold th_lo,
the fall delay d_f during which the triangle drifts on at the decaying rate
(v_high(vt) - Ve)/RC', and the low ramp. Term by term against the bounds' period, the
interval [vh_lo, vh_hi] must hold, for every row:

- the level that sets the thresholds' distance k·(L + H_lo), H_lo = v_high(th_lo) =
  (Hs/R5 + Vos1/R3 + Vos2/R2 + Ib2·R1/(R1 + R2))/(1/R5 + 1/R3 + 1/R2) (at the trip U2's
  + input sits at its threshold, so R2 loads the square node to it);
- the high ramp's drive, from v_high(v_top) - Ve down to H_lo - Ve (vh_hi, vh_lo);
- the mean drive over d_f, at least (H_lo - Ve)·(1 - e^(-x))/x, x = γ·d_f/RC' (the rate
  decays as e^(-γ·t/RC') there): vh_lo - Ve_hi must not exceed it.

So vh_hi = Hs: v_high ≤ Hs while vt ≤ Hs, a weighted mean, and a valid row's triangle stays
inside U1's output range (``searchform``'s rows are invalid otherwise). And vh_lo = Ve_hi +
(H_lo,min - Ve_hi)·(1 - e^(-x_max))/x_max: H_lo,min over R2, R3 in [r_lo, r_hi] with the
offsets at 0 V or as catalogued (H_lo is linear-fractional in the conductances and linear in
the offsets, so its extremes sit at the box's vertices); x_max from the timing-share limit s:
d_f ≤ T - T_i ≤ T_i·s/(1 - s), T_i ≤ k·span·RC·(1/(H_lo - Ve) + 1/b), and k·span is at most
the triangle's peak-to-peak, at most U1's output range R_U1, so x ≤ s/(1 - s)·γ_max·R_U1·
(1/(H_lo,min - Ve_hi) + 1/(L + Ve_lo)), γ_max = g12/(1/R5 + g12 + 1/r_hi) with g12 =
1/(2·r_lo). A row whose share exceeds s cannot be accepted; the bounds are claimed for rows
within it. VL's interval is L at both ends.

Ve_lo, Ve_hi here are over R3 in [r_lo, r_hi] with Vos1 at 0 V or as catalogued: they hold
the Ve range of the stage's ``StageLoop`` and of the probes' loops, so the weak drive those
give, vh_lo less their Ve_hi, is at most every row's.

Where H_lo,min ≤ Ve_hi (a weak pull-up the heaviest loads can stall; or L + Ve_lo ≤ 0) no
drive is bounded away from 0 over the box: vh_lo sits a hair (``STALLED_DRIVE``) above the
Ve_hi the bounds take (the loop's own at nominal, the probes' largest Ib1·R3 at the probes),
so the weak drive makes the period's upper bound unbounded in effect, and VL's interval
reaches down to vl_lo = L + H_lo,min - vh_lo so that the span's lower end is L + H_lo,min
(each drive's interval only widens: b's lower end falls, its upper end stays L + Ve_hi; the
fall delay's term needs vh_lo - Ve_hi - (L - vl_lo) = H_lo,min - Ve_hi ≤ 0 ≤ the drift). A
row's VH can then lie below vh_lo; the span and the drives, what the bounds take, hold.

At the probes (``level_bounds``) the box is widened by the resistors' moves and x by the
probes' longer delays (``DELAY_SPREAD``); their timing share is not limited as the nominal
row's is, so x_max there is an estimate.

The stiffness rule (``PULL_UP_LOAD_SHARE`` ρ, part of the rows' acceptance) bounds the
load: g3 + g2 ≤ ρ·g5, so H_lo ≥ (Hs + ρ·min(0, Vos1, Vos2))/(1 + ρ) whatever R5
(``stiff_threshold_level``) and γ < ρ; a stage's interval is then about ρ/(1 + ρ) of Hs wide
and equal for every R5 of one U1 and U2 (the search shares their pair figures).

With the square high, U1's integrator sees R3 + R5 ∥ (R1 + R2), so its ramp is faster by
(1 + ε_lo)/(1 + ε_hi) and its lag longer than the single RC' and lag of
``looptiming.loop_timing`` (ε = 1/(2π·GBW·R3·C1)): under the rule ``high_state_factors``
folds both into the intervals (vh_hi up, vh_lo's drive down, vl_hi up). Without the rule
(ρ = inf: the form's tests of the bare model) they are not covered; the run-time guard of
``search.rows`` withdraws a proof if they matter.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import product

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.rails import Rails
from tristock.spec.model import Spec
from tristock.stock.comparators import Comparator
from tristock.stock.parts import OpAmp, Resistor

F64 = NDArray[np.float64]

#: Where the heaviest load can stall the high ramp, vh_lo sits this share of Hs above Ve_hi.
STALLED_DRIVE = 1e-9

#: The open-drain stiffness rule ρ, a design rule that defines the circuit searched (common
#: practice for a stiff pull-up, not a model limit): R5·(1/R3 + 1/R2) ≤ ρ, i.e. R5 at most ρ
#: times R3 ∥ R2, the load on the square node as U2 trips (R3 to the integrator's input and R2
#: to U2's + input, both at the reference then). The load then draws at most ρ of the
#: pull-up's current into a short, Hs/R5, and the high level stays within about ρ/(1 + ρ) of
#: Hs. A row that breaks it is not accepted (``searchform``, the check ``pull_up_load``).
PULL_UP_LOAD_SHARE = 0.1


def meets_pull_up_rule(r5: F64 | float, r2: F64 | float, r3: F64 | float) -> NDArray[np.bool_]:
    """Whether rows with pull-up ``r5`` (Ω; 0: push-pull, always True), R2 and R3 meet the
    stiffness rule R5·(1/R3 + 1/R2) ≤ ``PULL_UP_LOAD_SHARE``."""
    with np.errstate(divide="ignore", invalid="ignore"):
        load = np.asarray(r5) * (1.0 / np.asarray(r3) + 1.0 / np.asarray(r2))
    return np.asarray(load <= PULL_UP_LOAD_SHARE)


@dataclass(frozen=True)
class LoadBox:
    """What an open-drain stage's rows can load R5 with: R2 and R3 each in [r_lo, r_hi] (Ω),
    R1 + R2 at least 2·r_lo; R3 in [r3_lo, r3_hi] (the integrator resistors a row can take:
    what Ve = Vos1 + Ib1·R3 spans); ``spread`` the largest fractional move of a resistor at
    the worst-case probes (tolerance and tempco over the temperature range); ``max_share``
    the spec's timing-share limit s; ``max_load`` the largest R5·(1/R3 + 1/R2) a row can
    have (the stiffness rule's ρ at nominal values; inf: no rule)."""

    r_lo: float
    r_hi: float
    r3_lo: float
    r3_hi: float
    spread: float
    max_share: float
    max_load: float = math.inf

    def at_probes(self) -> LoadBox:
        """The box at the worst-case probes: every resistance moved by up to ``spread`` (R5
        down while R2, R3 go up, or the reverse: ρ by up to (1 + spread)²)."""
        up, down = 1.0 + self.spread, 1.0 / (1.0 + self.spread)
        return LoadBox(
            self.r_lo * down, self.r_hi * up, self.r3_lo * down, self.r3_hi * up, 0.0,
            self.max_share, self.max_load * up * up,
        )  # fmt: skip


def load_box(spec: Spec, values: F64, r3: F64, resistors: Sequence[Resistor]) -> LoadBox:
    """The spec's resistance range widened to hold ``values`` (Ω: the eligible values, or a
    board's own), R3 over ``r3`` (the eligible values, or the board's R3), the largest probe
    move of ``resistors`` over the spec's temperatures."""
    lim, env = spec.limits, spec.environment
    span_t = max(abs(env.temp_min_c - 25.0), abs(env.temp_max_c - 25.0))
    spread = max(
        ((1 + r.tolerance_pct / 100) * (1 + abs(r.tempco_ppm) * 1e-6 * span_t) - 1.0
         for r in resistors),
        default=0.0,
    )  # fmt: skip
    held = np.asarray(values, dtype=float).tolist()
    return LoadBox(
        min([lim.resistance_min_ohm, *held]), max([lim.resistance_max_ohm, *held]),
        float(np.min(r3)), float(np.max(r3)), spread, lim.max_timing_share, PULL_UP_LOAD_SHARE,
    )  # fmt: skip


def sources(u2: Comparator, rails: Rails) -> tuple[float, float]:
    """(Hs, L): U2's high source (push-pull V+ - headroom, open drain V+, less Vref) and its
    low level's distance below the reference, L = Vref - (V- + VOL) (V)."""
    ref = rails.reference_v
    return rails.v_pos - (u2.voh_headroom_v or 0.0) - ref, ref - (rails.v_neg + u2.vol_v)


def opamp_range(u1: OpAmp, rails: Rails) -> tuple[float, float]:
    """U1's output range (V from the reference): V- + swing_neg .. V+ - swing_pos."""
    ref = rails.reference_v
    return rails.v_neg + u1.swing_neg_v - ref, rails.v_pos - u1.swing_pos_v - ref


def threshold_level(
    hs: F64 | float, g5: float, g3: F64 | float, g2: float, vos1: float, vos2: float,
    beta_ib2: float,
) -> F64 | float:  # fmt: skip
    """H_lo: the open-drain high level as the triangle crosses the bottom threshold (module
    docstring), from Hs (V) and the conductances 1/R5, 1/R3, 1/R2 (S); ``beta_ib2`` = Ib2·R1/
    (R1 + R2) (A)."""
    return (hs * g5 + vos1 * g3 + vos2 * g2 + beta_ib2) / (g5 + g3 + g2)


def load_vertices(g5: float, box: LoadBox) -> list[tuple[float, float]]:
    """The corners (1/R3, 1/R2) of the loads a row can put on the square node: R2, R3 in
    [r_lo, r_hi] cut by the stiffness rule g3 + g2 ≤ ρ·g5 (``LoadBox.max_load``); empty when
    no row meets the rule."""
    lo, hi, cap = 1.0 / box.r_hi, 1.0 / box.r_lo, box.max_load * g5
    corners = [(g3, g2) for g3 in (lo, hi) for g2 in (lo, hi) if g3 + g2 <= cap]
    corners += [(g, cap - g) for g in (lo, hi) if lo <= cap - g <= hi]
    corners += [(cap - g, g) for g in (lo, hi) if lo <= cap - g <= hi]
    return corners


def lowest_threshold_level(hs: float, g5: float, box: LoadBox, u1: OpAmp, u2: Comparator) -> float:
    """H_lo,min over the vertices of the loads (``load_vertices``: H_lo is linear-fractional
    in the conductances with a positive denominator, so its extremes over a polygon sit at
    its corners) and the offsets: Vos1, Vos2 at 0 V or as catalogued, Ib2·R1/(R1 + R2) at 0 or
    Ib2; inf where no row meets the rule."""
    loads = load_vertices(g5, box)
    offsets = product(loads, (0.0, u1.offset_v), (0.0, u2.offset_v), (0.0, u2.bias_a))
    return min(
        (float(threshold_level(hs, g5, *g, *rest)) for g, *rest in offsets), default=math.inf
    )


def stiff_threshold_level(hs: float, rho: float, u1: OpAmp, u2: Comparator) -> float:
    """A lower end of H_lo over every row that meets the stiffness rule g3 + g2 ≤ ρ·g5,
    whatever R5 (so the open-drain stages of one U1 and U2 share their loop):
    (Hs + ρ·m)/(1 + ρ), m = min(0, Vos1, Vos2) (V). With w = (g3 + g2)/g5 ≤ ρ, Ib2 ≥ 0
    (β ≥ 0) and Vos1·g3 + Vos2·g2 ≥ m·(g3 + g2), H_lo ≥ (Hs + m·w)/(1 + w), which falls
    with w while Hs > m."""
    m = min(0.0, u1.offset_v, u2.offset_v)
    return (hs + rho * m) / (1.0 + rho)


def error_voltage_range(u1: OpAmp, box: LoadBox) -> tuple[float, float]:
    """Ve = Vos1 + Ib1·R3 over R3 in [r_lo, r_hi], Vos1 at 0 V or as catalogued: a range that
    holds every Ve the bounds take, at the nominal rails and the probes."""
    ib = (u1.bias_a * box.r_lo, u1.bias_a * box.r_hi)
    return min(0.0, u1.offset_v) + min(ib), max(0.0, u1.offset_v) + max(ib)


def probe_error_voltage(u1: OpAmp, box: LoadBox) -> float:
    """The largest Ve the worst-case probes give the bounds: Ib1·R3 (offsets at 0 V) over R3
    in the probes' box (``search.guarantee.probe_loop``)."""
    probed = box.at_probes()
    return max(u1.bias_a * probed.r3_lo, u1.bias_a * probed.r3_hi)


def threshold_level_floor(
    u1: OpAmp, u2: Comparator, pull_up_ohm: float, box: LoadBox, rails: Rails
) -> float:
    """H_lo,min: a lower end of the high level at the bottom threshold over every row of the
    stage (V from the reference): Hs for push-pull (``pull_up_ohm`` 0); open drain
    ``stiff_threshold_level`` under the stiffness rule (Ib2 ≥ 0), else
    ``lowest_threshold_level``."""
    hs, _ = sources(u2, rails)
    if not pull_up_ohm > 0.0:
        return hs
    if math.isfinite(box.max_load) and u2.bias_a >= 0.0:
        return stiff_threshold_level(hs, box.max_load, u1, u2)
    return lowest_threshold_level(hs, 1.0 / pull_up_ohm, box, u1, u2)


def open_drain_levels(
    u1: OpAmp, u2: Comparator, pull_up_ohm: float, box: LoadBox, rails: Rails,
    ve_hi: float, delay_margin: float = 1.0,
) -> tuple[float, float, float, float]:  # fmt: skip
    """(vh_lo, vh_hi, vl_lo, vl_hi) of an open-drain stage on ``rails`` (module docstring):
    ``ve_hi`` the Ve upper end the bounds take (a stalled stage's vh_lo sits just above
    it), ``delay_margin`` how much longer the fall delay may be than at nominal."""
    hs, low = sources(u2, rails)
    h_min = threshold_level_floor(u1, u2, pull_up_ohm, box, rails)
    box_lo, box_hi = error_voltage_range(u1, box)
    a0, b0 = h_min - box_hi, low + box_lo
    tiny = STALLED_DRIVE * abs(hs)
    if not (a0 > 0.0 and b0 > 0.0):
        vh_lo = min(ve_hi + tiny, hs)
        return vh_lo, hs, max(min(low, h_min + low - vh_lo), tiny - box_lo), low
    x = delay_margin * fall_delay_exponent(u1, pull_up_ohm, box, rails, a0, b0)
    mean = -math.expm1(-x) / x if x > 0.0 else 1.0
    vh_lo = max(box_hi + a0 * mean, box_hi + tiny)
    if not math.isfinite(box.max_load):
        return vh_lo, hs, low, low
    ramp, lag, weak = high_state_factors(u1, u2, box)
    return (
        box_hi + (vh_lo - box_hi) / weak, box_lo + (hs - box_lo) * ramp, low,
        (low + box_hi) * lag - box_hi,
    )  # fmt: skip


def high_state_factors(u1: OpAmp, u2: Comparator, box: LoadBox) -> tuple[float, float, float]:
    """(f_ramp, f_lag, f_weak) ≥ 1 that fold the integrator's high state into the single RC'
    and lag of ``looptiming.loop_timing`` (module docstring), for rows that meet the
    stiffness rule (w = R5·(1/R3 + 1/R2) ≤ ρ) within the timing-share limit (ε ≤ ε_m =
    s/(1 - s)), whatever R5.

    With the square high U1 sees R3 + r_node, r_node = R5 ∥ (R1 + R2) ≤ w·R3, so ε_hi ≥
    ε/(1 + w): RC'_lo/RC'_hi = (1 + ε)/(1 + ε_hi) ≤ (1 + ε_m)(1 + ρ)/(1 + ρ + ε_m) =
    f_ramp (rising in ε and w), and the lag τi_hi = 1/(ωt·(1 + ε_hi)) exceeds τi_lo by
    Δ ≤ ε_m·ρ/((1 + ρ)·ωt). The high ramp at drive a over RC'_hi is the ramp at a·f_ramp
    over RC'_lo, so vh_hi moves to Ve_lo + (Hs - Ve_lo)·f_ramp; the top overshoot
    b·(o + τi_hi)/RC'_lo is at most b·f_lag·(o + τi_lo)/RC'_lo with f_lag = 1 + Δ/τi_min,
    τi_min = 1/(ωt·(1 + ε_m)), so vl_hi moves to (L + Ve_hi)·f_lag - Ve_hi; the period's
    term d_r/a, d_r = td + τi_hi, is at most (td + τi_lo)/(a/f_weak) with f_weak = 1 +
    Δ/(td + τi_min), so the weak drive vh_lo - Ve_hi is divided by f_weak. Each move only
    widens an interval the bounds take."""
    rho, eps = box.max_load, box.max_share / (1.0 - box.max_share)
    wt = 2.0 * math.pi * u1.gbw_hz
    ramp = (1.0 + eps) * (1.0 + rho) / (1.0 + rho + eps)
    extra_lag = eps * rho / ((1.0 + rho) * wt)
    lag_min = 1.0 / (wt * (1.0 + eps))
    return ramp, 1.0 + extra_lag / lag_min, 1.0 + extra_lag / (u2.delay_s + lag_min)


def fall_delay_exponent(
    u1: OpAmp, pull_up_ohm: float, box: LoadBox, rails: Rails, a0: float, b0: float
) -> float:
    """x_max ≥ γ·d_f/RC' of every row within the timing-share limit whose drives are at
    least ``a0`` (falling, at the bottom threshold) and ``b0`` (rising): s/(1 - s)·γ_max·R_U1·
    (1/a0 + 1/b0) (module docstring)."""
    g5, g12 = 1.0 / pull_up_ohm, 1.0 / (2.0 * box.r_lo)
    gamma = g12 / (g5 + g12 + 1.0 / box.r_hi)
    if math.isfinite(box.max_load):
        # under the stiffness rule g12 < g2 ≤ ρ·g5, so γ = g12/(g5 + g3 + g12) < ρ (taken
        # whatever R5, so the stages of one U1 and U2 share their loop)
        gamma = box.max_load
    u1_lo, u1_hi = opamp_range(u1, rails)
    s = box.max_share
    return s / (1.0 - s) * gamma * max(u1_hi - u1_lo, 0.0) * (1.0 / a0 + 1.0 / b0)


def stage_levels(
    u1: OpAmp, u2: Comparator, pull_up_ohm: float, box: LoadBox, rails: Rails,
    ve_hi: float, delay_margin: float = 1.0,
) -> tuple[float, float, float, float]:  # fmt: skip
    """(vh_lo, vh_hi, vl_lo, vl_hi) of a stage on ``rails``: push-pull (Hs, Hs, L, L), open
    drain ``open_drain_levels``. Not checked positive (a stage on rails where a level is not
    cannot oscillate, and ``searchform``'s rows mark it invalid)."""
    if not u2.is_open_drain:
        hs, low = sources(u2, rails)
        return hs, hs, low, low
    return open_drain_levels(u1, u2, pull_up_ohm, box, rails, ve_hi, delay_margin)
