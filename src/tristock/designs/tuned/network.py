"""Boards of a tuned design as arrays: values, the pot network and the full model at a wiper.

A shared-part combination (``Shared``: U1, R1, R2, R3, RV1 and, for the divider, R4) and a
range capacitor make one range. At wiper α the pot network (``circuit.timing_network``) turns
R3 into R_eff and the drive into β·V, so the full model (``circuit.predict``) sees the
integrator R_eff, C/β and the error voltage V' = (Vos1 + Ib1·R_eff)/β, exactly as
``Design.oscillator`` and the analysis do. The dial's ends: series control, bottom of the
range at α = 1 (R_eff = R3 + RV), top at α = 0; divider, bottom at α = 0 (β = R4/(R4 + RV),
R_eff = R3 + RV∥R4), top at α = 1 (β = 1, R_eff = R3).

``Corner`` names one corner of the analysis's spread box (``tristock.analysis``: every
tolerance, each rail, temperature, offsets, bias, slew and delay at an end). A corner is a
point the analysis's box extremes include, so the frequency there bounds them: the minimum
over the box is at most it, the maximum at least it. Which end each variable takes is chosen
from the physics' signs to make the bound tight; any choice would be valid.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.opamp_schmitt.physics import predict
from tristock.circuits.opamp_schmitt.spread import (
    BIAS_SPREAD,
    DELAY_SPREAD,
    OFFSET_BOUND,
    SLEW_SPREAD,
)
from tristock.circuits.timing import timing_network
from tristock.circuits.topology import Prediction
from tristock.designs.tuned.model import TunedModel

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


def dial_ends(control: str) -> tuple[float, float]:
    """Wiper positions (bottom of the range, top of the range)."""
    return (1.0, 0.0) if control == "series" else (0.0, 1.0)


@dataclass
class Shared:
    """Shared-part combinations: indices into the model's op amps, resistors (R1, R2, R3,
    R4; R4 = -1 for the series control) and pots, and their cost (micro-units)."""

    u: I64
    i1: I64
    i2: I64
    i3: I64
    i4: I64
    v: I64
    cost: I64

    def __len__(self) -> int:
        return len(self.u)

    def take(self, sel: I64 | NDArray[np.bool_]) -> Shared:
        return Shared(**{n: getattr(self, n)[sel] for n in self.__dataclass_fields__})

    @staticmethod
    def concat(parts: list[Shared]) -> Shared:
        return Shared(
            **{
                n: np.concatenate([getattr(p, n) for p in parts])
                for n in Shared.__dataclass_fields__
            }
        )


def empty_shared() -> Shared:
    z = np.zeros(0, dtype=np.int64)
    return Shared(z, z, z, z, z, z, z)


@dataclass
class Board:
    """One board per item, everything the full model needs (SI units): R1, R2, R3, RV, R4
    and C (R4 unused by the series control), the square levels VH and VL, the op amp's slew,
    delay, GBW (both channels'), offsets and bias currents."""

    r1: F64
    r2: F64
    r3: F64
    rv: F64
    r4: F64
    c: F64
    vh: F64
    vl: F64
    slew: F64
    delay: F64
    gbw: F64
    vos1: F64
    ib1: F64
    vos2: F64
    ib2: F64

    def take(self, sel: I64 | NDArray[np.bool_]) -> Board:
        return Board(**{n: np.asarray(getattr(self, n))[sel] for n in self.__dataclass_fields__})


@dataclass
class AtWiper:
    """The equivalent integrator at one wiper position: P = k·R_eff·C/β (s), V' (V), β,
    R_eff (Ω), whether the loop can oscillate (0 < VH - V' and 0 < VL + V'), and the
    prediction (NaN where it cannot)."""

    p: F64
    v_drive: F64
    beta: F64
    r_eff: F64
    valid: NDArray[np.bool_]
    pred: Prediction


def at_wiper(board: Board, alpha: float | F64, control: str) -> AtWiper:
    """The full model at wiper ``alpha`` (``circuit.predict`` through the pot network, the
    part's GBW in both channels, as ``Design.oscillator``)."""
    r_eff, beta = timing_network(board.r3, board.rv, alpha, control, board.r4)
    r_eff = np.asarray(r_eff, dtype=float) * np.ones_like(board.r3)
    beta = np.asarray(beta, dtype=float) * np.ones_like(board.r3)
    v_drive = (board.vos1 + board.ib1 * r_eff) / beta
    k = board.r1 / board.r2
    p = k * r_eff * board.c / beta
    ok = (board.vh - v_drive > 0) & (board.vl + v_drive > 0)
    out = Prediction(*(np.full(len(p), np.nan) for _ in Prediction._fields))
    if ok.any():
        b = board.take(ok)
        part = predict(
            b.r1,
            b.r2,
            r_eff[ok],
            b.c / beta[ok],
            b.vh,
            b.vl,
            slew_rise=b.slew,
            slew_fall=b.slew,
            delay=b.delay,
            gbw=b.gbw,
            vos1=b.vos1 / beta[ok],
            ib1=b.ib1 / beta[ok],
            vos2=b.vos2,
            ib2=b.ib2,
            integrator_gbw=b.gbw,
        )
        for name in Prediction._fields:
            getattr(out, name)[ok] = np.asarray(getattr(part, name))
    return AtWiper(p, v_drive, beta, r_eff, ok, out)


def _column(model: TunedModel, u: I64, name: str) -> F64:
    return np.array([getattr(o.model, name) for o in model.opamps], dtype=np.float64)[u]


def _levels(model: TunedModel, u: I64, z_pos: F64, z_neg: F64) -> tuple[F64, F64]:
    """VH and VL with each rail at 1 + tol·z, the reference as the analysis has it."""
    s = model.spec.supply
    tol = s.tolerance_pct / 100
    v_pos = s.positive_v * (1 + tol * z_pos)
    v_neg = s.negative_v * (1 + tol * z_neg)
    if s.negative_v < 0:
        ref: F64 | float = 0.0
    elif s.reference_v is not None:
        ref = s.reference_v
    else:
        ref = (v_pos + v_neg) / 2
    return (
        v_pos - _column(model, u, "swing_pos_v") - ref,
        ref - (v_neg + _column(model, u, "swing_neg_v")),
    )


def nominal_board(model: TunedModel, sh: Shared, j: I64) -> Board:
    """The boards at nominal values, 25 °C, nominal rails, the op amp as catalogued (typical
    offsets and bias with a + sign): ``Design.oscillator``'s operating point."""
    res, cap = model.resistors, model.capacitors
    u = sh.u
    rv = np.array([p.value_ohm for p in model.pots])[sh.v]
    r4 = np.where(sh.i4 >= 0, res.value[np.maximum(sh.i4, 0)], 0.0)
    vh = np.array([o.vh for o in model.opamps])[u]
    vl = np.array([o.vl for o in model.opamps])[u]
    return Board(
        r1=res.value[sh.i1],
        r2=res.value[sh.i2],
        r3=res.value[sh.i3],
        rv=rv,
        r4=r4,
        c=cap.value[j],
        vh=vh,
        vl=vl,
        slew=_column(model, u, "slew_rise_v_per_s"),
        delay=_column(model, u, "delay_s"),
        gbw=_column(model, u, "gbw_hz"),
        vos1=_column(model, u, "offset_v"),
        ib1=_column(model, u, "bias_a"),
        vos2=_column(model, u, "comparator_offset_v"),
        ib2=_column(model, u, "comparator_bias_a"),
    )


@dataclass(frozen=True)
class Corner:
    """A corner of the spread box: each part's tolerance end (z = ±1: R1, R2, R3, RV1, R4 and
    the capacitor, its class II band with it), slew and delay ends, and how the rails, the
    temperature end and the integrator's offset and bias are picked per board:

    - ``rails``: "fast" the pair (V+, V-) of ends with the smallest (VH + VL)²/(VH·VL), then
      the smaller span; "slow" the largest, then the larger span; "big"/"small" the largest or
      smallest span;
    - ``temp``: "p_low"/"p_high" the temperature end with the smaller/larger P at the end of
      the dial evaluated, "k_high"/"k_low" the larger/smaller k;
    - ``drives``: "balanced" the offset and bias ends with the smallest |VH - VL - 2·V'|,
      "skewed" the largest.
    """

    z1: float
    z2: float
    z3: float
    zv: float
    z4: float
    zc: float
    slew: float
    delay: float
    rails: str
    temp: str
    drives: str


FAST_BOTTOM = Corner(-1, 1, -1, -1, 1, -1, 1, -1, "fast", "p_low", "balanced")
SLOW_TOP = Corner(1, -1, 1, 1, -1, 1, -1, 1, "slow", "p_high", "skewed")
AMP_HIGH = Corner(1, -1, -1, -1, 1, -1, -1, 1, "big", "k_high", "balanced")
AMP_LOW = Corner(-1, 1, 1, 1, -1, 1, 1, -1, "small", "k_low", "balanced")


def rail_choice(model: TunedModel, mode: str) -> tuple[F64, F64]:
    """Per op amp, the rail ends (z+, z-) a corner takes (``Corner.rails``); kept in
    ``model.cache``."""
    known = model.cache.get(f"rails {mode}")
    if isinstance(known, tuple):
        return known
    model.cache[f"rails {mode}"] = found = _rail_choice(model, mode)
    return found


def _rail_choice(model: TunedModel, mode: str) -> tuple[F64, F64]:
    n = len(model.opamps)
    u = np.arange(n, dtype=np.int64)
    options = [(zp, zn) for zp in (-1.0, 1.0) for zn in (-1.0, 1.0)]
    scores = []
    for zp, zn in options:
        vh, vl = _levels(model, u, np.full(n, zp), np.full(n, zn))
        with np.errstate(divide="ignore", invalid="ignore"):
            c = np.where((vh > 0) & (vl > 0), (vh + vl) ** 2 / (vh * vl), np.inf)
        span = vh + vl
        key = {"fast": (c, span), "slow": (-c, -span), "big": (-span, c), "small": (span, c)}
        scores.append(key[mode])
    first = np.stack([s[0] for s in scores])
    second = np.stack([s[1] for s in scores])
    best = np.lexsort((second, first), axis=0)[0] if n else np.zeros(0, dtype=np.int64)
    pick = np.array(options)[best] if n else np.zeros((0, 2))
    return pick[:, 0], pick[:, 1]


def _scaled(value: F64, tol: F64, z: float, tempco: F64, temp: F64) -> F64:
    return np.asarray(value * (1 + tol * z) * (1 + tempco * 1e-6 * (temp - 25.0)))


def corner_board(
    model: TunedModel, sh: Shared, j: I64, corner: Corner, alpha: float, temp: F64
) -> Board:
    """The boards at ``corner`` with every value at temperature ``temp`` (°C), before the
    offset and bias ends are picked (``corner_at``)."""
    res, cap = model.resistors, model.capacitors
    pots = model.pots
    i4 = np.maximum(sh.i4, 0)
    rv = np.array([p.value_ohm for p in pots])[sh.v]
    t_rv = np.array([p.tolerance_pct / 100 for p in pots])[sh.v]
    tc_rv = np.array([p.tempco_ppm for p in pots])[sh.v]
    c_band = cap.value[j] * (1 + cap.extra_band[j] * corner.zc)
    z_pos, z_neg = rail_choice(model, corner.rails)
    vh, vl = _levels(model, sh.u, z_pos[sh.u], z_neg[sh.u])
    return Board(
        r1=_scaled(res.value[sh.i1], res.tol[sh.i1], corner.z1, res.tempco[sh.i1], temp),
        r2=_scaled(res.value[sh.i2], res.tol[sh.i2], corner.z2, res.tempco[sh.i2], temp),
        r3=_scaled(res.value[sh.i3], res.tol[sh.i3], corner.z3, res.tempco[sh.i3], temp),
        rv=_scaled(rv, t_rv, corner.zv, tc_rv, temp),
        r4=np.where(
            sh.i4 >= 0, _scaled(res.value[i4], res.tol[i4], corner.z4, res.tempco[i4], temp), 0.0
        ),
        c=_scaled(c_band, cap.tol[j], corner.zc, cap.tempco[j], temp),
        vh=vh,
        vl=vl,
        slew=_column(model, sh.u, "slew_rise_v_per_s") * (1 + SLEW_SPREAD * corner.slew),
        delay=_column(model, sh.u, "delay_s") * (1 + DELAY_SPREAD * corner.delay),
        gbw=_column(model, sh.u, "gbw_hz"),
        vos1=np.zeros(len(sh)),
        ib1=np.zeros(len(sh)),
        vos2=np.abs(_column(model, sh.u, "offset_v")) * OFFSET_BOUND,
        ib2=np.zeros(len(sh)),
    )


def temperatures(model: TunedModel) -> tuple[float, float]:
    """The temperature ends of the box (one point when the range is a single temperature)."""
    env = model.spec.environment
    return env.temp_min_c, env.temp_max_c


def corner_at(
    model: TunedModel, sh: Shared, j: I64, corner: Corner, alpha: float, control: str
) -> AtWiper:
    """The full model at ``corner`` and wiper ``alpha`` for every (combination, capacitor)."""
    t_lo, t_hi = temperatures(model)
    boards = [corner_board(model, sh, j, corner, alpha, np.full(len(sh), t)) for t in (t_lo, t_hi)]
    if corner.temp in ("p_low", "p_high"):
        metric = []
        for b in boards:
            r_eff, beta = timing_network(b.r3, b.rv, alpha, control, b.r4)
            metric.append(np.log(b.r1 / b.r2 * r_eff * b.c / beta))
    else:
        metric = [np.log(b.r1 / b.r2) for b in boards]
    low_first = corner.temp in ("p_low", "k_low")
    first = metric[0] <= metric[1] if low_first else metric[0] >= metric[1]
    board = Board(
        **{
            n: np.where(first, getattr(boards[0], n), getattr(boards[1], n))
            for n in Board.__dataclass_fields__
        }
    )
    return at_wiper(_with_drives(model, sh, board, alpha, control, corner.drives), alpha, control)


def _with_drives(
    model: TunedModel, sh: Shared, board: Board, alpha: float, control: str, mode: str
) -> Board:
    """Pick the integrator offset end (±Vos) and the bias end (0 or 2·Ib, both channels)
    per board: "balanced" minimises |VH - VL - 2·V'|, "skewed" maximises it."""
    vos = np.abs(_column(model, sh.u, "offset_v")) * OFFSET_BOUND
    ib = _column(model, sh.u, "bias_a")
    r_eff, beta = timing_network(board.r3, board.rv, alpha, control, board.r4)
    options = [(s, zb) for s in (-1.0, 1.0) for zb in (-1.0, 1.0)]
    gaps = []
    for s, zb in options:
        v_drive = (s * vos + ib * (1 + BIAS_SPREAD * zb) * r_eff) / beta
        gaps.append(np.abs(board.vh - board.vl - 2 * v_drive))
    gap = np.stack(gaps)
    pick = np.argmin(gap, axis=0) if mode == "balanced" else np.argmax(gap, axis=0)
    s = np.array([o[0] for o in options])[pick]
    zb = np.array([o[1] for o in options])[pick]
    bias = ib * (1 + BIAS_SPREAD * zb)
    return replace(board, vos1=s * vos, ib1=bias, ib2=bias)
