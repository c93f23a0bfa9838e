"""Necessary conditions of ``guarantee = "worst_case"``: probes inside the analysis's box.

The analysis (``analysis.worstcase.worst_case``) bounds frequency and amplitude over a box of
spread variables: every part's tolerance (and a class II band), each rail, temperature, the
op amp's slew and delay spread, offsets and bias. Any point of that box is a lower bound of
the maximum and an upper bound of the minimum, so if the full model at one point leaves a
band, the design fails the guarantee. Five such points (``PROBES``) follow the physics'
signs: f falls with R1, R3, C1 and the delay and rises with R2 and the slew rate; the
amplitude rises with R1, the rails, the delay and a smaller P (more overshoot) and falls with
R2; unequal rails slow the loop (T ∝ (VH + VL)²/(VH·VL)), so two slow points try both skews.
Temperature takes the end that moves k = R1/R2 the probe's way. Offsets sit at the box's
centre (0 V), bias currents as catalogued.

``probe_rows`` evaluates the points for rows exactly; ``pair_limits`` bounds them for every
row through an (op amp, R1, R2) pair with ``search.bounds``, narrowing its P window and
dropping pairs no row of which can pass.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.opamp_schmitt.spread import DELAY_SPREAD, SLEW_SPREAD
from tristock.circuits.rails import Rails
from tristock.circuits.searchform import StageLoop
from tristock.search.bounds import amplitude_bounds, highest_p, lowest_p
from tristock.search.model import SearchModel

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]


class Probe(NamedTuple):
    """One point of the box: each z in [-1, 1] (a tolerance or rail at its end, slew and
    delay scaled by 1 + spread·z); ``k_up`` picks the temperature end that raises k."""

    z1: float
    z2: float
    z3: float
    zc: float
    v_pos: float
    v_neg: float
    slew: float
    delay: float
    k_up: bool


FAST = Probe(-1, 1, -1, -1, 0, 0, 1, -1, False)  # f high
SLOW_A = Probe(1, -1, 1, 1, 1, -1, -1, 1, True)  # f low, V+ up and V- down
SLOW_B = Probe(1, -1, 1, 1, -1, 1, -1, 1, True)  # f low, V+ down and V- up
BIG = Probe(1, -1, -1, -1, 1, 1, -1, 1, True)  # amplitude high
SMALL = Probe(-1, 1, 1, 1, -1, -1, 1, -1, False)  # amplitude low
PROBES = (FAST, SLOW_A, SLOW_B, BIG, SMALL)


def _temperature(model: SearchModel, i1: I64, i2: I64, k_up: bool) -> F64:
    """The temperature end where (tc1 - tc2)·(T - 25 °C) is largest (k_up) or smallest."""
    env = model.spec.environment
    lo, hi = env.temp_min_c, env.temp_max_c
    res = model.resistors
    slope = res.tempco[i1] - res.tempco[i2]
    first = (
        (slope * (lo - 25.0) >= slope * (hi - 25.0))
        if k_up
        else (slope * (lo - 25.0) <= slope * (hi - 25.0))
    )
    return np.asarray(np.where(first, lo, hi), dtype=float)


def _scaled(value: F64, tol: F64, z: float, tempco: F64, temp: F64) -> F64:
    return np.asarray(value * (1 + tol * z) * (1 + tempco * 1e-6 * (temp - 25.0)))


def probe_rails(model: SearchModel, probe: Probe) -> Rails:
    """The probe's rails (each rail times 1 + tol·z), the reference following the rails as
    ``rails_from_supply`` and the analysis have it (a set single-supply reference stays)."""
    s = model.spec.supply
    tol = s.tolerance_pct / 100
    v_pos = s.positive_v * (1 + probe.v_pos * tol)
    v_neg = s.negative_v * (1 + probe.v_neg * tol)
    return Rails(v_pos, v_neg, s.reference_v if s.negative_v == 0 else None)


def probe_levels(
    model: SearchModel, u: I64, probe: Probe, values: tuple[F64, ...]
) -> tuple[F64, F64]:
    """Square levels VH, VL of the rows on the probe's rails, from the topology's search form
    (``values``: the rows' part values at the probe, as ``probe_values`` gives them)."""
    form = model.form
    names = (*form.divider, *form.integrator, form.capacitor)
    return form.row_levels(
        model.stages, u, probe_rails(model, probe), dict(zip(names, values, strict=True))
    )


def probe_values(
    model: SearchModel, probe: Probe, i1: I64, i2: I64, i3: I64, j: I64
) -> tuple[F64, F64, F64, F64]:
    """R1, R2, R3, C1 at the probe (Ω, F): tolerance at its end, then temperature."""
    res, cap = model.resistors, model.capacitors
    temp = _temperature(model, i1, i2, probe.k_up)
    c_band = cap.value[j] * (1 + cap.extra_band[j] * probe.zc)
    return (
        _scaled(res.value[i1], res.tol[i1], probe.z1, res.tempco[i1], temp),
        _scaled(res.value[i2], res.tol[i2], probe.z2, res.tempco[i2], temp),
        _scaled(res.value[i3], res.tol[i3], probe.z3, res.tempco[i3], temp),
        _scaled(c_band, cap.tol[j], probe.zc, cap.tempco[j], temp),
    )


def probe_scales(probe: Probe) -> tuple[float, float]:
    """Slew and delay factors of the probe."""
    return 1 + SLEW_SPREAD * probe.slew, 1 + DELAY_SPREAD * probe.delay


# ---- pair level ----------------------------------------------------------------------------


class PairLimits(NamedTuple):
    """For each pair: whether any row can pass the probes, and the nominal P range it needs."""

    keep: NDArray[np.bool_]
    p_min: F64
    p_max: F64


def _row_factor_range(model: SearchModel, probe: Probe, temp: float) -> tuple[float, float]:
    """Range of P_probe/(P·k_probe/k) over every eligible R3 and C1: the R3 and C1 factors
    (1 + tol·z)(1 + tc·(T - 25)) (and the class II band) at one temperature."""
    res, cap = model.resistors, model.capacitors
    if len(res) == 0 or len(cap) == 0:
        return 1.0, 1.0
    f3 = (1 + res.tol * probe.z3) * (1 + res.tempco * 1e-6 * (temp - 25.0))
    fc = (1 + cap.extra_band * probe.zc) * (1 + cap.tol * probe.zc)
    fc = fc * (1 + cap.tempco * 1e-6 * (temp - 25.0))
    return float(f3.min() * fc.min()), float(f3.max() * fc.max())


def probe_loop(model: SearchModel, u: I64, probe: Probe, temp: F64) -> StageLoop:
    """The stages' loops at the probe: the level intervals on its rails
    (``SearchForm.level_bounds``), its slew and delay, offsets at 0 V and the integrator
    error voltage Ib1·R3 over every eligible R3 at the probe."""
    res = model.resistors
    stages = model.stages
    levels = model.form.level_bounds(stages, u, probe_rails(model, probe))
    slew, delay = probe_scales(probe)
    loop = model.loops(u)
    ib = np.array([s.integrator_bias_a for s in stages])[u]
    r3_lo = np.full(len(u), math.inf)
    r3_hi = np.zeros(len(u))
    for t in np.unique(temp):
        r3 = res.value * (1 + res.tol * probe.z3) * (1 + res.tempco * 1e-6 * (t - 25.0))
        at = temp == t
        r3_lo = np.where(at, r3.min(), r3_lo)
        r3_hi = np.where(at, r3.max(), r3_hi)
    ve_a, ve_b = ib * r3_lo, ib * r3_hi

    return StageLoop(
        *levels,
        loop.slew_rise * slew,
        loop.slew_fall * slew,
        loop.delay * delay,
        loop.gbw,
        loop.integrator_gbw,
        np.minimum(ve_a, ve_b),
        np.maximum(ve_a, ve_b),
        delay_spread=loop.delay_spread * delay,
    )


def pair_limits(model: SearchModel, u: I64, i1: I64, i2: I64, p_lo: F64, p_hi: F64) -> PairLimits:
    """What the probes allow of the pairs' rows whose nominal P lies in [p_lo, p_hi].

    At a probe, k_probe is exact for the pair and P_probe = P·(k_probe/k)·ρ with ρ, the R3
    and C1 factor, inside ``_row_factor_range``. The period bounds rise with P, so FAST (its
    period must reach T_min) gives a lowest nominal P and SLOW_A/SLOW_B (theirs at most
    T_max) a highest; BIG (amplitude at most A_max) and SMALL (at least A_min) drop a pair
    when the amplitude bounds over its P range cannot reach the band.
    """
    spec = model.spec
    res = model.resistors
    t_target = 1.0 / spec.target.target_hz
    tf, ta = spec.target.tolerance_pct / 100, spec.triangle.tolerance_pct / 100
    t_min, t_max = t_target / (1 + tf) * (1 - 1e-12), t_target / (1 - tf) * (1 + 1e-12)
    a_min = spec.triangle.amplitude_vpp * (1 - ta) * (1 - 1e-12)
    a_max = spec.triangle.amplitude_vpp * (1 + ta) * (1 + 1e-12)
    k = res.value[i1] / res.value[i2]
    keep = np.ones(len(u), dtype=bool)
    p_min, p_max = np.asarray(p_lo, dtype=float), np.asarray(p_hi, dtype=float)
    for probe in PROBES:
        temp = _temperature(model, i1, i2, probe.k_up)
        r1 = _scaled(res.value[i1], res.tol[i1], probe.z1, res.tempco[i1], temp)
        r2 = _scaled(res.value[i2], res.tol[i2], probe.z2, res.tempco[i2], temp)
        kp = r1 / r2
        lo_f = np.empty(len(u))
        hi_f = np.empty(len(u))
        for t in np.unique(temp):
            at = temp == t
            lo_f[at], hi_f[at] = _row_factor_range(model, probe, float(t))
        loop = probe_loop(model, u, probe, temp)
        scale_lo, scale_hi = kp / k * lo_f, kp / k * hi_f  # P_probe/P over the pair's rows
        if probe is FAST:
            p_min = np.maximum(p_min, lowest_p(loop, kp, np.full(len(u), t_min)) / scale_hi)
        elif probe in (SLOW_A, SLOW_B):
            p_max = np.minimum(p_max, highest_p(loop, kp, np.full(len(u), t_max)) / scale_lo)
        else:
            amp = amplitude_bounds(loop, kp, p_min * scale_lo, p_max * scale_hi)
            keep &= amp.lo <= a_max if probe is BIG else amp.hi >= a_min
    keep &= p_min <= p_max
    return PairLimits(keep, p_min, p_max)
