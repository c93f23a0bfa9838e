"""Diodes as the physics and the SPICE netlists see them: a junction's static V-I curve, a
chain of junctions in series (a zener pair: one in breakdown, one forward), its operating
point behind a Thevenin source, and the integrals the loop timing needs. SI units.

One junction (the SPICE level-1 diode without charge storage, at its nominal temperature):

- forward: I = IS·(e^(V/(N·Vt)) - 1), plus the series resistance RS: V = N·Vt·ln(I/IS) + RS·I
  above a few IS;
- reverse breakdown (zener): I = IBV·e^((V - BV)/(NBV·Vt)), V = BV + NBV·Vt·ln(I/IBV) + RS·I.

From a table row (``stock.diodes.Diode``): the forward drop vf_v at 1 mA fixes IS with
N = ``FORWARD_EMISSION``; a zener's vz_v at iz_test_a and its dynamic resistance rz_ohm there
fix IBV = iz_test_a, NBV and RS with NBV·Vt/IBV + RS = rz_ohm (``zener_terms``) and
BV = vz_v - RS·IBV. Temperature moves vz_v (zener tempco column), vf_v (the
zener's forward tempco ``ZENER_FORWARD_TEMPCO_MV_PER_C``, a signal diode's column) and Vt.

A chain carrying current I in its conducting direction has V(I) = v0 + m·ln(I) + r·I
(m in volts: the sum of the emission coefficients times Vt), so
∫_0^I V dI' = I·(V(I) - m - r·I/2) exactly, and its dynamic resistance is m/I + r.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from tristock.stock.diodes import VF_TEST_A, Diode

FloatArray = npt.NDArray[np.float64]
ArrayLike = float | npt.ArrayLike

#: Boltzmann constant over the elementary charge (V/K), CODATA 2018 exact values.
K_OVER_Q = 1.380649e-23 / 1.602176634e-19
#: Forward emission coefficient of small silicon junctions near 1 mA (from memory: 1.7-2).
FORWARD_EMISSION = 1.8
#: Forward-drop tempco of a zener's forward junction (mV/°C; from memory, about -2).
ZENER_FORWARD_TEMPCO_MV_PER_C = -2.0
#: A small zener's bulk series resistance (Ω; from memory, about 1 Ω for 0.5 W glass parts).
ZENER_BULK_OHM = 1.0
#: The most Newton steps on ln I in ``Chain.current`` (from I_max down to e^-41).
BISECTIONS = 90


def thermal_voltage(temp_c: ArrayLike) -> FloatArray:
    """Vt = k·T/q (V) at ``temp_c`` (°C)."""
    return np.asarray(K_OVER_Q * (np.asarray(temp_c, dtype=float) + 273.15), dtype=float)


def diode_at(diode: Diode, temp_c: float) -> tuple[float, float, float, float]:
    """(vz, rz, iz_test, vf) of a catalogued diode at ``temp_c``: vz moved by the zener
    tempco, vf by the forward tempco (a zener's: ``ZENER_FORWARD_TEMPCO_MV_PER_C``); a signal
    diode's vz and iz_test are 0 and its rz is the series resistance."""
    dt = temp_c - 25.0
    if diode.is_zener:
        assert diode.vz_v is not None and diode.iz_test_a is not None
        vz = diode.vz_v + diode.tempco_mv_per_c * 1e-3 * dt
        vf = diode.vf_v + ZENER_FORWARD_TEMPCO_MV_PER_C * 1e-3 * dt
        return vz, diode.rz_ohm, diode.iz_test_a, vf
    return 0.0, diode.rz_ohm, 0.0, diode.vf_v + diode.tempco_mv_per_c * 1e-3 * dt


def zener_terms(
    vz: ArrayLike, rz: ArrayLike, izt: ArrayLike, vf: ArrayLike, vt: ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """(NBV, RS, BV) of a zener from vz at izt, its dynamic resistance rz there and its
    forward drop vf at 1 mA: the breakdown takes as much of rz as NBV·Vt/izt as it can, RS
    (the bulk resistance, which also carries the forward current) the rest, at least
    min(``ZENER_BULK_OHM``, rz/2); BV = vz - RS·izt.

    NBV is capped so that SPICE's breakdown region (it starts where the breakdown current
    falls to IS, NBV·Vt·ln(izt/IS) below BV) begins at least half of BV in reverse: ngspice
    loses its time step on a breakdown that reaches through 0 V (soft 2.4-3.9 V zeners).
    Where the cap binds, RS takes tens of ohms, which the zener's forward conduction then
    also sees: the model and its netlist agree, but such a zener's forward drop at 10 mA
    and more is overstated (a level-1 diode has one RS for both directions)."""
    vz_a, rz_a, izt_a, vf_a, vt_a = (np.asarray(x, dtype=float) for x in (vz, rz, izt, vf, vt))
    bulk = np.minimum(ZENER_BULK_OHM, 0.5 * rz_a)
    decades = np.log(izt_a / VF_TEST_A) + vf_a / (FORWARD_EMISSION * vt_a)
    cap = 0.5 * vz_a / (vt_a * decades)
    nbv = np.maximum(np.minimum((rz_a - bulk) * izt_a / vt_a, cap), 1e-3)
    rs = rz_a - nbv * vt_a / izt_a
    return nbv, rs, vz_a - rs * izt_a


def saturation_current(vf: ArrayLike, rs: ArrayLike, vt: ArrayLike) -> FloatArray:
    """IS from the forward drop vf at 1 mA: 1 mA·e^(-(vf - RS·1 mA)/(N·Vt))."""
    vf_a, rs_a, vt_a = (np.asarray(x, dtype=float) for x in (vf, rs, vt))
    return np.asarray(VF_TEST_A * np.exp(-(vf_a - rs_a * VF_TEST_A) / (FORWARD_EMISSION * vt_a)))


def forward_chain(vf: ArrayLike, rs: ArrayLike, vt: ArrayLike) -> Chain:
    """One junction forward (vf at 1 mA, series rs): V = vf - RS·1 mA + N·Vt·ln(I/1 mA) + RS·I,
    vectorised."""
    vf_a, rs_a, vt_a = (np.asarray(x, dtype=float) for x in (vf, rs, vt))
    m = FORWARD_EMISSION * vt_a
    return Chain(vf_a - rs_a * VF_TEST_A - m * math.log(VF_TEST_A), m, rs_a)


def zener_chain(
    breaking: tuple[ArrayLike, ArrayLike, ArrayLike, ArrayLike],
    forward: tuple[ArrayLike, ArrayLike, ArrayLike, ArrayLike],
    vt: ArrayLike,
) -> Chain:
    """A back-to-back zener pair in one direction, vectorised: ``breaking`` = (vz, rz, izt,
    vf) of the zener in breakdown, ``forward`` those of the other (forward, its RS from
    ``zener_terms``)."""
    vz, rz, izt, vf = breaking
    nbv, rs, bv = zener_terms(vz, rz, izt, vf, vt)
    _, rs_other, _ = zener_terms(*forward, vt)
    fwd = forward_chain(forward[3], rs_other, vt)
    m_b = nbv * np.asarray(vt, dtype=float)
    v0 = bv - m_b * np.log(np.asarray(izt, dtype=float)) + np.asarray(fwd.v0)
    return Chain(v0, m_b + np.asarray(fwd.m), rs + np.asarray(fwd.r))


@dataclass(frozen=True)
class Junction:
    """One diode's SPICE parameters at its temperature: forward ``n``, ``is_a``, series
    ``rs_ohm``; a zener's ``bv_v``, ``ibv_a``, ``nbv`` (None for a signal diode); ``vt`` the
    thermal voltage it was made at (V)."""

    n: float
    is_a: float
    rs_ohm: float
    vt: float
    bv_v: float | None = None
    ibv_a: float | None = None
    nbv: float = 1.0

    @classmethod
    def of(cls, diode: Diode, temp_c: float = 25.0) -> Junction:
        """The junction of a catalogued diode at ``temp_c`` (see the module notes)."""
        vt = float(thermal_voltage(temp_c))
        vz, rz, izt, vf = diode_at(diode, temp_c)
        if diode.is_zener:
            nbv, rs, bv = zener_terms(vz, rz, izt, vf, vt)
            is_a = saturation_current(vf, rs, vt)
            return cls(FORWARD_EMISSION, float(is_a), float(rs), vt, float(bv), izt, float(nbv))
        return cls(FORWARD_EMISSION, float(saturation_current(vf, rz, vt)), rz, vt)

    def forward_drop(self, current_a: ArrayLike) -> FloatArray:
        """V at forward current I (A): N·Vt·ln(1 + I/IS) + RS·I."""
        i = np.asarray(current_a, dtype=float)
        return np.asarray(self.n * self.vt * np.log1p(i / self.is_a) + self.rs_ohm * i)

    def breakdown_voltage(self, current_a: ArrayLike) -> FloatArray:
        """A zener's reverse voltage at reverse current I (A): BV + NBV·Vt·ln(I/IBV) + RS·I."""
        if self.bv_v is None or self.ibv_a is None:
            raise ValueError("breakdown: a signal diode has no breakdown voltage")
        i = np.asarray(current_a, dtype=float)
        return np.asarray(self.bv_v + self.nbv * self.vt * np.log(i / self.ibv_a) + self.rs_ohm * i)

    def spice_model(self, name: str) -> str:
        """A ``.model`` line for ngspice: no charge storage (CJO = TT = 0)."""
        text = f".model {name} D(IS={self.is_a!r} N={self.n!r} RS={self.rs_ohm!r} CJO=0 TT=0"
        if self.bv_v is not None:
            text += f" BV={self.bv_v!r} IBV={self.ibv_a!r} NBV={self.nbv!r}"
        return text + ")"


@dataclass(frozen=True)
class Chain:
    """Junctions in series carrying I > 0 in their conducting direction:
    V(I) = v0 + m·ln(I) + r·I (V, with I in A). Fields may be arrays (broadcast)."""

    v0: ArrayLike
    m: ArrayLike
    r: ArrayLike

    def arrays(self) -> tuple[FloatArray, FloatArray, FloatArray]:
        """(v0, m, r) as float arrays."""
        return (
            np.asarray(self.v0, dtype=float),
            np.asarray(self.m, dtype=float),
            np.asarray(self.r, dtype=float),
        )

    def voltage(self, current_a: ArrayLike) -> FloatArray:
        i = np.asarray(current_a, dtype=float)
        v0, m, r = self.arrays()
        return np.asarray(v0 + m * np.log(i) + r * i)

    def resistance(self, current_a: ArrayLike) -> FloatArray:
        """dV/dI = m/I + r (Ω)."""
        i = np.asarray(current_a, dtype=float)
        _, m, r = self.arrays()
        return np.asarray(m / i + r, dtype=float)

    def integral(self, current_a: ArrayLike) -> FloatArray:
        """∫_0^I V dI' = I·(V(I) - m - r·I/2) (V·A)."""
        i = np.asarray(current_a, dtype=float)
        _, m, r = self.arrays()
        return np.asarray(i * (self.voltage(i) - m - 0.5 * r * i))

    def current(self, source_v: ArrayLike, source_ohm: ArrayLike) -> FloatArray:
        """The chain's current I (A) behind a Thevenin source E = ``source_v`` with series
        ``source_ohm``: the root of f(x) = v0 + m·x + (r + R)·e^x - E in x = ln I over
        [-41, x_max] (f increasing and convex in x), by Newton's method from a start where
        f > 0 (the lesser of x_max = ln((|E - v0| + 50·m)/(r + R)) and (E - v0)/m): on a
        convex increasing f its steps fall monotonically onto the root (never past it), at
        most ``BISECTIONS`` of them, stopping once none moves x by more than 1e-13·|x| (about
        the rounding of f near the root). Where E cannot drive even e^-41 A the result is that
        floor: the chain does not conduct."""
        e, rs, v0, m, r = np.broadcast_arrays(
            *(np.asarray(x, dtype=float) for x in (source_v, source_ohm, self.v0, self.m, self.r))
        )
        total = np.maximum(r + rs, 1e-12)
        # both starts have f > 0: R·I_max ≥ |E - v0| + 50·m, and at x = (E - v0)/m f = R·e^x
        with np.errstate(divide="ignore", over="ignore"):
            x = np.minimum(np.log((np.abs(e - v0) + 50.0 * m) / total + 1e-18), (e - v0) / m)
        x = np.maximum(x, -41.0)
        for _ in range(BISECTIONS):
            grow = total * np.exp(x)
            step = (v0 + m * x + grow - e) / (m + grow)
            moved = np.maximum(x - np.maximum(step, 0.0), -41.0)
            done = not np.any(x - moved > 1e-13 * np.maximum(1.0, np.abs(x)))
            x = moved
            if done:
                break
        return np.asarray(np.exp(x), dtype=float)
