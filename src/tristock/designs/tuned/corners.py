"""The two corners of the spread box the bounds use, and the nominal operating point.

For a combination S, z2 (``network.FAST_BOTTOM``) is a corner at the bottom of the dial and
z1 (``network.SLOW_TOP``) one at the top. At each the full model's period is a function of
P = k·R·C (R = R_eff/β at z2, R3 at z1; k the nominal k times the corner's factor), which
``loopbounds`` bounds over a range of k from the edge tables (``edges``). ``corners`` gives,
per combination, each corner's drives, the k factors of the pairs allowed (``KFactors``),
R_eff/β at z2, R3 at z1 and the nominal drives and resistances the nominal checks use;
``corner_tables`` the edge tables of every op amp at z2, z1 and nominal values (span, slew
and delay at the corner, k over everything the op amp's rows can have there).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.opamp_schmitt.spread import (
    BIAS_SPREAD,
    DELAY_SPREAD,
    OFFSET_BOUND,
    SLEW_SPREAD,
)
from tristock.circuits.timing import timing_network
from tristock.designs.tuned.edges import EdgeTables
from tristock.designs.tuned.loopbounds import CornerRows
from tristock.designs.tuned.model import TunedModel
from tristock.designs.tuned.network import dial_ends, rail_choice, temperatures

F64 = NDArray[np.float64]
I64 = NDArray[np.int64]


@dataclass
class KFactors:
    """k at z2 and z1 as multiples of the nominal k (lo/hi over what is allowed for), at the
    temperature ends T2 and T1 (index 0 = temp_min, 1 = temp_max), and k's own range."""

    k_lo: F64
    k_hi: F64
    f2_lo: F64  # shape (2, n): per temperature end
    f2_hi: F64
    f1_lo: F64
    f1_hi: F64


@dataclass
class Corners:
    """Per combination: the op amp (``u``), the k factors at z2 and z1, R_eff/β at z2
    (``rb2``), R3 at z1 (``r31``), the temperature end of each (index into
    ``temperatures``), the corners' drives (a2, b2, a1, b1; 1 V where a corner cannot
    oscillate), whether z2 and z1 (``valid``) or z1 alone (``valid_top``) can oscillate, and
    at nominal values R_eff/β at the bottom (``rbn``), R3 (``r3n``) and the drives at the
    bottom and the top of the dial (``nominal``: a, b, a, b). ``tables`` are the model's
    edge tables (``corner_tables``)."""

    u: I64
    kf2_lo: F64
    kf2_hi: F64
    kf1_lo: F64
    kf1_hi: F64
    rb2: F64
    r31: F64
    t2: I64
    t1: I64
    drive: tuple[F64, F64, F64, F64]  # a2, b2, a1, b1 (V)
    valid: NDArray[np.bool_]
    valid_top: NDArray[np.bool_]
    rbn: F64
    r3n: F64
    nominal: tuple[F64, F64, F64, F64]
    tables: dict[str, EdgeTables]

    def take(self, sel: I64 | NDArray[np.bool_]) -> Corners:
        out: dict[str, Any] = {}
        for name in self.__dataclass_fields__:
            x = getattr(self, name)
            if name == "tables":
                out[name] = x
            else:
                out[name] = tuple(y[sel] for y in x) if isinstance(x, tuple) else x[sel]
        return Corners(**out)

    @property
    def z2(self) -> CornerRows:
        return CornerRows(self.tables["z2"], self.u, self.drive[0], self.drive[1])

    @property
    def z1(self) -> CornerRows:
        return CornerRows(self.tables["z1"], self.u, self.drive[2], self.drive[3])

    @property
    def nominal_bottom(self) -> CornerRows:
        return CornerRows(self.tables["nom"], self.u, self.nominal[0], self.nominal[1])

    @property
    def nominal_top(self) -> CornerRows:
        return CornerRows(self.tables["nom"], self.u, self.nominal[2], self.nominal[3])


def col(model: TunedModel, u: I64, name: str) -> F64:
    return np.array([getattr(o.model, name) for o in model.opamps], dtype=np.float64)[u]


def _factor(tol: F64, z: float, tempco: F64, temp: float) -> F64:
    return np.asarray((1 + tol * z) * (1 + tempco * 1e-6 * (temp - 25.0)))


def pair_factors(model: TunedModel, i1: I64, i2: I64, k: F64) -> KFactors:
    """Exact k factors of these pairs at both temperature ends."""
    res = model.resistors
    temps = temperatures(model)

    def kf(z: float, t: float) -> F64:
        return _factor(res.tol[i1], z, res.tempco[i1], t) / _factor(
            res.tol[i2], -z, res.tempco[i2], t
        )

    f2 = np.stack([kf(-1, t) for t in temps])
    f1 = np.stack([kf(1, t) for t in temps])
    return KFactors(k, k, f2, f2, f1, f1)


def window_factors(model: TunedModel, u: I64) -> KFactors:
    """k factors allowing every resistor as R1 and R2 and every k of the op amp's window."""
    res = model.resistors
    temps = temperatures(model)
    k_lo = np.array([o.k_lo for o in model.opamps])[u]
    k_hi = np.array([o.k_hi for o in model.opamps])[u]

    def ends(z: float, t: float) -> tuple[float, float]:
        up = _factor(res.tol, z, res.tempco, t)
        down = _factor(res.tol, -z, res.tempco, t)
        if up.size == 0:  # no resistor: no pair, nothing to bound
            return 1.0, 1.0
        return float(up.min() / down.max()), float(up.max() / down.min())

    def stack(z: float, which: int) -> F64:
        return np.stack([np.full(len(u), ends(z, t)[which]) for t in temps])

    return KFactors(k_lo, k_hi, stack(-1, 0), stack(-1, 1), stack(1, 0), stack(1, 1))


def cap_factors(model: TunedModel, z: float) -> F64:
    """(temperature end, capacitor): C at the corner over its nominal value."""
    cap = model.capacitors
    return np.stack(
        [
            (1 + cap.extra_band * z) * (1 + cap.tol * z) * (1 + cap.tempco * 1e-6 * (t - 25.0))
            for t in temperatures(model)
        ]
    )


def _drives(
    vh: F64, vl: F64, vos: F64, ib: F64, r_eff: F64, beta: F64, balanced: bool
) -> tuple[F64, F64]:
    """Drives (a, b) at the offset and bias ends ``network.Corner.drives`` picks."""
    gaps, values = [], []
    for s in (-1.0, 1.0):
        for zb in (-1.0, 1.0):
            v = (s * vos + ib * (1 + BIAS_SPREAD * zb) * r_eff) / beta
            gaps.append(np.abs(vh - vl - 2 * v))
            values.append(v)
    pick = np.argmin(np.stack(gaps), axis=0) if balanced else np.argmax(np.stack(gaps), axis=0)
    v = np.stack(values)[pick, np.arange(len(vh))]
    return vh - v, vl + v


def corners(model: TunedModel, u: I64, i3: I64, i4: I64, v: I64, kf: KFactors) -> Corners:
    """The two corners of every combination (``Corners``)."""
    spec = model.spec
    assert spec.tuning is not None
    res = model.resistors
    control = spec.tuning.control
    bottom, top = dial_ends(control)
    n = len(u)
    temps = temperatures(model)
    pots = model.pots
    rv0 = np.array([p.value_ohm for p in pots])[v]
    t_rv = np.array([p.tolerance_pct / 100 for p in pots])[v]
    tc_rv = np.array([p.tempco_ppm for p in pots])[v]
    j4 = np.maximum(i4, 0)

    def network(z: float, t: float, alpha: float) -> tuple[F64, F64]:
        r3 = res.value[i3] * _factor(res.tol[i3], z, res.tempco[i3], t)
        rv = rv0 * _factor(t_rv, z, tc_rv, t)
        r4 = np.where(i4 >= 0, res.value[j4] * _factor(res.tol[j4], -z, res.tempco[j4], t), 0.0)
        r_eff, beta = timing_network(r3, rv, alpha, control, r4)
        return np.asarray(r_eff) * np.ones(n), np.asarray(beta) * np.ones(n)

    # z2: bottom, fast, at the temperature end with the smaller R_eff/β; z1: top, slow.
    net2 = [network(-1, t, bottom) for t in temps]
    t2 = (net2[1][0] / net2[1][1] < net2[0][0] / net2[0][1]).astype(np.int64)
    reff2 = np.where(t2 == 1, net2[1][0], net2[0][0])
    beta2 = np.where(t2 == 1, net2[1][1], net2[0][1])
    net1 = [network(1, t, top) for t in temps]
    t1 = (net1[1][0] > net1[0][0]).astype(np.int64)
    r31 = np.where(t1 == 1, net1[1][0], net1[0][0])
    at = np.arange(n)
    vos = np.abs(col(model, u, "offset_v")) * OFFSET_BOUND
    ib = col(model, u, "bias_a")
    zp2, zn2 = rail_choice(model, "fast")
    zp1, zn1 = rail_choice(model, "slow")
    vh2, vl2 = levels_at(model, u, zp2[u], zn2[u])
    vh1, vl1 = levels_at(model, u, zp1[u], zn1[u])
    a2, b2 = _drives(vh2, vl2, vos, ib, reff2, beta2, True)
    a1, b1 = _drives(vh1, vl1, vos, ib, r31, np.ones(n), False)
    vh = np.array([o.vh for o in model.opamps])[u]
    vl = np.array([o.vl for o in model.opamps])[u]
    vos1, ib1 = col(model, u, "offset_v"), col(model, u, "bias_a")
    r4n = np.where(i4 >= 0, res.value[j4], 0.0)
    reff_n, beta_n = timing_network(res.value[i3], rv0, bottom, control, r4n)
    reff_n = np.asarray(reff_n) * np.ones(n)
    beta_n = np.asarray(beta_n) * np.ones(n)
    vd_b = (vos1 + ib1 * reff_n) / beta_n
    vd_t = vos1 + ib1 * res.value[i3]
    valid_top = (a1 > 0) & (b1 > 0) & (vh - vd_t > 0) & (vl + vd_t > 0)
    valid_bottom = (a2 > 0) & (b2 > 0) & (vh - vd_b > 0) & (vl + vd_b > 0)
    valid = valid_bottom & valid_top
    a2, b2, ab, bb = (np.where(valid_bottom, x, 1.0) for x in (a2, b2, vh - vd_b, vl + vd_b))
    a1, b1, at_, bt = (np.where(valid_top, x, 1.0) for x in (a1, b1, vh - vd_t, vl + vd_t))
    return Corners(
        u=np.asarray(u, dtype=np.int64),
        kf2_lo=kf.f2_lo[t2, at],
        kf2_hi=kf.f2_hi[t2, at],
        kf1_lo=kf.f1_lo[t1, at],
        kf1_hi=kf.f1_hi[t1, at],
        rb2=reff2 / beta2,
        r31=r31,
        t2=t2,
        t1=t1,
        drive=(a2, b2, a1, b1),
        valid=valid,
        valid_top=valid_top,
        rbn=reff_n / beta_n,
        r3n=res.value[i3],
        nominal=(ab, bb, at_, bt),
        tables=corner_tables(model),
    )


def corner_tables(model: TunedModel) -> dict[str, EdgeTables]:
    """The edge tables of every op amp at z2 (fast rails, slew up, delay down), z1 (slow
    rails, slew down, delay up) and nominal values. Kept in ``model.cache``: they fill as
    rows need them."""
    known = model.cache.get("edge_tables")
    if isinstance(known, dict):
        return known
    n = len(model.opamps)
    u = np.arange(n, dtype=np.int64)
    slew, delay = col(model, u, "slew_rise_v_per_s"), col(model, u, "delay_s")
    gbw = col(model, u, "gbw_hz")
    out: dict[str, EdgeTables] = {}
    for name, rails, s_slew, s_delay in (
        ("z2", "fast", SLEW_SPREAD, -DELAY_SPREAD),
        ("z1", "slow", -SLEW_SPREAD, DELAY_SPREAD),
        ("nom", "", 0.0, 0.0),
    ):
        if rails:
            zp, zn = rail_choice(model, rails)
            vh, vl = levels_at(model, u, zp, zn)
        else:
            vh = np.array([o.vh for o in model.opamps])
            vl = np.array([o.vl for o in model.opamps])
        out[name] = EdgeTables(vh + vl, slew * (1 + s_slew), delay * (1 + s_delay), gbw)
    model.cache["edge_tables"] = out
    return out


def levels_at(model: TunedModel, u: I64, z_pos: F64, z_neg: F64) -> tuple[F64, F64]:
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
    return v_pos - col(model, u, "swing_pos_v") - ref, ref - (v_neg + col(model, u, "swing_neg_v"))
