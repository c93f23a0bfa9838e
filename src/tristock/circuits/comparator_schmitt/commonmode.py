"""U2's and U1's input common-mode ranges in the comparator-IC loop: the numbers the check
``checks.input_checks`` takes, as the search's acceptance takes them, and a ceiling on
k = R1/R2 that no row of a stage can pass the check above.

Voltages are from the reference node (U2's - input and U1's + input sit there). U2's + input
is (R2·vt + R1·vs)/(R1 + R2), widest just after each switch: at the top peak P_hi with the
square just high (at H_top, the high level at P_hi) and at the bottom peak P_lo with the
square at -L (``plus_input_swing``). The check wants, besides the reference itself inside U2's
range and U1's inputs (the reference plus Vos1) inside U1's, bottom ≥ cm_lo and top ≤ cm_hi
(``common_mode_range`` on the rails, less the reference).

The ceiling (``divider_ceiling``). With k = R1/R2 and s = (1 + k)·(Vos2 + J), J = Ib2·R1∥R2
(``physics``: the comparator trips where vt + k·vs = s):

- (C1) P_hi ≥ th_hi = s + k·L and P_lo ≤ th_lo = s - k·H_lo, H_lo = v_high(th_lo) the high
  level at the bottom threshold (th_lo·(1 + k·γ) = s - k·vs0 is th_lo + k·(vs0 + γ·th_lo) =
  s): each peak lies past its threshold by an overshoot that is not negative (the slope
  times o ≥ td - τ_max/2 ≥ 0 plus the lag's part less its area, ≥ 0: ``stages``, and
  ``stock.comparators.edge_start_s``).
- (C2) H_top = vs0 + γ·P_hi ≥ vs0 + γ·th_lo = H_lo (γ ≥ 0, P_hi ≥ th_hi > th_lo in an
  oscillating row), and H_lo ≥ H_min: Hs for push-pull; for open drain the lower end the
  stage's levels take (``stagelevels.stiff_threshold_level`` under the stiffness rule, else
  ``lowest_threshold_level``).

So top = (P_hi + k·H_top)/(1 + k) ≥ Vos2 + J + k·(L + H_min)/(1 + k) and bottom =
(P_lo - k·L)/(1 + k) ≤ Vos2 + J - k·(L + H_min)/(1 + k). With 0 < R1∥R2 ≤ r_hi/2 (both in the
stage's resistance box), J lies in [J_lo, J_hi] = [min(0, Ib2·r_hi/2), max(0, Ib2·r_hi/2)].
Both ends are monotone: the top's lower end rises with k (k/(1 + k) does) and with L + H_min,
the bottom's upper end falls with them. A row passes only if k/(1 + k)·(L + H_min) ≤ q_top =
cm_hi - Vos2 - J_lo and ≤ q_bot = Vos2 + J_hi - cm_lo, i.e. with q = min(q_top, q_bot)/
(L + H_min): none if q ≤ 0, any k if q ≥ 1, else k ≤ q/(1 - q). Where L + H_min ≤ 0 no row of
the stage oscillates with its drives positive and no ceiling is claimed (inf).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.checks import common_mode_range
from tristock.circuits.prediction import Prediction
from tristock.circuits.rails import Rails
from tristock.stock.comparators import Comparator
from tristock.stock.parts import OpAmp

F64 = NDArray[np.float64]


#: How far past a common-mode range's edge (V) the search's mask still lets a row through.
ROUNDING_SLACK_V = 1e-9


def plus_input_swing(
    pred: Prediction, r1: F64 | float, r2: F64 | float, r3: F64 | float, r5: F64 | float
) -> tuple[F64, F64]:
    """(bottom, top): U2's + input just after each switch (V from the reference), from the
    model's prediction and R1, R2, R3, R5 (Ω; R5 = 0 for push-pull): top = (R2·P_hi +
    R1·H_top)/(R1 + R2), H_top = the high level at mid triangle + γ·(P_hi - the thresholds'
    mean), γ = (R5/R12)/(1 + R5/R12 + R5/R3); bottom = (R2·P_lo - R1·L)/(R1 + R2)."""
    r1a, r2a, r3a, r5a = (np.asarray(x, dtype=float) for x in (r1, r2, r3, r5))
    hi, lo = np.asarray(pred.peak_high_v, dtype=float), np.asarray(pred.peak_low_v, dtype=float)
    mid, low = np.asarray(pred.square_high_v), np.asarray(pred.square_low_v)
    r12 = r1a + r2a
    gamma = np.where(r5a > 0.0, r5a / r12 / (1.0 + r5a / r12 + r5a / r3a), 0.0)
    th_mid = (np.asarray(pred.threshold_high_v) + np.asarray(pred.threshold_low_v)) / 2.0
    h_top = mid + gamma * (hi - th_mid)
    top = (r2a * hi + r1a * h_top) / r12
    bottom = (r2a * lo + r1a * low) / r12
    return np.asarray(bottom, dtype=float), np.asarray(top, dtype=float)


def reference_reason(u2: Comparator, rails: Rails) -> str | None:
    """Why U2's - input, at the reference, is outside its common-mode range on ``rails``
    (every row of the stage then fails the check), or None."""
    low, high = common_mode_range(rails.v_pos, rails.v_neg, u2.input_cm_neg_v,
                                  u2.input_cm_pos_headroom_v)  # fmt: skip
    ref = rails.reference_v
    if low <= ref <= high:
        return None
    return (
        f"its input common-mode range {low:.3g}..{high:.3g} V on these rails misses the "
        f"reference {ref:.3g} V its - input sits at"
    )


def opamp_input_reason(u1: OpAmp, rails: Rails) -> str | None:
    """Why U1's inputs, at the reference plus its offset, are outside its common-mode range
    on ``rails`` (every row fails the check), or None."""
    low, high = common_mode_range(rails.v_pos, rails.v_neg, u1.input_cm_neg_v,
                                  u1.input_cm_pos_headroom_v)  # fmt: skip
    at = rails.reference_v + u1.offset_v
    if low <= at <= high:
        return None
    return (
        f"its input common-mode range {low:.3g}..{high:.3g} V on these rails misses its "
        f"inputs at {at:.3g} V (the reference plus its offset)"
    )


def divider_ceiling(u2: Comparator, rails: Rails, h_min: float, r_hi: float) -> tuple[float, str]:
    """(k_max, words): no row of a stage with comparator ``u2`` on ``rails`` whose high
    level at the bottom threshold is at least ``h_min`` (V from the reference) and whose R1,
    R2 are at most ``r_hi`` (Ω) passes U2's + input check with k = R1/R2 > k_max (module
    docstring; 0: none passes, inf: no ceiling). ``words`` say it of U2 (its range, the
    ceiling)."""
    ref = rails.reference_v
    cm_lo, cm_hi = (x - ref for x in common_mode_range(
        rails.v_pos, rails.v_neg, u2.input_cm_neg_v, u2.input_cm_pos_headroom_v))  # fmt: skip
    low = ref - (rails.v_neg + u2.vol_v)
    j = u2.bias_a * r_hi / 2.0
    q_top = cm_hi - u2.offset_v - min(0.0, j)
    q_bot = u2.offset_v + max(0.0, j) - cm_lo
    span = low + h_min
    words = (
        f"its input common-mode range {cm_lo + ref:.3g}..{cm_hi + ref:.3g} V on "
        f"these rails holds its + input (the triangle and the square through R1, R2) only "
        f"for k = R1/R2 up to"
    )
    if not span > 0.0:
        return math.inf, ""
    q = min(q_top, q_bot) / span
    if q <= 0.0:
        return 0.0, f"{words} 0: no R1/R2 pair"
    if q >= 1.0:
        return math.inf, ""
    k_max = q / (1.0 - q)
    return k_max, f"{words} {k_max:.4g}"


def inside_common_mode(
    pred: Prediction, r1: F64, r2: F64, r3: F64, r5: F64, hs: F64, low: F64,
    cols: dict[str, F64],
) -> NDArray[np.bool_]:  # fmt: skip
    """Rows whose inputs stay inside their common-mode ranges as ``checks.input_checks``
    takes them: U2's + input (``plus_input_swing``) and - input (the reference), U1's inputs
    (the reference plus Vos1). The rails from the row's levels: V+ = Hs + headroom and V- =
    -(L + VOL) from the reference. ``cols`` holds each row's cm_neg2, cm_head2, cm_neg1,
    cm_head1 (NaN: to the rail), headroom, vol and vos1."""
    v_pos = hs + cols["headroom"]
    v_neg = -(low + cols["vol"])
    cm2_lo = v_neg + np.nan_to_num(cols["cm_neg2"])
    cm2_hi = v_pos - np.nan_to_num(cols["cm_head2"])
    cm1_lo = v_neg + np.nan_to_num(cols["cm_neg1"])
    cm1_hi = v_pos - np.nan_to_num(cols["cm_head1"])
    bottom, top = plus_input_swing(pred, r1, r2, r3, r5)
    # the check reads volts to ground, this volts from the reference: on a range's edge the
    # two roundings may disagree, so the mask lets ``ROUNDING_SLACK_V`` more through and the
    # re-check decides those rows (the mask never rejects a row the check would accept)
    slack = ROUNDING_SLACK_V
    with np.errstate(invalid="ignore"):
        ok = (np.minimum(bottom, 0.0) >= cm2_lo - slack) & (np.maximum(top, 0.0) <= cm2_hi + slack)
        ok &= (cols["vos1"] >= cm1_lo - slack) & (cols["vos1"] <= cm1_hi + slack)
    return np.asarray(ok)
