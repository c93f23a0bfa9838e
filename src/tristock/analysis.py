"""Tolerance analysis of one design: worst case, Monte Carlo yield, sensitivities, drift.

Every figure comes from the vectorised closed-form model ``tristock.circuit.predict``; this
module only decides which part values, rails, temperatures and op-amp parameters to feed it.

The spread variables (each a normalised deviation z in [-1, 1]; a variable whose spread is
zero is left out):

- ``R1``, ``R2``, ``R3``, ``C1``: value·(1 + tol·z), tol = tolerance_pct/100.
- ``C1.temp`` (class II capacitors only): value·(1 + band·z), band = temp_band_pct/100. The
  catalog gives only the band, not the curve, so any value in the band is taken as possible at
  any temperature of the range (conservative).
- ``V+``, ``V-``: each rail·(1 + tol·z), tol = supply.tolerance_pct/100, independently (unequal
  rails give unequal swing, which moves duty and frequency). A single supply's V- is 0 V and
  has no spread; its reference follows mid-rail unless the spec fixes it.
- ``T``: temperature from temp_min_c (z = -1) to temp_max_c (z = +1); every value moves as
  value·(1 + tc·(T - 25 °C)) with tc in ppm/°C. Temperature is one shared variable, so R1 and
  R2 move together: with equal tempcos their ratio k = R1/R2, and with it the ideal amplitude
  (VH + VL)·k, does not move with temperature at all (tracking is credited without a special
  case). Op-amp parameters are taken as independent of temperature.
- ``U1.offset.integrator`` (Vos1), ``U1.offset.comparator`` (Vos2): typ·z, bounded by ± the
  catalogued typical offset (:data:`OFFSET_BOUND` times it).
- ``U1.bias``: typ·(1 + z), from 0 to 2x the catalogued bias current (both channels alike,
  sign as catalogued).
- ``U1.slew``: SR·(1 + 0.2·z) (:data:`SLEW_SPREAD`), rise and fall alike.
- ``U1.delay``: td·(1 + 0.3·z) (:data:`DELAY_SPREAD`).

Swing headroom and gain-bandwidth are held at their catalogued values.

The nominal operating point (``analyse().predicted``, ``sensitivities``,
``temperature_drift``) is ``Design.oscillator`` at nominal rails: the op amp as catalogued,
typical offset and bias with a + sign. The spread analyses (``worst_case``, ``monte_carlo``)
centre the offsets on 0 V, which is what "± typical" means.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np
import numpy.typing as npt
from scipy import special, stats

from tristock.circuit import Oscillator, Prediction, Rails, predict, timing_network
from tristock.design import Design, rails_from_supply, value_at
from tristock.spec import Spec
from tristock.units import format_value

FloatArray = npt.NDArray[np.float64]
Distribution = Literal["normal", "uniform"]
#: A float, or an array of floats once deviations are applied.
Value = float | FloatArray

#: Comparator slew-rate spread, ± fraction of the catalogued value.
SLEW_SPREAD = 0.20
#: Comparator propagation-delay spread, ± fraction of the catalogued value.
DELAY_SPREAD = 0.30
#: Input offset bound, in multiples of the catalogued typical offset (± that many).
OFFSET_BOUND = 1.0
#: Bias-current spread, ± fraction of the catalogued value (1.0: from 0 to 2x).
BIAS_SPREAD = 1.0
#: A "normal" tolerance is this many standard deviations, and the normal is truncated there.
NORMAL_SIGMAS = 3.0
#: Up to this many spread variables every one of the 2^n corners is evaluated.
MAX_CORNER_VARIABLES = 12
#: Relative step of the log-space central differences in ``sensitivities``.
SENSITIVITY_STEP = 1e-4
#: Confidence level of the yield interval.
CONFIDENCE = 0.95

#: Corners refined along the non-monotone variables (offsets, bias) per extreme.
_REFINE_CORNERS = 4
_REFINE_POINTS = 17
_REFINE_ZOOMS = 4
_METRICS = ("frequency_hz", "amplitude_vpp", "duty_high")


# --------------------------------------------------------------------------------------------
# The vectorised model of one board


@dataclass(frozen=True)
class _Point:
    """Every argument of ``predict`` plus the rails; floats or broadcastable arrays."""

    r1: Value
    r2: Value
    r3: Value
    c1: Value
    v_pos: Value
    v_neg: Value
    swing_pos: Value
    swing_neg: Value
    slew_rise: Value
    slew_fall: Value
    delay: Value
    gbw: Value
    vos1: Value
    ib1: Value
    vos2: Value
    ib2: Value
    rv: Value = 0.0  # RV1 end to end (Ω); 0 without a pot
    r4: Value = 0.0  # divider end stop (Ω)
    alpha: Value = 0.0  # wiper position


_POINT_FIELDS = tuple(_Point.__dataclass_fields__)


@dataclass(frozen=True)
class _Board:
    """A point plus how the reference node follows the rails and how a pot is wired."""

    point: _Point
    v_ref: float | None
    control: str = "series"

    @classmethod
    def of(cls, design: Design, rails: Rails, temp_c: float) -> _Board:
        """The design's values at ``temp_c``; R3, RV1, R4 and the selected range capacitor
        are kept apart (``_predict`` combines them through ``circuit.timing_network``)."""
        osc = design.oscillator(rails, temp_c)
        m = osc.opamp
        cap = design.timing_capacitor
        c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
        rv, r4 = design.rv1, design.r4
        point = _Point(
            r1=osc.r1,
            r2=osc.r2,
            r3=value_at(design.r3.value_ohm, design.r3.tempco_ppm, temp_c),
            c1=value_at(cap.value_f, c_tc, temp_c),
            rv=value_at(rv.value_ohm, rv.tempco_ppm, temp_c) if rv else 0.0,
            r4=value_at(r4.value_ohm, r4.tempco_ppm, temp_c) if r4 else 0.0,
            alpha=design.wiper if rv else 0.0,
            v_pos=osc.rails.v_pos,
            v_neg=osc.rails.v_neg,
            swing_pos=m.swing_pos_v,
            swing_neg=m.swing_neg_v,
            slew_rise=m.slew_rise_v_per_s,
            slew_fall=m.slew_fall_v_per_s,
            delay=m.delay_s,
            gbw=m.gbw_hz,
            vos1=m.offset_v,
            ib1=m.bias_a,
            vos2=m.comparator_offset_v,
            ib2=m.comparator_bias_a,
        )
        return cls(point, osc.rails.v_ref, design.control)


def _predict(point: _Point, v_ref: float | None, control: str = "series") -> Prediction:
    """``predict`` at ``point``, with the square levels of ``square_levels`` vectorised:
    VH = V+ - swing_pos - Vref, VL = Vref - (V- + swing_neg); Vref is the fixed reference,
    else 0 V for split rails and (V+ + V-)/2 for a single supply (V- = 0)."""
    v_pos = np.asarray(point.v_pos, dtype=float)
    v_neg = np.asarray(point.v_neg, dtype=float)
    if v_ref is not None:
        ref: Value = v_ref
    else:
        ref = np.where(v_neg < 0.0, 0.0, (v_pos + v_neg) / 2.0)
    vh = v_pos - point.swing_pos - ref
    vl = ref - (v_neg + point.swing_neg)
    r_eff, beta = timing_network(point.r3, point.rv, point.alpha, control, point.r4)
    return predict(
        point.r1,
        point.r2,
        r_eff,
        np.asarray(point.c1) / beta,
        vh,
        vl,
        slew_rise=point.slew_rise,
        slew_fall=point.slew_fall,
        delay=point.delay,
        gbw=point.gbw,
        vos1=np.asarray(point.vos1) / beta,
        ib1=np.asarray(point.ib1) / beta,
        vos2=point.vos2,
        ib2=point.ib2,
        integrator_gbw=point.gbw,
    )


def _metrics(pred: Prediction, rows: int) -> FloatArray:
    """(rows, 3) array of frequency (Hz), amplitude (Vpp), duty_high."""
    cols = [np.broadcast_to(np.asarray(getattr(pred, m), dtype=float), (rows,)) for m in _METRICS]
    return np.stack(cols, axis=1)


# --------------------------------------------------------------------------------------------
# Spread variables


@dataclass(frozen=True)
class _Variable:
    """One spread variable: how a deviation z in [-1, 1] moves the point, and its text."""

    name: str
    apply: Callable[[dict[str, Any], FloatArray], None]  # moves the named fields in place
    describe: Callable[[float], str]
    temperature: bool = False
    non_monotone: bool = False


def _pct(x: float) -> str:
    return f"{x * 100:+.3g} %"


def _signed(value: float, unit: str) -> str:
    text = format_value(value, unit)
    return text if text.startswith("-") or value == 0 else "+" + text


#: A point's fields by name while spread variables are applied (one _Point is built after).
_Values = dict[str, Any]


def _scaled(fields: tuple[str, ...], spread: float) -> Callable[[_Values, FloatArray], None]:
    """z -> every field x·(1 + spread·z)."""

    def apply(p: _Values, z: FloatArray) -> None:
        factor = 1.0 + spread * z
        for f in fields:
            p[f] = p[f] * factor

    return apply


def _added(fields: tuple[str, ...], bound: float) -> Callable[[_Values, FloatArray], None]:
    """z -> every field x + bound·z."""

    def apply(p: _Values, z: FloatArray) -> None:
        for f in fields:
            p[f] = p[f] + bound * z

    return apply


def _tolerance_variable(name: str, field: str, value: float, tol: float, unit: str) -> _Variable:
    return _Variable(
        name,
        _scaled((field,), tol),
        lambda z: f"{format_value(value * (1 + tol * z), unit)} ({_pct(tol * z)})",
    )


def _temperature_variable(design: Design, t_min: float, t_max: float) -> _Variable:
    mid, half = (t_min + t_max) / 2.0, (t_max - t_min) / 2.0
    cap = design.timing_capacitor
    c_tc = cap.tempco_ppm if cap.tempco_ppm is not None else 0.0
    tempcos = {
        "r1": design.r1.tempco_ppm,
        "r2": design.r2.tempco_ppm,
        "r3": design.r3.tempco_ppm,
        "c1": c_tc,
        "rv": design.rv1.tempco_ppm if design.rv1 else 0.0,
        "r4": design.r4.tempco_ppm if design.r4 else 0.0,
    }

    def apply(p: _Values, z: FloatArray) -> None:
        dt = mid + half * z - 25.0
        for f, tc in tempcos.items():
            p[f] = p[f] * (1.0 + tc * 1e-6 * dt)

    return _Variable("T", apply, lambda z: f"{mid + half * z:.4g} °C", temperature=True)


def _spread_board(design: Design, spec: Spec) -> tuple[_Board, list[_Variable]]:
    """The centre of the spread (offsets 0 V, bias as catalogued) and its variables."""
    env = spec.environment
    ranged = env.temp_max_c > env.temp_min_c
    rails = rails_from_supply(spec.supply)
    u1 = design.u1
    board = _Board.of(design, rails, 25.0 if ranged else env.temp_min_c)
    board = replace(
        board, point=replace(board.point, vos1=0.0, vos2=0.0, ib1=u1.bias_a, ib2=u1.bias_a)
    )

    cap = design.timing_capacitor
    cap_name = f"C{design.selected + 1}"
    variables: list[_Variable] = []
    spread_parts = [
        ("R1", "r1", design.r1.value_ohm, design.r1.tolerance_pct, "Ω"),
        ("R2", "r2", design.r2.value_ohm, design.r2.tolerance_pct, "Ω"),
        ("R3", "r3", design.r3.value_ohm, design.r3.tolerance_pct, "Ω"),
        (cap_name, "c1", cap.value_f, cap.tolerance_pct, "F"),
    ]
    if design.rv1 is not None:
        spread_parts.append(("RV1", "rv", design.rv1.value_ohm, design.rv1.tolerance_pct, "Ω"))
    if design.r4 is not None:
        spread_parts.append(("R4", "r4", design.r4.value_ohm, design.r4.tolerance_pct, "Ω"))
    for name, field, part_value, tol_pct, unit in spread_parts:
        if tol_pct > 0:
            variables.append(_tolerance_variable(name, field, part_value, tol_pct / 100, unit))
    band_pct = cap.temp_band_pct
    if cap.is_class_ii and band_pct is not None and band_pct > 0:
        band = band_pct / 100
        variables.append(
            _Variable(f"{cap_name}.temp", _scaled(("c1",), band), lambda z: _pct(band * z))
        )
    tol_v = spec.supply.tolerance_pct / 100
    if tol_v > 0:
        for name, field, v in (("V+", "v_pos", rails.v_pos), ("V-", "v_neg", rails.v_neg)):
            if v != 0:
                variables.append(_tolerance_variable(name, field, v, tol_v, "V"))
    if ranged:
        variables.append(_temperature_variable(design, env.temp_min_c, env.temp_max_c))
    vos = abs(u1.offset_v) * OFFSET_BOUND
    if vos > 0:
        for label, field in (("integrator", "vos1"), ("comparator", "vos2")):
            variables.append(
                _Variable(
                    f"U1.offset.{label}",
                    _added((field,), vos),
                    lambda z: _signed(vos * z, "V"),
                    non_monotone=True,
                )
            )
    ib = u1.bias_a
    if ib != 0:
        variables.append(
            _Variable(
                "U1.bias",
                _scaled(("ib1", "ib2"), BIAS_SPREAD),
                lambda z: format_value(ib * (1 + BIAS_SPREAD * z), "A"),
                non_monotone=True,
            )
        )
    sr = u1.slew_v_per_us
    if math.isfinite(sr) and sr > 0:
        variables.append(
            _Variable(
                "U1.slew",
                _scaled(("slew_rise", "slew_fall"), SLEW_SPREAD),
                lambda z: f"{sr * (1 + SLEW_SPREAD * z):.4g} V/µs ({_pct(SLEW_SPREAD * z)})",
            )
        )
    td = u1.delay_s
    if td > 0:
        variables.append(
            _Variable(
                "U1.delay",
                _scaled(("delay",), DELAY_SPREAD),
                lambda z: (
                    f"{format_value(td * (1 + DELAY_SPREAD * z), 's')} ({_pct(DELAY_SPREAD * z)})"
                ),
            )
        )
    return board, variables


def _evaluate(board: _Board, variables: list[_Variable], z: FloatArray) -> FloatArray:
    """Metrics (rows, 3) at the deviations ``z`` (rows, n)."""
    values: _Values = {f: getattr(board.point, f) for f in _POINT_FIELDS}
    for i, var in enumerate(variables):
        var.apply(values, z[:, i])
    return _metrics(_predict(_Point(**values), board.v_ref, board.control), z.shape[0])


# --------------------------------------------------------------------------------------------
# Worst case


@dataclass(frozen=True)
class WorstCase:
    """Extremes of frequency (Hz), triangle amplitude (Vpp) and duty_high over the spread.

    ``corners`` maps "<metric>_lo"/"<metric>_hi" (metric one of frequency_hz, amplitude_vpp,
    duty_high) to the setting of every spread variable there, as text ({"R1": "9.9 kΩ
    (-1 %)", "T": "85 °C", ...}). ``method`` is "corners" (all 2^n corners evaluated) or
    "local_search" (per-variable extremes, then single and pair flips until none improves);
    either way the non-monotone variables (offsets, bias) are then scanned inside their range.
    """

    frequency_hz: tuple[float, float]
    amplitude_vpp: tuple[float, float]
    duty_high: tuple[float, float]
    corners: dict[str, dict[str, str]]
    method: str
    variables: tuple[str, ...]
    evaluations: int

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


class _Search:
    """Evaluates deviation vectors and counts the evaluations."""

    def __init__(self, board: _Board, variables: list[_Variable]):
        self.board = board
        self.variables = variables
        self.evaluations = 0

    def __call__(self, z: FloatArray) -> FloatArray:
        self.evaluations += z.shape[0]
        return _evaluate(self.board, self.variables, z)

    def local_search(self, metric: int, sign: float) -> FloatArray:
        """Maximise sign·metric: each variable to its better end (one-at-a-time probes from
        the centre), then the best of all single and pair flips while one improves it."""
        n = len(self.variables)
        probes = np.vstack([-np.eye(n), np.eye(n)])
        vals = sign * self(probes)[:, metric]
        z = np.where(vals[n:] >= vals[:n], 1.0, -1.0)
        best = float(sign * self(z[None, :])[0, metric])
        i_idx, j_idx = np.triu_indices(n)  # i == j: single flip; i < j: pair flip
        moves = np.ones((len(i_idx), n))
        moves[np.arange(len(i_idx)), i_idx] = -1.0
        moves[np.arange(len(i_idx)), j_idx] = -1.0
        for _ in range(4 * n):
            trial = moves * z[None, :]
            vals = sign * self(trial)[:, metric]
            k = int(np.argmax(vals))
            if not vals[k] > best + 1e-15 * abs(best):
                break
            z, best = trial[k], float(vals[k])
        return z

    def refine(
        self, starts: FloatArray, metric: npt.NDArray[np.int64], sign: FloatArray
    ) -> tuple[FloatArray, FloatArray]:
        """From each start row, scan every non-monotone variable over [-1, 1] (zooming grid,
        coordinate-wise, twice) to maximise that row's sign·metric; every row is refined in
        the same batched evaluations. Returns the refined rows and their sign·metric."""
        idx = [i for i, v in enumerate(self.variables) if v.non_monotone]
        rows = starts.copy()
        n = len(rows)
        at = np.arange(n)

        def objective(values: FloatArray, repeat: int) -> FloatArray:
            cols = np.repeat(metric, repeat)
            return np.asarray(np.repeat(sign, repeat) * values[np.arange(len(cols)), cols])

        vals = objective(self(rows), 1)
        if idx:
            for _ in range(2):
                for i in idx:
                    lo = np.full(n, -1.0)
                    hi = np.full(n, 1.0)
                    for _ in range(_REFINE_ZOOMS):
                        grid = np.linspace(0.0, 1.0, _REFINE_POINTS)
                        trial_z = lo[:, None] + (hi - lo)[:, None] * grid[None, :]
                        trial = np.repeat(rows, _REFINE_POINTS, axis=0)
                        trial[:, i] = trial_z.ravel()
                        tv = objective(self(trial), _REFINE_POINTS).reshape(n, _REFINE_POINTS)
                        j = np.argmax(tv, axis=1)
                        better = tv[at, j] > vals
                        rows[better, i] = trial_z[at, j][better]
                        vals = np.where(better, tv[at, j], vals)
                        step = (hi - lo) / (_REFINE_POINTS - 1)
                        lo = np.maximum(rows[:, i] - step, -1.0)
                        hi = np.minimum(rows[:, i] + step, 1.0)
        return rows, vals


def _corners(n: int) -> FloatArray:
    """All 2^n sign vectors, (2^n, n)."""
    bits = (np.arange(2**n)[:, None] >> np.arange(n)[None, :]) & 1
    return np.asarray(bits * 2.0 - 1.0, dtype=float)


def corner_extremes(design: Design, spec: Spec) -> dict[str, tuple[float, float]]:
    """(min, max) of frequency, amplitude and duty over every corner (each spread variable at
    an end), evaluated by brute force: 2^n full-model evaluations, n <= 16.

    Cheaper than ``worst_case`` (no interior scan of the offset and bias variables, whose
    effect on frequency is second order); used to prove trim and tuning coverage.
    """
    _check_inputs(design, spec)
    board, variables = _spread_board(design, spec)
    if len(variables) > 16:
        raise ValueError(f"corner_extremes: {len(variables)} spread variables (at most 16)")
    vals = _evaluate(board, variables, _corners(len(variables)))
    return {
        metric: (float(vals[:, m].min()), float(vals[:, m].max()))
        for m, metric in enumerate(_METRICS)
    }


def worst_case(
    design: Design, spec: Spec, *, max_corner_variables: int = MAX_CORNER_VARIABLES
) -> WorstCase:
    """Worst-case extremes of f, triangle amplitude and duty over tolerances, rails,
    temperature and op-amp spread (see the module docstring for the variables).

    With n spread variables: n <= ``max_corner_variables`` evaluates all 2^n corners at once;
    otherwise each extreme starts from every variable at its better end (one-at-a-time probe)
    and takes the best single or pair flip while one improves it. The model is monotone in
    every part value; f is not monotone in the integrator error Ve = Vos1 + Ib·R3 (it peaks at
    Ve = (VH - VL)/2), so the 16 best corners of each extreme are then scanned along the
    offset and bias variables.
    """
    _check_inputs(design, spec)
    if isinstance(max_corner_variables, bool) or not isinstance(max_corner_variables, int):
        raise TypeError(f"max_corner_variables: expected an int, got {max_corner_variables!r}")
    if max_corner_variables < 0:
        raise ValueError(f"max_corner_variables: must be >= 0, got {max_corner_variables}")
    board, variables = _spread_board(design, spec)
    search = _Search(board, variables)
    n = len(variables)
    method = "corners" if n <= max_corner_variables else "local_search"
    if method == "corners":
        all_z = _corners(n)
        all_vals = search(all_z)
    groups = [
        (m, side, sign) for m in range(len(_METRICS)) for side, sign in (("lo", -1.0), ("hi", 1.0))
    ]
    starts = []
    for m, _, sign in groups:
        if method == "corners":
            order = np.argsort(-sign * all_vals[:, m], kind="stable")[:_REFINE_CORNERS]
            starts.append(all_z[order])
        else:
            starts.append(search.local_search(m, sign)[None, :])
    sizes = [len(st) for st in starts]
    metric_of = np.repeat([g[0] for g in groups], sizes)
    sign_of = np.repeat([g[2] for g in groups], sizes).astype(float)
    rows, vals = search.refine(np.vstack(starts), metric_of, sign_of)
    bounds: dict[str, tuple[float, float]] = {}
    corners: dict[str, dict[str, str]] = {}
    ends: dict[str, float] = {}
    first = 0
    for (m, side, sign), size in zip(groups, sizes, strict=True):
        k = first + int(np.argmax(vals[first : first + size]))
        first += size
        metric = _METRICS[m]
        ends[f"{metric}_{side}"] = sign * float(vals[k])
        corners[f"{metric}_{side}"] = {
            v.name: v.describe(float(rows[k, i])) for i, v in enumerate(variables)
        }
    for metric in _METRICS:
        bounds[metric] = (ends[f"{metric}_lo"], ends[f"{metric}_hi"])
    return WorstCase(
        frequency_hz=bounds["frequency_hz"],
        amplitude_vpp=bounds["amplitude_vpp"],
        duty_high=bounds["duty_high"],
        corners=corners,
        method=method,
        variables=tuple(v.name for v in variables),
        evaluations=search.evaluations,
    )


# --------------------------------------------------------------------------------------------
# Monte Carlo


@dataclass(frozen=True)
class YieldResult:
    """Monte Carlo yield: the share of boards with f inside the spec's frequency band AND the
    triangle amplitude inside its band.

    ``confidence_interval`` is the Wilson score interval at ``confidence``:
    (p + z²/2n ± z·sqrt(p(1 - p)/n + z²/4n²))/(1 + z²/n), z the normal quantile.
    ``spread`` maps frequency_hz, amplitude_vpp and duty_high to their min, p1, p50, p99, max.
    """

    fraction: float
    passed: int
    samples: int
    confidence: float
    confidence_interval: tuple[float, float]
    seed: int
    distribution: str
    spread: dict[str, dict[str, float]]

    def to_dict(self) -> dict[str, Any]:
        return {
            "fraction": self.fraction,
            "passed": self.passed,
            "samples": self.samples,
            "confidence": self.confidence,
            "confidence_interval": list(self.confidence_interval),
            "seed": self.seed,
            "distribution": self.distribution,
            "spread": {k: dict(v) for k, v in self.spread.items()},
        }


def wilson_interval(
    passed: int, samples: int, confidence: float = CONFIDENCE
) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion passed/samples (see YieldResult)."""
    if samples < 1:
        raise ValueError(f"samples: must be >= 1, got {samples}")
    if not 0 <= passed <= samples:
        raise ValueError(f"passed: must be between 0 and samples ({samples}), got {passed}")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence: must be between 0 and 1, got {confidence}")
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    p = passed / samples
    denom = 1 + z * z / samples
    centre = (p + z * z / (2 * samples)) / denom
    half = z * math.sqrt(p * (1 - p) / samples + z * z / (4 * samples * samples)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


def _deviations(
    rng: np.random.Generator, variables: list[_Variable], samples: int, distribution: str
) -> FloatArray:
    """(samples, n) deviations: temperature uniform over [-1, 1]; the rest uniform over
    [-1, 1] or normal with σ = 1/NORMAL_SIGMAS truncated at ±1 (inverse-CDF sampling)."""
    z = np.empty((samples, len(variables)))
    edge = float(special.ndtr(-NORMAL_SIGMAS))
    for i, var in enumerate(variables):
        u = rng.random(samples)
        if var.temperature or distribution == "uniform":
            z[:, i] = 2.0 * u - 1.0
        else:
            z[:, i] = special.ndtri(edge + u * (1.0 - 2.0 * edge)) / NORMAL_SIGMAS
    return z


def monte_carlo(
    design: Design,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> YieldResult:
    """Monte Carlo yield over the spread variables of the module docstring.

    ``distribution="normal"`` (default): each ± bound is 3σ of a normal truncated at the
    bound (tolerances, class II band, rails, offsets, bias, slew, delay alike; an offset's σ
    is therefore the catalogued typical/3). ``"uniform"``: uniform over each ± bound.
    Temperature is uniform over the environment range in both. numpy Generator seeded with
    ``seed``; the same seed gives the same samples.
    """
    _check_inputs(design, spec)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
        raise ValueError(f"samples: must be an integer >= 1, got {samples!r}")
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ValueError(f"seed: must be an integer >= 0, got {seed!r}")
    if distribution not in ("normal", "uniform"):
        raise ValueError(f"distribution: must be 'normal' or 'uniform', got {distribution!r}")
    board, variables = _spread_board(design, spec)
    rng = np.random.default_rng(seed)
    z = _deviations(rng, variables, samples, distribution)
    vals = _evaluate(board, variables, z)
    f, amp = vals[:, 0], vals[:, 1]
    ft, tf = spec.target.target_hz, spec.target.tolerance_pct / 100
    at, ta = spec.triangle.amplitude_vpp, spec.triangle.tolerance_pct / 100
    ok = (
        (f >= ft * (1 - tf))
        & (f <= ft * (1 + tf))
        & (amp >= at * (1 - ta))
        & (amp <= at * (1 + ta))
    )
    passed = int(np.count_nonzero(ok))
    spread = {
        metric: {
            "min": float(np.min(vals[:, m])),
            "p1": float(np.percentile(vals[:, m], 1)),
            "p50": float(np.percentile(vals[:, m], 50)),
            "p99": float(np.percentile(vals[:, m], 99)),
            "max": float(np.max(vals[:, m])),
        }
        for m, metric in enumerate(_METRICS)
    }
    return YieldResult(
        fraction=passed / samples,
        passed=passed,
        samples=samples,
        confidence=CONFIDENCE,
        confidence_interval=wilson_interval(passed, samples, CONFIDENCE),
        seed=seed,
        distribution=distribution,
        spread=spread,
    )


# --------------------------------------------------------------------------------------------
# Sensitivities

#: Sensitivity name -> the fields of the point it scales.
_SENSITIVITY_FIELDS: dict[str, tuple[str, ...]] = {
    "R1": ("r1",),
    "R2": ("r2",),
    "R3": ("r3",),
    "C1": ("c1",),
    "V+": ("v_pos",),
    "V-": ("v_neg",),
    "U1.slew": ("slew_rise", "slew_fall"),
    "U1.delay": ("delay",),
    "U1.gbw": ("gbw",),
    "U1.swing_pos": ("swing_pos",),
    "U1.swing_neg": ("swing_neg",),
    "U1.offset": ("vos1", "vos2"),
    "U1.bias": ("ib1", "ib2"),
}


@dataclass(frozen=True)
class Sensitivity:
    """Normalised sensitivities S = (x/y)·(∂y/∂x) = ∂ln y/∂ln x of y = frequency and y =
    triangle amplitude, keyed by "R1", "R2", "R3", "C1", "V+", "V-", "U1.slew", "U1.delay",
    "U1.gbw", "U1.swing_pos", "U1.swing_neg", "U1.offset", "U1.bias"."""

    frequency: dict[str, float]
    amplitude: dict[str, float]

    def to_dict(self) -> dict[str, Any]:
        return {"frequency": dict(self.frequency), "amplitude": dict(self.amplitude)}


def _nominal(design: Design, spec: Spec) -> Oscillator:
    return design.oscillator(rails_from_supply(spec.supply), 25.0)


def sensitivities(design: Design, spec: Spec) -> Sensitivity:
    """Normalised sensitivities at the nominal point (25 °C, nominal rails, op amp as
    catalogued), by central differences in log space:
    S ≈ [ln y(x·e^h) - ln y(x·e^-h)]/(2h), h = SENSITIVITY_STEP.

    "U1.slew" scales rise and fall slew together, "U1.offset" both channels' offsets, "U1.bias"
    both bias currents (they are one part's parameters). A parameter that is zero (offset 0,
    a single supply's V- = 0) has S = x·∂ln y/∂x = 0 exactly and is reported as 0.0; an
    infinite one (slew or GBW = inf) has S = 0 in the limit and comes out as 0.0.
    """
    _check_inputs(design, spec)
    board = _Board.of(design, rails_from_supply(spec.supply), 25.0)
    names = list(_SENSITIVITY_FIELDS)
    rows = 2 * len(names)
    factors = {f: np.ones(rows) for f in _Point.__dataclass_fields__}
    for i, name in enumerate(names):
        for f in _SENSITIVITY_FIELDS[name]:
            factors[f][2 * i] = math.exp(SENSITIVITY_STEP)
            factors[f][2 * i + 1] = math.exp(-SENSITIVITY_STEP)
    point = replace(board.point, **{f: getattr(board.point, f) * factors[f] for f in factors})
    vals = _metrics(_predict(point, board.v_ref, board.control), rows)
    with np.errstate(invalid="ignore"):
        logs = np.log(vals[:, :2])
    slopes = (logs[0::2] - logs[1::2]) / (2 * SENSITIVITY_STEP)
    out: list[dict[str, float]] = [{}, {}]
    for i, name in enumerate(names):
        zero = all(getattr(board.point, f) == 0 for f in _SENSITIVITY_FIELDS[name])
        for j in range(2):
            s = float(slopes[i, j])
            out[j][name] = 0.0 if zero or not math.isfinite(s) else s
    return Sensitivity(frequency=out[0], amplitude=out[1])


# --------------------------------------------------------------------------------------------
# Temperature drift


@dataclass(frozen=True)
class Drift:
    """End-point temperature drift (ppm/°C) of frequency and amplitude between ``temp_low_c``
    and ``temp_high_c``: 1e6·[y(T_high) - y(T_low)]/[y(25 °C)·(T_high - T_low)]."""

    frequency_ppm_per_c: float
    amplitude_ppm_per_c: float
    temp_low_c: float
    temp_high_c: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency_ppm_per_c": self.frequency_ppm_per_c,
            "amplitude_ppm_per_c": self.amplitude_ppm_per_c,
            "temp_low_c": self.temp_low_c,
            "temp_high_c": self.temp_high_c,
        }


def temperature_drift(design: Design, spec: Spec) -> Drift:
    """Frequency and amplitude drift over the environment range (end-point slope; a range
    that is a single point T0 uses T0 ± 1 °C), at nominal rails with the op amp as catalogued.

    Values move by their tempcos (``Design.oscillator``); R1 and R2 share the temperature, so
    with equal tempcos k = R1/R2 is constant and they add no amplitude drift. A class II
    capacitor has no linear tempco and adds nothing here (its band is in the worst case).
    """
    _check_inputs(design, spec)
    env = spec.environment
    lo, hi = env.temp_min_c, env.temp_max_c
    if hi == lo:
        lo, hi = lo - 1.0, hi + 1.0
    rails = rails_from_supply(spec.supply)
    ref = design.oscillator(rails, 25.0).prediction()
    p_lo = design.oscillator(rails, lo).prediction()
    p_hi = design.oscillator(rails, hi).prediction()

    def slope(y_lo: float, y_hi: float, y_ref: float) -> float:
        return 1e6 * (y_hi - y_lo) / (y_ref * (hi - lo))

    return Drift(
        frequency_ppm_per_c=slope(
            float(p_lo.frequency_hz), float(p_hi.frequency_hz), float(ref.frequency_hz)
        ),
        amplitude_ppm_per_c=slope(
            float(p_lo.amplitude_vpp), float(p_hi.amplitude_vpp), float(ref.amplitude_vpp)
        ),
        temp_low_c=lo,
        temp_high_c=hi,
    )


# --------------------------------------------------------------------------------------------
# The bundle


@dataclass(frozen=True)
class Analysis:
    """Everything about one design: the nominal prediction (25 °C, nominal rails), worst
    case, Monte Carlo yield, sensitivities and temperature drift."""

    predicted: Prediction
    worst_case: WorstCase
    yield_result: YieldResult
    sensitivity: Sensitivity
    drift: Drift

    @property
    def yield_fraction(self) -> float:
        return self.yield_result.fraction

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready data (plain floats, lists and dicts)."""
        p = self.predicted
        return {
            "predicted": {
                "frequency_hz": float(p.frequency_hz),
                "amplitude_vpp": float(p.amplitude_vpp),
                "duty_high": float(p.duty_high),
                "offset_v": float(p.offset_v),
                "square_high_v": float(p.square_high_v),
                "square_low_v": float(p.square_low_v),
            },
            "worst_case": self.worst_case.to_dict(),
            "yield_fraction": self.yield_fraction,
            "yield": self.yield_result.to_dict(),
            "sensitivity": self.sensitivity.to_dict(),
            "drift": self.drift.to_dict(),
        }


def analyse(
    design: Design,
    spec: Spec,
    *,
    samples: int = 20000,
    seed: int = 0,
    distribution: Distribution = "normal",
) -> Analysis:
    """Nominal prediction, worst case, Monte Carlo yield, sensitivities and drift of one
    design against one spec (see the functions of the same names)."""
    _check_inputs(design, spec)
    return Analysis(
        predicted=_nominal(design, spec).prediction(),
        worst_case=worst_case(design, spec),
        yield_result=monte_carlo(
            design, spec, samples=samples, seed=seed, distribution=distribution
        ),
        sensitivity=sensitivities(design, spec),
        drift=temperature_drift(design, spec),
    )


def _check_inputs(design: object, spec: object) -> None:
    if not isinstance(design, Design):
        raise TypeError(f"design: expected a tristock.design.Design, got {type(design).__name__}")
    if not isinstance(spec, Spec):
        raise TypeError(f"spec: expected a tristock.spec.Spec, got {type(spec).__name__}")


__all__ = [
    "CONFIDENCE",
    "DELAY_SPREAD",
    "MAX_CORNER_VARIABLES",
    "NORMAL_SIGMAS",
    "OFFSET_BOUND",
    "SENSITIVITY_STEP",
    "SLEW_SPREAD",
    "Analysis",
    "Drift",
    "Sensitivity",
    "WorstCase",
    "YieldResult",
    "analyse",
    "monte_carlo",
    "sensitivities",
    "temperature_drift",
    "wilson_interval",
    "worst_case",
]
