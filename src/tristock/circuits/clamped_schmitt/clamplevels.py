"""The zener-clamped loop's stages for the exact search: U1 (both channels), the zener part of
D1/D2 and the series resistor R5, with the clamp's square levels over every row.

A clamped row's square levels are outputs of the model (``physics``): the clamp's node S
solves the current balance (Vo - S)·G5 + (Vi - S)·G3 + (vt - S)·Gl = I_pair(S) with the op
amp's output Vo = VH or -VL, Vi = Vos1 (the integrator's - pin), vt the triangle,
G5 = 1/R5, G3 = 1/R3, Gl = 1/(R1 + R2) and I_pair the zener pair's current
(``Clamp.level``). The model takes S(vt) = S0 + g·vt, S0 and g = Gl/(G5 + G3 + Gl + 1/rd)
at vt = 0 (rd the pair's dynamic resistance there).

- **Row levels** (``row_levels``): S0 on each side, ``Clamp.level(VH, 0)`` and
  -``Clamp.level(-VL, 0)``: what ``predict_point`` computes first, by the same function.
- **Level intervals** (``level_range``), over every row a stage can be in whose amplitude can
  meet the band (at most A_max) and whose levels at its thresholds exceed
  σ = |Vos2| + Ib2·(R1 ∥ R2): S0 moves monotonically with each of G3, Gl and Vi (the
  balance's derivative in each has the fixed sign of Vi - S, vt - S at vt = 0, and +G3: S
  cannot cross them), so its extremes over the box R3 × (R1 + R2) × Vos1 ∈ {0 (the
  analysis's centre), catalogued} are at its 8 corners; g is at most
  Gl_max/(G5 + G3_min + Gl_max + 1/rd_max), rd_max the pair's dynamic resistance at the least
  corner current (rd = m/I + r falls with I, I rises with |S|). Such a row's triangle stays
  within ±(A_max + σ) (a threshold is -k·S + (1 + k)·s2, the other side's within A_max), so
  the intervals [S0_min - g_max·(A_max + σ), S0_max + g_max·(A_max + σ)] hold the level the
  model uses at every point of its cycle, thresholds and turns included. The lower ends are
  at least ``LEVEL_FLOOR_V``; where a stage's heaviest loads barely clamp its weakest drives
  are 0 (``StageLoop.weak``) and the period bounds claim no upper end for it.
- **Stage limits** (``clamp_limits``), each leaving a stage out only when no row of it meets
  the limit, so none cuts a row that does (the search stays exact over the rows it admits;
  each row's own verdict is in the topology's checks): (a) the op amp's output level beyond
  the pair's voltage at the breakdown current I_b = ``CLAMP_ERROR``·iz_test (an (op amp,
  zener) limit); at the lightest load (R3 and R1 + R2 largest, the pair current largest)
  (b) the pair current at least I_b on both sides, (c) the op amp's output current into R5,
  |Vo - S0|/R5, at most its rated output current; at the heaviest load (d) each zener's
  dissipation I_pair·(|S0| - Vf of the other, catalogued) at most its rating; and the
  design rule that defines the circuit searched (``designpoint``: each row's zener current
  within ``DESIGN_CURRENT`` (0.5..2) times its test current): (e) the current at the lightest
  load at least 0.5 and at the heaviest at most 2 times it (a row's current at vt = 0 lies
  between those, and between its currents at the thresholds).
- **Timing** (``stage_loop``): the clamped model's edges are not ``looptiming.loop_timing``'s
  (U1's output slews from its level Vout at SR, the square follows it through the clamp's
  static map), so each edge is written as a transport delay known only to an interval: an
  instant step (slew inf, GBW inf) after td + [0, (Vout_H + Vout_L)/SR_min], U1's GBW for
  the integrator (``StageLoop.delay_spread``; ``search.bounds``, (M6)). Proof that every row
  of the stage lies inside the bounds taken at that loop (tests/circuits/clamped_schmitt/
  test_clamped_bounds.py checks it on random rows of the demo's parts):
  (T1) Edge times. With t(s) = td + |Vo(s) - Vo_start|/SR the time S passes s (``physics``),
  Vo increasing in s from -Vout_L to Vout_H over the square's swing, each edge's centroid c
  (the mean of t over the swing) lies in [td, td + (Vout_H + Vout_L)/SR], and so does its
  overshoot time o = (1/drive)·∫ t ds over the part of the swing between the start and Ve
  (a mean of t over a sub-range).
  (T2) Thresholds. vt_b = (1 + k)·s2 - k·S_H(vt_b), vt_t = (1 + k)·s2 + k·S_L(vt_t) (the
  comparator's balance with the level at the threshold), so their distance is
  k·(S_H(vt_b) + S_L(vt_t)) ∈ [k·span_lo, k·span_hi] when the level intervals hold the
  levels (above).
  (T3) Period. T = d_f + t_up + d_r + t_down with t_up = RC'·∫ dv/(Ve + S_L(v)) from the
  bottom turn vt_b - a·d_f/RC' to vt_t (a = S_H(vt_b) - Ve): so t_up + d_f lies between
  k·span_lo·RC'/b_hi + d_f·(1 + a/b_hi) and k·span_hi·RC'/b_lo + d_f·(1 + a/b_lo), the row's
  own Ve in both; likewise t_down + d_r. Against ``loop_timing``'s
  span·(span·k·RC'/(a·b) + d_r/a + d_f/b) at the weakest corner (span_hi, a_lo, b_lo,
  longest delay) the upper end holds because a_lo + b_lo ≤ span_hi and
  VL_lo + VH_hi ≤ span_hi with Ve ≥ Ve_lo; the lower end at the strongest corner (span_lo,
  a_hi, b_hi, shortest delay) because a_hi + b_hi ≥ span_lo. The ideal period T_i (instant
  edges, RC) takes the same ends, and D = T - T_i ≥ (RC' - RC)·(ramps) + d_f + d_r plus the
  ramps' extension past the thresholds, so the timing share's floor holds too.
  (T4) Amplitude. Peak to peak = (T2) + each overshoot (∫ t ds + drive·τi - A)/RC' with the
  lag area 0 ≤ A ≤ drive·τi (``integrator.lag_overshoot_area``): between drive·td/RC' and
  drive·(td + spread + τi)/RC' by (T1), ``loop_timing``'s floor at the shortest and reach at
  the longest delay.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.clamped_schmitt.checks import CLAMP_ERROR
from tristock.circuits.clamped_schmitt.designpoint import DESIGN_CURRENT
from tristock.circuits.clamped_schmitt.physics import Clamp, ClampPoint, output_levels
from tristock.circuits.diode import diode_at, thermal_voltage
from tristock.circuits.rails import OpAmpModel, Rails
from tristock.circuits.searchform import F64, I64, StageLoop, StageOption
from tristock.stock.diodes import Diode
from tristock.stock.parts import OpAmp, Resistor

#: Temperature of the search's nominal rows (°C): the zeners' values as catalogued.
NOMINAL_TEMP_C = 25.0
#: The least lower end of a level interval (V): the bounds' spans stay positive.
LEVEL_FLOOR_V = 1e-9
#: The fields of ``ClampPoint`` a stage fixes (``candidate_columns``).
FIXED_NAMES = (
    "r5", "swing_pos", "swing_neg", "slew_rise", "slew_fall", "delay", "gbw", "vos1", "ib1",
    "vos2", "ib2", "vt_therm", "vz1", "rz1", "izt1", "vf1", "vz2", "rz2", "izt2", "vf2",
)  # fmt: skip


class LoadRange(NamedTuple):
    """What a stage's rows load the clamp with: R3 in ``r3_lo``..``r3_hi``, R1 + R2 in
    ``rl_lo``..``rl_hi`` (Ω), the triangle within ±``triangle_v`` (V) of the reference."""

    r3_lo: float
    r3_hi: float
    rl_lo: float
    rl_hi: float
    triangle_v: float


@dataclass(frozen=True)
class ClampStage(StageOption):
    """A clamped stage: U1 (``part``, its ``model``), the zeners D1 (breaks with the square
    high) and D2, the series resistor R5; ``load`` the loads of its rows at nominal values
    (the loop's intervals), ``spread_load`` the same with each resistor at its tolerance and
    tempco ends over the spec's temperatures (``level_bounds`` at the worst-case probes);
    ``fixed`` the point fields the stage fixes (``candidate_columns``), kept so that rows
    are evaluated without rebuilding them; ``turn_v`` the bound of the turns' reach past the
    thresholds its intervals were taken with (``designpoint.design_levels``)."""

    part: OpAmp
    model: OpAmpModel
    d1: Diode
    d2: Diode
    r5: Resistor
    load: LoadRange
    spread_load: LoadRange
    fixed: Mapping[str, float]
    turn_v: float = float("inf")


def candidate_columns(
    model: OpAmpModel, pairs: Sequence[tuple[Diode, Diode]], r5: Sequence[float] | F64
) -> dict[str, F64]:
    """The fields of ``ClampPoint`` a stage fixes, for every (D1, D2) of ``pairs`` (first
    axis) and R5 of ``r5`` (second axis): U1's terms, R5 and the zeners at
    ``NOMINAL_TEMP_C`` (the rails, R1..C1 and the op amp's output levels come from the
    row)."""
    m = model
    opamp = (m.swing_pos_v, m.swing_neg_v, m.slew_rise_v_per_s, m.slew_fall_v_per_s,
             m.delay_s, m.gbw_hz, m.offset_v, m.bias_a, m.comparator_offset_v,
             m.comparator_bias_a, float(thermal_voltage(NOMINAL_TEMP_C)))  # fmt: skip
    names = ("swing_pos", "swing_neg", "slew_rise", "slew_fall", "delay", "gbw", "vos1",
             "ib1", "vos2", "ib2", "vt_therm")  # fmt: skip
    diodes = np.array([(*diode_at(a, NOMINAL_TEMP_C), *diode_at(b, NOMINAL_TEMP_C))
                       for a, b in pairs], dtype=np.float64).reshape(len(pairs), 8)  # fmt: skip
    r5_a = np.asarray(r5, dtype=np.float64)[None, :]
    shape = (len(pairs), r5_a.shape[1])
    out = {"r5": np.broadcast_to(r5_a, shape).copy()}
    out |= {k: np.full(shape, v, dtype=np.float64) for k, v in zip(names, opamp, strict=True)}
    fields = ("vz1", "rz1", "izt1", "vf1", "vz2", "rz2", "izt2", "vf2")
    out |= {k: np.broadcast_to(diodes[:, n, None], shape).copy() for n, k in enumerate(fields)}
    return out


def fixed_fields(cols: Mapping[str, F64], at: tuple[int, ...]) -> dict[str, float]:
    """One candidate's fields (``ClampStage.fixed``) from ``candidate_columns`` arrays."""
    return {k: float(v[at]) for k, v in cols.items()}


def columns(stages: Sequence[StageOption], u: I64) -> dict[str, F64]:
    """The fixed fields of each row's stage (arrays indexed like ``u``); TypeError naming a
    stage that is not a clamped one."""
    uniq, back = np.unique(np.asarray(u, dtype=np.int64), return_inverse=True)
    table = []
    for n in uniq.tolist():
        s = stages[n]
        if not isinstance(s, ClampStage):
            raise TypeError(f"U1: stage {s.key} is not a zener-clamped stage")
        table.append(s.fixed)
    if not table:
        return {name: np.zeros(0) for name in FIXED_NAMES}
    return {name: np.array([t[name] for t in table], dtype=float)[back] for name in FIXED_NAMES}


def row_point(
    cols: Mapping[str, F64],
    values: Mapping[str, F64],
    rails: Rails | tuple[F64, F64] | None = None,
) -> ClampPoint:
    """The rows' point: the stage columns, R1, R2, R3, C1 from ``values`` (C1 1 F where it
    is not given: the levels do not read it) and the rails (V+, V-; the clamp network alone,
    ``Clamp.of``, does not read them)."""
    if rails is None:
        v_pos, v_neg = np.zeros(()), np.zeros(())
    elif isinstance(rails, Rails):
        v_pos, v_neg = np.asarray(rails.v_pos), np.asarray(rails.v_neg)
    else:
        v_pos, v_neg = rails
    c1 = values.get("C1", 1.0)
    return ClampPoint(
        r1=values["R1"], r2=values["R2"], r3=values["R3"], c1=c1, v_pos=v_pos, v_neg=v_neg,
        **cols,
    )  # fmt: skip


def square_levels_at_reference(point: ClampPoint, v_ref: float | None) -> tuple[F64, F64]:
    """(S_H, S_L magnitude) with the triangle at the reference: ``Clamp.level`` at the op
    amp's output levels (``physics.output_levels``), as ``predict_point`` computes them."""
    vh, vl = output_levels(point, v_ref)
    net = Clamp.of(point)
    s_h, _ = net.level(vh, 0.0, True)
    s_l, _ = net.level(-vl, 0.0, False)
    return np.asarray(s_h), np.asarray(-s_l)


def corners(cols: Mapping[str, F64], load: LoadRange | Sequence[F64], rails: Rails) -> ClampPoint:
    """Each stage's point at the 8 corners of its loads on ``rails`` (a last axis): R3 ×
    (R1 + R2) × Vos1 ∈ {0, catalogued}."""
    r3_lo, r3_hi, rl_lo, rl_hi, _ = (np.asarray(x, dtype=float)[..., None] for x in load)
    pick = np.array([(a, b, c) for a in (0, 1) for b in (0, 1) for c in (0, 1)]).T
    r3 = np.where(pick[0] == 0, r3_lo, r3_hi)
    rl = np.where(pick[1] == 0, rl_lo, rl_hi)
    wide = {k: np.asarray(v, dtype=float)[..., None] for k, v in cols.items()}
    wide["vos1"] = np.where(pick[2] == 0, 0.0, wide["vos1"])
    return row_point(wide, {"R1": 0.5 * rl, "R2": 0.5 * rl, "R3": r3}, rails)


def level_range(
    cols: Mapping[str, F64], load: LoadRange | Sequence[F64], rails: Rails
) -> tuple[F64, F64, F64, F64]:
    """(VH_lo, VH_hi, VL_lo, VL_hi) over the rows of each stage on ``rails`` (module
    docstring): the corners' S0 on each side widened by g_max·(A_max + σ), the lower ends at
    least ``LEVEL_FLOOR_V``."""
    point = corners(cols, load, rails)
    vh, vl = output_levels(point, rails.v_ref)
    net = Clamp.of(point)
    r3_hi, rl_lo, rl_hi, a_max = (np.asarray(load[n], dtype=float) for n in (1, 2, 3, 4))
    c = {k: np.asarray(v, dtype=float) for k, v in cols.items()}
    sigma = np.abs(c["vos2"]) + np.abs(c["ib2"]) * 0.25 * rl_hi
    out: list[F64] = []
    for vo, high in ((vh, True), (-vl, False)):
        s, i = net.level(vo, 0.0, high)
        level = s if high else -s
        rd_max = np.max((net.up if high else net.down).resistance(i), axis=-1)
        g_max = (1.0 / rl_lo) / (1.0 / c["r5"] + 1.0 / r3_hi + 1.0 / rl_lo + 1.0 / rd_max)
        reach = g_max * (a_max + sigma)
        low = np.maximum(np.min(level, axis=-1) - reach, LEVEL_FLOOR_V)
        out += [low, np.maximum(np.max(level, axis=-1) + reach, low)]
    return out[0], out[1], out[2], out[3]


def rest_levels(
    cols: Mapping[str, F64], load: LoadRange | Sequence[F64], rails: Rails
) -> tuple[F64, F64, F64, F64]:
    """(least, most) |S0| with the square high, then low, over every row of each stage on
    ``rails``: the triangle at the reference, the 8 corners of the loads (the monotonicity
    above)."""
    point = corners(cols, load, rails)
    vh, vl = output_levels(point, rails.v_ref)
    net = Clamp.of(point)
    s_h, _ = net.level(vh, 0.0, True)
    s_l, _ = net.level(-vl, 0.0, False)
    return (np.min(s_h, axis=-1), np.max(s_h, axis=-1), np.min(-s_l, axis=-1),
            np.max(-s_l, axis=-1))  # fmt: skip


# ---- the stage limits ----------------------------------------------------------------------


class ClampLevels(NamedTuple):
    """The clamp at given loads (the catalogued offset, the triangle at the reference): the
    levels S_H and S_L (V, S_L < 0) and the pair's currents there (A)."""

    s_high: F64
    i_high: F64
    s_low: F64
    i_low: F64


def network(cols: Mapping[str, F64], r3: float, rl: float) -> Clamp:
    """The clamp network of each stage's columns with R3 = ``r3`` and R1 + R2 = ``rl`` (Ω)."""
    half = np.asarray(0.5 * rl, dtype=float)
    return Clamp.of(row_point(cols, {"R1": half, "R2": half, "R3": np.asarray(r3, dtype=float)}))


def clamp_at(cols: Mapping[str, F64], r3: float, rl: float, vh: float, vl: float) -> ClampLevels:
    """``Clamp.level`` of each stage's columns with R3 = ``r3``, R1 + R2 = ``rl`` and the op
    amp's output at +``vh`` / -``vl`` (V from the reference)."""
    net = network(cols, r3, rl)
    s_h, i_h = net.level(vh, 0.0, True)
    s_l, i_l = net.level(-vl, 0.0, False)
    return ClampLevels(s_h, i_h, s_l, i_l)


class LimitVerdict(NamedTuple):
    """Per candidate: whether some row meets each stage limit (b), (c), (d), and whether the
    stage's zeners run at their design point (e)."""

    breaks_down: NDArray[np.bool_]
    current_ok: NDArray[np.bool_]
    power_ok: NDArray[np.bool_]
    design_point: NDArray[np.bool_]

    @property
    def ok(self) -> NDArray[np.bool_]:
        return np.asarray(self.breaks_down & self.current_ok & self.power_ok & self.design_point)


def breakdown_current(zeners: Sequence[Diode]) -> F64:
    """I_b = ``CLAMP_ERROR``·iz_test of each zener (A): below it the clamp does not clamp."""
    return np.array([CLAMP_ERROR * (d.iz_test_a or 0.0) for d in zeners], dtype=np.float64)


def clamp_limits(
    cols: Mapping[str, F64],
    load: LoadRange,
    opamp: OpAmp,
    levels: tuple[float, float],
    pairs: Sequence[tuple[Diode, Diode]],
) -> LimitVerdict:
    """The limits (b), (c), (d) of the module docstring for the candidates of
    ``candidate_columns`` (a row per pair of ``pairs``, a column per R5), U1 ``opamp`` at
    its output levels ``levels`` (VH, VL)."""
    vh, vl = levels
    d1, d2 = [p[0] for p in pairs], [p[1] for p in pairs]

    def col(values: list[float]) -> F64:
        return np.array(values, dtype=np.float64)[:, None]

    r5 = np.asarray(cols["r5"], dtype=float)
    light = clamp_at(cols, load.r3_hi, load.rl_hi, vh, vl)
    heavy = clamp_at(cols, load.r3_lo, load.rl_lo, vh, vl)
    i_b1, i_b2 = breakdown_current(d1)[:, None], breakdown_current(d2)[:, None]
    breaks = (light.i_high >= i_b1) & (light.i_low >= i_b2)
    out_high, out_low = (vh - light.s_high) / r5, (vl + light.s_low) / r5
    current = (out_high <= opamp.output_a) & (out_low <= opamp.output_a)
    vf1, vf2 = col([d.vf_v for d in d1]), col([d.vf_v for d in d2])
    p1, p2 = col([d.power_w for d in d1]), col([d.power_w for d in d2])
    power = (heavy.i_high * (heavy.s_high - vf2) <= p1) & (heavy.i_low * (-heavy.s_low - vf1) <= p2)
    lo, hi = DESIGN_CURRENT
    iz1 = col([d.iz_test_a or 0.0 for d in d1])
    iz2 = col([d.iz_test_a or 0.0 for d in d2])
    design = (light.i_high >= lo * iz1) & (heavy.i_high <= hi * iz1)
    design &= (light.i_low >= lo * iz2) & (heavy.i_low <= hi * iz2)
    return LimitVerdict(
        np.asarray(breaks), np.asarray(current), np.asarray(power), np.asarray(design)
    )


def saturation_reasons(
    cols: Mapping[str, F64], levels: tuple[float, float], pairs: Sequence[tuple[Diode, Diode]]
) -> list[str | None]:
    """Limit (a) of each pair: why the op amp's output levels (VH, VL) cannot break it down
    (its voltage at I_b in either direction at least the level), or None."""
    net = network({k: v[:, :1] for k, v in cols.items()}, 1.0, 1.0)  # the pair: no load
    up = np.ravel(net.up.voltage(breakdown_current([p[0] for p in pairs])[:, None]))
    down = np.ravel(net.down.voltage(breakdown_current([p[1] for p in pairs])[:, None]))
    vh, vl = levels
    return [
        None
        if vh > a and vl > b
        else (
            f"U1's output levels +{vh:.3g} / -{vl:.3g} V do not exceed the pair's +{a:.3g} / "
            f"-{b:.3g} V at {CLAMP_ERROR:g} of its test current: it cannot break down"
        )
        for a, b in zip(up.tolist(), down.tolist(), strict=True)
    ]


def stage_loop(
    levels: tuple[float, float, float, float],
    model: OpAmpModel,
    outputs: tuple[float, float],
    ve: tuple[float, float],
) -> StageLoop:
    """The loop of one stage (module docstring, "Timing", (T1)): the level intervals
    ``levels``; instant edges (slew and GBW inf) after U1's delay td plus a spread of
    (VH + VL)/SR_min, U1's whole output swing (``outputs``: VH, VL of U1 on the rails) at its
    slower slew; U1's GBW for the integrator; Ve over ``ve``; the overshoot times the
    loop's own (``overshoot_time_min`` NaN)."""
    slowest = min(model.slew_rise_v_per_s, model.slew_fall_v_per_s)
    spread = (outputs[0] + outputs[1]) / slowest
    values = (*levels, np.inf, np.inf, model.delay_s, np.inf, model.gbw_hz, *ve, spread, np.nan)
    return StageLoop._make(np.asarray(x, dtype=np.float64) for x in values)
