"""The search model: the oscillator in log space with per-op-amp constants.

For one op amp on the spec's rails the closed-form model (``tristock.circuit``) reduces to

    T(P) = c·(P + d),   P = k·R3·C1,   c = (VH + VL)² / (VH·VL),   k = R1/R2
    A(k) = k·(VH + VL)·(1 + ε)

where d (s) is the comparator's effective delay (td + GBW delay + half the transition) and ε
the relative overshoot of the triangle past its thresholds. Because the period is pinned to the
target, d and ε are constants per op amp: they are computed once from the full model at the
target point (``OpAmpTerms``). The search then works on

    e_f = ln(f / f_target) = ln((X + d) / (P + d)),   X = T_target/c - d
    e_A = ln(A / A_target) = ln(k / k_target)

which is exact within this model. What the model leaves out (integrator offset and bias
current, the small dependence of the GBW delay on the chosen parts) is second order; every
answer is re-checked by the full model and dropped if it fails there.

Scores are integers (``SCORE_RESOLUTION`` = 1e-6 of a score unit; for ``frequency_error``
that is 1 ppm of frequency), so both engines and brute force compare exactly.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.special import ndtr

from tristock.catalog import Catalog
from tristock.circuit import OpAmpModel, Prediction, predict, square_levels
from tristock.design import rails_from_supply
from tristock.eseries import is_member
from tristock.parts import Capacitor, OpAmp, Resistor
from tristock.spec import Spec

SCORE_RESOLUTION = 1e-6
#: Secondary keys (tie-breakers) are packed below the primary score: primary·SECONDARY_SPAN + s.
SECONDARY_SPAN = 1 << 24
COST_RESOLUTION = 1e-4  # currency units per integer step

#: Op-amp spread assumed for worst case (DESIGN: catalogued values are typical).
SLEW_SPREAD = 0.20
DELAY_SPREAD = 0.30

#: Weights of the balanced score (README, "Ranking"). Each term is dimensionless.
BALANCED_WEIGHTS = {
    "frequency_error": 1.0,  # |e_f| / band_f
    "amplitude_error": 0.5,  # |e_A| / band_A
    "tolerance_spread": 0.5,  # Σ part tolerances (ln) / band_f
    "cost": 0.25,  # cost per board / cost scale
    "bom_lines": 0.02,  # per distinct stock code
    "sensitivity": 0.25,  # share of the period set by op-amp timing
}

#: Variance of a normal truncated at ±3σ, as a fraction of σ² (scipy.stats.truncnorm(-3, 3).var()).
_TRUNCATED_NORMAL_VAR = 0.9733


def _q(x: NDArray[np.float64] | float) -> NDArray[np.int64]:
    return np.rint(np.asarray(x, dtype=np.float64) / SCORE_RESOLUTION).astype(np.int64)


@dataclass(frozen=True)
class OpAmpTerms:
    """Constants of one op amp on the spec's rails (see module docstring)."""

    index: int
    part: OpAmp
    vh: float
    vl: float
    c: float
    d: float
    x: float
    ln_k_target: float
    overshoot: float
    gain: float  # ∂e_f/∂ln P at the target: X/(X + d)
    rail_f: tuple[float, float]  # ln f spread (down, up) from rails and op-amp spread
    rail_a: tuple[float, float]
    timing_share: float  # c·d/T: share of the period set by op-amp timing
    peak_v: float  # largest |triangle - reference| at the target amplitude (V)


@dataclass(frozen=True)
class Exclusion:
    """Why a part or a whole designator was left out, in plain words."""

    designator: str
    part_id: str | None
    reason: str


@dataclass
class PartTable:
    """Eligible parts of one kind as arrays, sorted by value."""

    parts: list[Any]  # Resistor or Capacitor rows, sorted by value
    ln_value: NDArray[np.float64]
    tol: NDArray[np.float64]  # fraction
    tempco: NDArray[np.float64]  # ppm/°C
    extra_band: NDArray[np.float64]  # class II temperature band, fraction
    cost: NDArray[np.float64]
    stock: NDArray[np.int64]
    voltage: NDArray[np.float64]  # capacitors: rated DC voltage; resistors: inf

    @classmethod
    def of(cls, parts: Sequence[Resistor] | Sequence[Capacitor]) -> PartTable:
        items: list[Any] = sorted(parts, key=lambda p: (p.value, p.id))
        tempco = [p.tempco_ppm if p.tempco_ppm is not None else 0.0 for p in items]
        band = [
            (p.temp_band_pct or 0.0) / 100 if isinstance(p, Capacitor) and p.is_class_ii else 0.0
            for p in items
        ]
        return cls(
            parts=items,
            ln_value=np.log(np.array([p.value for p in items], dtype=np.float64)),
            tol=np.array([p.tolerance_pct / 100 for p in items], dtype=np.float64),
            tempco=np.array(tempco, dtype=np.float64),
            extra_band=np.array(band, dtype=np.float64),
            cost=np.array([p.unit_cost for p in items], dtype=np.float64),
            stock=np.array([p.stock for p in items], dtype=np.int64),
            voltage=np.array([getattr(p, "voltage_v", math.inf) for p in items], dtype=np.float64),
        )

    def __len__(self) -> int:
        return len(self.parts)


@dataclass
class SearchModel:
    """Everything both engines need: eligible parts, op-amp constants, scoring."""

    spec: Spec
    resistors: PartTable
    capacitors: PartTable
    opamps: list[OpAmpTerms]
    exclusions: list[Exclusion] = field(default_factory=list)
    #: Optional per-designator masks (True = this part may fill the position), used to pin or
    #: free positions when re-optimising. Keys U1 (over ``opamps``), R1, R2, R3 (over
    #: ``resistors``), C1 (over ``capacitors``); a missing key allows every part.
    allowed: dict[str, NDArray[np.bool_]] = field(default_factory=dict)

    def allows(self, designator: str, size: int) -> NDArray[np.bool_]:
        mask = self.allowed.get(designator)
        return np.ones(size, dtype=bool) if mask is None else mask

    # ---- scoring -------------------------------------------------------------------------
    @property
    def mode(self) -> str:
        return self.spec.ranking.by

    @property
    def boards(self) -> int:
        return self.spec.build.boards

    @property
    def band_f(self) -> tuple[float, float]:
        return self.spec.frequency_band_ln

    @property
    def band_a(self) -> tuple[float, float]:
        return self.spec.amplitude_band_ln

    @property
    def cost_scale(self) -> float:
        """Cost that counts as one unit in the balanced score: max_cost, else 1 currency unit."""
        return self.spec.limits.max_cost or 1.0

    def resistor_term(self, idx: NDArray[np.int64]) -> NDArray[np.int64]:
        """Additive primary-score term of a resistor in any position (integer)."""
        t = self.resistors
        return self._part_term(t.tol[idx], t.cost[idx])

    def capacitor_term(self, idx: NDArray[np.int64]) -> NDArray[np.int64]:
        t = self.capacitors
        return self._part_term(t.tol[idx] + t.extra_band[idx], t.cost[idx])

    def _part_term(self, tol: NDArray[np.float64], cost: NDArray[np.float64]) -> NDArray[np.int64]:
        if self.mode == "balanced":
            w = BALANCED_WEIGHTS
            value = (
                w["tolerance_spread"] * tol / self.band_f[1]
                + w["cost"] * cost / self.cost_scale
                + w["bom_lines"]
            )
            return _q(value)
        if self.mode == "cost":
            return np.rint(cost / COST_RESOLUTION).astype(np.int64)
        return np.zeros(np.shape(tol), dtype=np.int64)

    def opamp_term(self, u: OpAmpTerms) -> int:
        if self.mode == "balanced":
            w = BALANCED_WEIGHTS
            value = (
                w["cost"] * u.part.cost_per_board / self.cost_scale
                + w["bom_lines"]
                + w["sensitivity"] * u.timing_share
            )
            return int(_q(value))
        if self.mode == "cost":
            return round(u.part.cost_per_board / COST_RESOLUTION)
        return 0

    def shared_line_credit(self) -> int:
        """Score returned per BOM line saved when one stock code fills two positions."""
        if self.mode == "balanced":
            return int(_q(BALANCED_WEIGHTS["bom_lines"]))
        return 0

    def error_term(self, e_f: NDArray[np.float64], e_a: NDArray[np.float64]) -> NDArray[np.int64]:
        """Primary-score term of the errors (integer)."""
        return self.frequency_term(e_f) + self.amplitude_term(e_a)

    def frequency_term(self, e_f: NDArray[np.float64]) -> NDArray[np.int64]:
        """Primary-score term of the frequency error (integer, additive)."""
        if self.mode == "balanced":
            return _q(BALANCED_WEIGHTS["frequency_error"] * np.abs(e_f) / self.band_f[1])
        if self.mode == "frequency_error":
            return _q(np.abs(e_f))
        return np.zeros(np.shape(e_f), dtype=np.int64)

    def frequency_budget(self, budget: NDArray[np.int64]) -> NDArray[np.float64]:
        """Largest |e_f| whose frequency term is at most ``budget`` (inverse of the above)."""
        slack = (np.asarray(budget, dtype=np.float64) + 0.5) * SCORE_RESOLUTION * (1 + 1e-9)
        if self.mode == "balanced":
            return slack * self.band_f[1] / BALANCED_WEIGHTS["frequency_error"]
        if self.mode == "frequency_error":
            return slack
        return np.full(np.shape(budget), np.inf)

    def amplitude_term(self, e_a: NDArray[np.float64]) -> NDArray[np.int64]:
        if self.mode == "balanced":
            return _q(BALANCED_WEIGHTS["amplitude_error"] * np.abs(e_a) / self.band_a[1])
        return np.zeros(np.shape(e_a), dtype=np.int64)

    def secondary(self, e_f: NDArray[np.float64], cost: NDArray[np.float64]) -> NDArray[np.int64]:
        """Tie-breaker packed under the primary score: cost for frequency_error, else |e_f|."""
        if self.mode == "frequency_error":
            s = np.rint(np.asarray(cost) / COST_RESOLUTION)
        else:
            s = np.rint(np.abs(e_f) / SCORE_RESOLUTION)
        return np.minimum(s, SECONDARY_SPAN - 1).astype(np.int64)

    def yield_estimate(
        self,
        e_f: NDArray[np.float64],
        e_a: NDArray[np.float64],
        var_f: NDArray[np.float64],
        var_a: NDArray[np.float64],
    ) -> NDArray[np.float64]:
        """Y ≈ P(ln f in band)·P(ln A in band) with ln f ~ N(e_f, var_f), ln A ~ N(e_a, var_a).

        Treats frequency and amplitude as independent (they share R1 and R2, so this is an
        estimate; the Monte Carlo of the analysis is the measured value).
        """
        (fa, fb), (aa, ab) = self.band_f, self.band_a
        sf, sa = np.sqrt(np.maximum(var_f, 1e-30)), np.sqrt(np.maximum(var_a, 1e-30))
        yf = ndtr((fb - e_f) / sf) - ndtr((fa - e_f) / sf)
        ya = ndtr((ab - e_a) / sa) - ndtr((aa - e_a) / sa)
        return np.asarray(yf * ya, dtype=np.float64)

    @staticmethod
    def variance(tol: NDArray[np.float64]) -> NDArray[np.float64]:
        """Variance of ln(value) for a tolerance: normal, tolerance = 3σ, truncated at it."""
        return np.asarray((np.log1p(tol) / 3) ** 2 * _TRUNCATED_NORMAL_VAR, dtype=np.float64)


# ---- building the model ------------------------------------------------------------------


def _opamp_terms(index: int, part: OpAmp, spec: Spec) -> tuple[OpAmpTerms | None, str | None]:
    """Per-op-amp constants from the full model at the target, or the reason it cannot work."""
    supply = spec.supply
    rails = rails_from_supply(supply)
    span_lo = supply.span_v * (1 - supply.tolerance_pct / 100)
    span_hi = supply.span_v * (1 + supply.tolerance_pct / 100)
    if span_lo < part.supply_min_v or span_hi > part.supply_max_v:
        return None, (
            f"supply span {span_lo:g}..{span_hi:g} V is outside its rating "
            f"{part.supply_min_v:g}..{part.supply_max_v:g} V"
        )
    model = OpAmpModel.from_part(part)
    vh, vl = square_levels(rails, model)
    if vh <= 0 or vl <= 0:
        return None, "its output cannot swing both sides of the reference on these rails"
    c = (vh + vl) ** 2 / (vh * vl)
    t_target = 1.0 / spec.target.target_hz
    amp = spec.triangle.amplitude_vpp
    k = amp / (vh + vl)
    if k >= 0.95:
        return None, (
            f"{amp:g} Vpp needs k = R1/R2 = {k:.3f} with its {vh:.2f}/{vl:.2f} V swing; "
            "the thresholds would reach the square levels"
        )
    r3 = 10e3
    p = t_target / c
    # Solve for (P, k) where the full model hits the target period and amplitude. T(P) is
    # c·(P + d) with d nearly constant, so a Newton step on P uses the slope c; A is nearly
    # proportional to k, so k takes a ratio step. A few steps reach 1e-13.
    for _ in range(200):
        pr = _predict_at(model, vh, vl, k, r3, p)
        period = float(pr.period_s)
        step_k = amp / float(pr.amplitude_vpp)
        p += (t_target - period) / c
        k *= step_k
        if not (math.isfinite(p) and p > 0 and 0 < k < 1):
            return None, "the model has no operating point at this frequency and amplitude"
        if abs(period / t_target - 1) < 1e-13 and abs(step_k - 1) < 1e-13:
            break
    pr = _predict_at(model, vh, vl, k, r3, p)
    x = p
    d = t_target / c - x
    if x <= 0:
        return None, (
            f"its comparator delay and transition ({d * 1e6:.3g} µs effective) "
            f"exceed the period {t_target * 1e6:.3g} µs"
        )
    tau = (vh + vl) / part.slew_v_per_s
    if tau > 0.2 * t_target:
        return None, (
            f"its output transition {tau * 1e6:.3g} µs is {tau / t_target:.0%} of the period "
            "(model not trustworthy above 20 %)"
        )
    slope = max(vh, vl) / (r3 * (p / (k * r3)))
    if part.slew_v_per_s < slope:
        return None, (
            f"triangle slope {slope / 1e6:.3g} V/µs exceeds its slew rate "
            f"{part.slew_v_per_us:g} V/µs"
        )
    peak_hi = float(pr.peak_high_v)
    peak_lo = float(pr.peak_low_v)
    if peak_hi >= vh or -peak_lo >= vl:
        return None, (
            f"triangle peaks {peak_lo:+.2f}/{peak_hi:+.2f} V exceed its output swing "
            f"-{vl:.2f}/+{vh:.2f} V"
        )
    overshoot = float(pr.amplitude_vpp) / (k * (vh + vl)) - 1.0
    rail_f, rail_a = _rail_spread(part, spec, k, r3, p, pr)
    return (
        OpAmpTerms(
            index=index,
            part=part,
            vh=vh,
            vl=vl,
            c=c,
            d=d,
            x=x,
            ln_k_target=math.log(k),
            overshoot=overshoot,
            gain=x / (x + d),
            rail_f=rail_f,
            rail_a=rail_a,
            timing_share=c * d / t_target,
            peak_v=max(abs(peak_hi), abs(peak_lo)),
        ),
        None,
    )


def _predict_at(
    model: OpAmpModel,
    vh: float,
    vl: float,
    k: float,
    r3: float,
    p: float,
    slew_scale: float = 1.0,
    delay_scale: float = 1.0,
) -> Prediction:
    """The full model at k, R3 and P = k·R3·C1 (R2 = 100 kΩ; only k matters)."""
    c1 = p / (k * r3)
    return predict(
        k * 100e3,
        100e3,
        r3,
        c1,
        vh,
        vl,
        slew_rise=model.slew_rise_v_per_s * slew_scale,
        slew_fall=model.slew_fall_v_per_s * slew_scale,
        delay=model.delay_s * delay_scale,
        gbw=model.gbw_hz,
        integrator_gbw=model.gbw_hz,
    )


def _rail_spread(
    part: OpAmp, spec: Spec, k: float, r3: float, p: float, nominal: Prediction
) -> tuple[tuple[float, float], tuple[float, float]]:
    """ln spreads (down, up) of f and A over rail tolerance and op-amp slew/delay spread."""
    t = spec.supply.tolerance_pct / 100
    model = OpAmpModel.from_part(part)
    f0 = float(nominal.frequency_hz)
    a0 = float(nominal.amplitude_vpp)
    lf, la = [0.0], [0.0]
    for scale in (1 - t, 1 + t):
        vh, vl = square_levels(rails_from_supply(spec.supply, scale), model)
        for s in (1 - SLEW_SPREAD, 1 + SLEW_SPREAD):
            for dl in (1 - DELAY_SPREAD, 1 + DELAY_SPREAD):
                pr = _predict_at(model, vh, vl, k, r3, p, s, dl)
                lf.append(math.log(float(pr.frequency_hz) / f0))
                la.append(math.log(float(pr.amplitude_vpp) / a0))
    return (-min(lf), max(lf)), (-min(la), max(la))


def in_series(r: Resistor, names: Sequence[str]) -> bool:
    """A resistor is "in" a series when its drawer says so or its value is a member: an E96
    drawer's 10 kΩ is an E24 value too."""
    return r.series in names or any(is_member(s, r.value_ohm) for s in names)


def build_model(spec: Spec, catalog: Catalog) -> SearchModel:
    """Eligible parts and per-op-amp constants for ``spec``; exclusions say why parts dropped."""
    lim = spec.limits
    boards = spec.build.boards
    excl: list[Exclusion] = []

    resistors: list[Resistor] = []
    for r in catalog.resistors:
        if not lim.resistance_min_ohm <= r.value_ohm <= lim.resistance_max_ohm:
            continue
        if lim.resistor_series is not None and not in_series(r, lim.resistor_series):
            continue
        if r.stock < boards:
            excl.append(Exclusion("R", r.id, f"stock {r.stock} < {boards} boards"))
            continue
        resistors.append(r)

    opamps: list[OpAmpTerms] = []
    for part in catalog.opamps:
        if lim.opamps is not None and part.id not in lim.opamps:
            continue
        need = boards * part.packages_per_board
        if part.stock < need:
            excl.append(Exclusion("U1", part.id, f"stock {part.stock} < {need} needed"))
            continue
        terms, why = _opamp_terms(len(opamps), part, spec)
        if terms is None:
            excl.append(Exclusion("U1", part.id, why or "unusable"))
            continue
        opamps.append(terms)

    peak_needed = min((u.peak_v for u in opamps), default=0.0)
    capacitors: list[Capacitor] = []
    for cap in catalog.capacitors:
        if cap.dielectric not in lim.dielectrics or cap.is_polarised:
            continue
        if cap.stock < boards:
            excl.append(Exclusion("C1", cap.id, f"stock {cap.stock} < {boards} boards"))
            continue
        if cap.voltage_v < peak_needed * (1 + spec.triangle.tolerance_pct / 100):
            excl.append(
                Exclusion("C1", cap.id, f"rated {cap.voltage_v:g} V < peak {peak_needed:.2f} V")
            )
            continue
        capacitors.append(cap)

    return SearchModel(
        spec=spec,
        resistors=PartTable.of(resistors),
        capacitors=PartTable.of(capacitors),
        opamps=opamps,
        exclusions=excl,
    )


# ---- rows: candidate combinations as arrays ---------------------------------------------


@dataclass
class Rows:
    """A batch of combinations (op amp u, R1 i1, R2 i2, R3 i3, C1 j) with their scores.

    Indices point into ``SearchModel.opamps``, ``.resistors`` and ``.capacitors``.
    ``primary`` and ``secondary`` are the integer scores; the rank key is
    (primary, secondary, stock codes).
    """

    u: NDArray[np.int64]
    i1: NDArray[np.int64]
    i2: NDArray[np.int64]
    i3: NDArray[np.int64]
    j: NDArray[np.int64]
    e_f: NDArray[np.float64]
    e_a: NDArray[np.float64]
    cost: NDArray[np.float64]
    lines: NDArray[np.int64]
    primary: NDArray[np.int64]
    secondary: NDArray[np.int64]
    yield_estimate: NDArray[np.float64]

    def __len__(self) -> int:
        return len(self.u)

    def take(self, mask: NDArray[np.bool_] | NDArray[np.int64]) -> Rows:
        return Rows(**{name: getattr(self, name)[mask] for name in self.__dataclass_fields__})

    @staticmethod
    def concat(parts: list[Rows]) -> Rows:
        return Rows(
            **{
                name: np.concatenate([getattr(p, name) for p in parts])
                for name in Rows.__dataclass_fields__
            }
        )


def frequency_error(
    model: SearchModel, u: NDArray[np.int64], ln_p: NDArray[np.float64]
) -> NDArray[np.float64]:
    """e_f = ln((X + d)/(P + d)) for op amps ``u`` at ln P = ln(k·R3·C1)."""
    x = np.array([o.x for o in model.opamps])[u]
    d = np.array([o.d for o in model.opamps])[u]
    return np.asarray(np.log((x + d) / (np.exp(ln_p) + d)), dtype=np.float64)


def pair_spread(
    model: SearchModel, u: NDArray[np.int64], i1: NDArray[np.int64], i2: NDArray[np.int64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Worst-case ln spreads (f down, f up, A down, A up) from U1, R1 and R2 alone.

    Exact for the amplitude (R3 and C1 do not move it); for the frequency a floor that R3, C1
    and temperature only add to. Rails and op-amp spread enter through ``OpAmpTerms``.
    """
    res, ops = model.resistors, model.opamps
    t1, t2 = res.tol[i1], res.tol[i2]
    gain = np.array([o.gain for o in ops])[u]
    rail_f = np.array([o.rail_f for o in ops]).reshape(-1, 2)[u]
    rail_a = np.array([o.rail_a for o in ops]).reshape(-1, 2)[u]
    env = model.spec.environment
    s_a = (res.tempco[i1] - res.tempco[i2]) * 1e-6
    ends = (s_a * (env.temp_min_c - 25.0), s_a * (env.temp_max_c - 25.0))
    up_f = gain * (-np.log1p(-t1) + np.log1p(t2)) + rail_f[:, 1]
    dn_f = gain * (np.log1p(t1) - np.log1p(-t2)) + rail_f[:, 0]
    up_a = np.log1p(t1) - np.log1p(-t2) + np.maximum(0, np.maximum(*ends)) + rail_a[:, 1]
    dn_a = -np.log1p(-t1) + np.log1p(t2) + np.maximum(0, -np.minimum(*ends)) + rail_a[:, 0]
    return dn_f, up_f, dn_a, up_a


def evaluate(
    model: SearchModel,
    u: NDArray[np.int64],
    i1: NDArray[np.int64],
    i2: NDArray[np.int64],
    i3: NDArray[np.int64],
    j: NDArray[np.int64],
    *,
    coupled: bool = True,
) -> Rows:
    """Score combinations and keep those meeting every constraint of the spec.

    Constraints: frequency and amplitude bands under the spec's guarantee, capacitor voltage,
    and (when ``coupled``) stock x boards with a stock code used in two positions counted
    twice and the cost per board. ``coupled=False`` leaves those two to the CP-SAT engine.
    """
    spec, res, cap = model.spec, model.resistors, model.capacitors
    ops = model.opamps
    boards = model.boards
    ln_k = res.ln_value[i1] - res.ln_value[i2]
    ln_p = ln_k + res.ln_value[i3] + cap.ln_value[j]
    e_f = frequency_error(model, u, ln_p)
    ln_kt = np.array([o.ln_k_target for o in ops])[u]
    e_a = ln_k - ln_kt
    (fa, fb), (aa, ab) = model.band_f, model.band_a

    ok = (e_f >= fa) & (e_f <= fb) & (e_a >= aa) & (e_a <= ab)

    # Stock: every position a stock code fills takes one piece per board.
    same12, same13, same23 = i1 == i2, i1 == i3, i2 == i3
    uses1 = 1 + same12 + same13
    uses2 = 1 + same12 + same23
    uses3 = 1 + same13 + same23
    if coupled:
        ok &= (res.stock[i1] >= boards * uses1) & (res.stock[i2] >= boards * uses2)
        ok &= res.stock[i3] >= boards * uses3
    lines = (3 + ~same12 + (~same13 & ~same23)).astype(np.int64)

    u_cost = np.array([o.part.cost_per_board for o in ops])[u]
    cost = u_cost + res.cost[i1] + res.cost[i2] + res.cost[i3] + cap.cost[j]
    if coupled and spec.limits.max_cost is not None:
        ok &= cost <= spec.limits.max_cost + 1e-12
    peak = np.array([o.peak_v for o in ops])[u]
    ok &= cap.voltage[j] >= peak * (1 + spec.triangle.tolerance_pct / 100)

    # Spread of ln f and ln A over tolerances, temperature, rails and op-amp spread.
    gain = np.array([o.gain for o in ops])[u]
    c_tol = cap.tol[j] + cap.extra_band[j]
    t1, t2, t3 = res.tol[i1], res.tol[i2], res.tol[i3]
    var_f = gain**2 * (
        model.variance(t1) + model.variance(t2) + model.variance(t3) + model.variance(c_tol)
    )
    var_a = model.variance(t1) + model.variance(t2)
    env = spec.environment
    s_f = -(res.tempco[i1] - res.tempco[i2] + res.tempco[i3] + cap.tempco[j]) * 1e-6 * gain
    s_a = (res.tempco[i1] - res.tempco[i2]) * 1e-6
    dts = (env.temp_min_c - 25.0, env.temp_max_c - 25.0)
    rail_f = np.array([o.rail_f for o in ops], dtype=float).reshape(-1, 2)[u]
    rail_a = np.array([o.rail_a for o in ops], dtype=float).reshape(-1, 2)[u]
    var_f = var_f + (rail_f.sum(axis=1) ** 2) / 12 + (s_f * (dts[1] - dts[0])) ** 2 / 12
    var_a = var_a + (rail_a.sum(axis=1) ** 2) / 12 + (s_a * (dts[1] - dts[0])) ** 2 / 12

    if spec.limits.guarantee == "worst_case":
        dn_f, up_f, dn_a, up_a = pair_spread(model, u, i1, i2)
        up_f = up_f + gain * (-np.log1p(-t3) - np.log1p(-c_tol))
        dn_f = dn_f + gain * (np.log1p(t3) + np.log1p(c_tol))
        up_f += np.maximum(0, np.maximum(s_f * dts[0], s_f * dts[1]))
        dn_f += np.maximum(0, -np.minimum(s_f * dts[0], s_f * dts[1]))
        ok &= (e_f + up_f <= fb) & (e_f - dn_f >= fa) & (e_a + up_a <= ab) & (e_a - dn_a >= aa)

    y = model.yield_estimate(e_f, e_a, var_f, var_a)
    if spec.limits.guarantee == "yield":
        ok &= y >= spec.limits.min_yield

    if model.mode == "yield":
        primary = _q(1.0 - y)
    else:
        u_term = np.array([model.opamp_term(o) for o in ops], dtype=np.int64)[u]
        primary = (
            u_term
            + model.resistor_term(i1)
            + model.resistor_term(i2)
            + model.resistor_term(i3)
            + model.capacitor_term(j)
            + model.error_term(e_f, e_a)
            - model.shared_line_credit() * (5 - lines)
        )
    rows = Rows(
        u=u,
        i1=i1,
        i2=i2,
        i3=i3,
        j=j,
        e_f=e_f,
        e_a=e_a,
        cost=cost,
        lines=lines,
        primary=primary,
        secondary=model.secondary(e_f, cost),
        yield_estimate=y,
    )
    return rows.take(ok)


def rank_key(model: SearchModel, rows: Rows, n: int) -> tuple[int, int, str, str, str, str, str]:
    """Total order of candidates: primary score, secondary score, then stock codes."""
    return (
        int(rows.primary[n]),
        int(rows.secondary[n]),
        model.opamps[rows.u[n]].part.id,
        model.resistors.parts[rows.i1[n]].id,
        model.resistors.parts[rows.i2[n]].id,
        model.resistors.parts[rows.i3[n]].id,
        model.capacitors.parts[rows.j[n]].id,
    )


def best(model: SearchModel, rows: Rows, top: int) -> Rows:
    """The ``top`` best rows in rank order (exact: ties resolved by the full key)."""
    if len(rows) == 0:
        return rows
    combos = np.stack([rows.u, rows.i1, rows.i2, rows.i3, rows.j], axis=1)
    _, first = np.unique(combos, axis=0, return_index=True)
    if len(first) < len(rows):
        rows = rows.take(np.sort(first))
    if len(rows) > top:
        score = rows.primary * SECONDARY_SPAN + rows.secondary
        kth = np.partition(score, top - 1)[top - 1]
        rows = rows.take(score <= kth)
    order = sorted(range(len(rows)), key=lambda n: rank_key(model, rows, n))[:top]
    return rows.take(np.array(order, dtype=np.int64))
