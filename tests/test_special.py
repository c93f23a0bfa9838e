"""``tristock.special`` against scipy.special (Cephes' ``ndtri``, and ``lambertw``) and
Python's ``statistics.NormalDist`` (AS 241 in the standard library): the same values to
rounding, and the defining identities."""

from __future__ import annotations

import math
import statistics

import numpy as np
from scipy import special

from tristock.special import CHUNK, lambert_w0, normal_quantile


def quantile_points() -> np.ndarray:
    rng = np.random.default_rng(7)
    return np.concatenate(
        [
            rng.random(3 * CHUNK + 5),  # more than one chunk, the last one short
            np.logspace(-300, -1, 2000),  # the lower tail, past r = 5 (p < e^-25)
            1.0 - np.logspace(-16, -1, 2000),  # the upper tail
            [0.5, 0.075, 0.925, 0.5 - 0.425, 0.5 + 0.425],  # region boundaries
        ]
    )


def test_the_normal_quantile_is_scipys_to_rounding() -> None:
    p = quantile_points()
    got, want = normal_quantile(p), special.ndtri(p)  # scipy.special (Cephes)
    assert np.all(np.abs(got - want) <= 2e-15 * np.maximum(np.abs(want), 1.0))
    assert normal_quantile(np.array(0.5)) == 0.0
    # Python's statistics.NormalDist.inv_cdf (AS 241 as well), a sample of points
    stdlib = statistics.NormalDist()
    for x in p[:: max(1, len(p) // 500)]:
        assert math.isclose(
            float(normal_quantile(np.array(x))), stdlib.inv_cdf(x), rel_tol=1e-15, abs_tol=1e-300
        )


def test_the_normal_quantile_writes_in_place_and_keeps_the_shape() -> None:
    p = np.random.default_rng(3).random((3, 7000))
    want = normal_quantile(p)
    assert want.shape == p.shape
    normal_quantile(p, out=p)
    assert np.array_equal(p, want)


def test_the_normal_quantile_inverts_the_normal_cdf() -> None:
    # scipy.special.ndtr: Φ(Φ⁻¹(p)) = p
    p = np.linspace(1e-6, 1 - 1e-6, 10001)
    assert np.allclose(special.ndtr(normal_quantile(p)), p, rtol=1e-14, atol=1e-17)
    assert math.isclose(
        float(normal_quantile(np.array(0.975))), 1.959963984540054, rel_tol=1e-15
    )  # common practice: z of 95 %


def test_lambert_w0_is_scipys_to_rounding_away_from_the_branch_point() -> None:
    c = np.concatenate([np.linspace(1.0, 4.0, 20001)[1:], 1.0 + np.logspace(-4, 0, 2000)])
    z = -np.exp(-c)
    got, want = lambert_w0(z), np.real(special.lambertw(z))  # scipy.special.lambertw
    assert np.all(np.abs(got - want) <= 2e-14)
    assert np.all(np.abs(got * np.exp(got) - z) <= 4e-16 * np.abs(z) + 1e-17)  # w·e^w = z


def test_lambert_w0_near_the_branch_point_is_within_its_conditioning() -> None:
    # W0 is ill-conditioned near -1/e (dW/dz ~ 1/sqrt(2e(z + 1/e))): a rounding of z moves it
    # by about sqrt(ulp); scipy's lambertw and ours agree to that, and -1/e itself gives -1.
    c = 1.0 + np.logspace(-15, -4, 500)
    z = -np.exp(-c)
    got, want = lambert_w0(z), np.real(special.lambertw(z))
    ok = np.isfinite(want)
    assert np.all(np.abs(got - want)[ok] <= 3e-8)
    assert np.all((got >= -1.0) & (got < 0.0))
    # at -1/e as rounded (c = 1, a square that starts its edge at the neutral level) scipy's
    # lambertw gives NaN; ours the branch point
    assert lambert_w0(np.array(-math.exp(-1.0))) == -1.0
