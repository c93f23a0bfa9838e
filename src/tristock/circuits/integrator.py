"""The integrator with a single-pole op amp: slower ramps, a lag behind each edge of the square,
and what that lag does to the triangle's peaks.

The amplifier's output follows dvt/dt = ωt·(v+ - v-) (ωt = 2π·GBW, rad/s; its tanh input stage
taken as linear, valid while the triangle's slope is well below the slew rate: the error is
about ε·(slope/SR)²/3). Units: s, V, V/s, Hz.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from tristock.special import lambert_w0

FloatArray = npt.NDArray[np.float64]


class IntegratorTerms(NamedTuple):
    """A single-pole integrator amplifier (ωt = 2π·GBW): the closed loop is
    -1/(s·R3·C1) · 1/(1 + ε + s/ωt), ε = 1/(ωt·R3·C1).

    ``slow``: 1 + ε, the factor by which every ramp is slower (R3·C1 acts as R3·C1·(1 + ε));
    ``lag_s``: τi = 1/(ωt·(1 + ε)), the time constant with which the ramp rate follows the
    square. Both 1 and 0 when GBW = inf.
    """

    slow: FloatArray
    lag_s: FloatArray


def integrator_terms(rc: FloatArray, gbw: FloatArray) -> IntegratorTerms:
    """``IntegratorTerms`` for R3·C1 = ``rc`` (s) and the integrator's GBW ``gbw`` (Hz).

    Derivation (node equations of the inverting integrator with dvt/dt = ωt·(v+ - v-)): the
    ramp rate r = dvt/dt obeys τi·dr/dt + r = -(vs - Ve)/(R3·C1·(1 + ε)), a first-order lag.
    So after each edge of the square the triangle's ramp is exactly that of an instant edge
    τi later (the lag's mean delay; exact once e^(-t/τi) has died away, i.e. for edges
    further apart than a few τi), at the slope drive/(R3·C1·(1 + ε)).
    """
    with np.errstate(divide="ignore"):
        wt = 2.0 * math.pi * gbw
        ideal = np.isinf(gbw)
        eps = np.where(ideal, 0.0, 1.0 / (wt * rc))
        lag = np.where(ideal, 0.0, 1.0 / (wt * (1.0 + eps)))
    return IntegratorTerms(1.0 + eps, lag)


def _w0_of_minus_exp(c: FloatArray) -> FloatArray:
    """W0(-e^(-c)) for c >= 1 (principal branch of Lambert's W): its series
    z - z² + 3z³/2 - 8z⁴/3 + 125z⁵/24 in z = -e^(-c) from c = 4 on (the next term, 54z⁶/5,
    is below 4e-10), ``tristock.special.lambert_w0`` below."""
    c = np.asarray(c, dtype=float)
    z = np.maximum(-np.exp(-np.minimum(c, 700.0)), -math.exp(-1.0))  # the branch point
    out = z * (1.0 - z * (1.0 - z * (1.5 - z * (8.0 / 3.0 - z * 125.0 / 24.0))))
    near = c < 4.0
    if near.any():
        out = np.where(near, lambert_w0(np.where(near, z, -0.1)), out)
    return np.asarray(out, dtype=float)


def lag_overshoot_area(
    before: FloatArray, after: FloatArray, slew: FloatArray, lag: FloatArray
) -> FloatArray:
    """∫|vs - Ve| dt (V·s) from the square's crossing of the integrator's neutral level Ve to
    the crossing of its lagged copy (lag τi = ``lag``), for an edge modelled as a linear slew
    at ``slew`` (V/s) from ``before`` volts above Ve to ``after`` volts below it.

    The triangle turns when the lagged square crosses Ve, so its peak falls short of
    slope·(overshoot + τi) by this area/(R3·C1). With x = t/τi from the start of the slew and
    c = 1 + before/(SR·τi), the lagged ramp crosses at x = c + W0(-e^(-c)) (Lambert W) if that
    is before the slew ends at t_e = (before + after)/SR: area = SR·(t - before/SR)²/2;
    otherwise at t = t_e + τi·ln(SR·τi·(1 - e^(-t_e/τi))/after): area = after²/(2·SR) +
    after·(t - t_e). A step (SR = inf): after·τi·ln(1 + before/after). 0 when τi = 0.
    For a real edge (a build-up, then the slew) the area is that of its linear part; it is
    below SR·τi²/2, about 1 mV of peak for realistic parts, so the approximation is harmless.
    """
    if bool(np.isinf(slew).all()):  # steps only: the closed form, no Lambert W
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(lag > 0.0, after * lag * np.log1p(before / after), 0.0)
        shape = np.broadcast_shapes(*(np.shape(x) for x in (before, after, slew, lag)))
        return np.asarray(np.broadcast_to(step, shape), dtype=float)
    # each branch is computed only where some value takes it (every value on its own)
    lagging = lag > 0.0
    everywhere = bool(np.all(lagging))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        safe_lag = lag if everywhere else np.where(lagging, lag, 1.0)
        c = 1.0 + before / (slew * safe_lag)
        x = c + _w0_of_minus_exp(c)
        t_cross = x * safe_lag
        t_end = (before + after) / slew
        area = 0.5 * slew * (t_cross - before / slew) ** 2
        early = t_cross <= t_end
        if not early.all():
            t_late = t_end + safe_lag * np.log(
                slew * safe_lag * -np.expm1(-t_end / safe_lag) / after
            )
            tail = 0.5 * after**2 / slew + after * (t_late - t_end)
            area = np.where(early, area, tail)
        stepped = np.isinf(slew)
        if stepped.any():
            area = np.where(stepped, after * safe_lag * np.log1p(before / after), area)
    return np.asarray(area if everywhere else np.where(lagging, area, 0.0), dtype=float)
