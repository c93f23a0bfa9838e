"""The two special functions of the design path, in numpy: the standard normal quantile and
Lambert's W on its principal branch over [-1/e, 0).

They replace ``scipy.special.ndtri`` and ``scipy.special.lambertw`` there because importing
``scipy.special`` costs about 0.16 s of every process (its array-API layer loads numpy's test
and f2py packages). Both agree with scipy's to about 1e-15 (``tests/test_special.py``); near
W's branch point, where W is ill-conditioned in z, both are within the conditioning of a
rounded z of each other (about 1e-10 for z within 1e-8 relative of -1/e).
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]

# Wichura's PPND16 (Applied Statistics 37(3), 1988, algorithm AS 241), lowest power first:
# the central region |p - 1/2| <= 0.425 in r = 0.180625 - (p - 1/2)^2, then the tails in
# r = sqrt(-ln(min(p, 1 - p))) - 1.6 (r <= 5) or - 5.
_CENTRAL = (
    (3.3871328727963666080e0, 1.3314166789178437745e2, 1.9715909503065514427e3,
     1.3731693765509461125e4, 4.5921953931549871457e4, 6.7265770927008700853e4,
     3.3430575583588128105e4, 2.5090809287301226727e3),
    (1.0, 4.2313330701600911252e1, 6.8718700749205790830e2, 5.3941960214247511077e3,
     2.1213794301586595867e4, 3.9307895800092710610e4, 2.8729085735721942674e4,
     5.2264952788528545610e3),
)  # fmt: skip
_NEAR_TAIL = (
    (1.42343711074968357734e0, 4.63033784615654529590e0, 5.76949722146069140550e0,
     3.64784832476320460504e0, 1.27045825245236838258e0, 2.41780725177450611770e-1,
     2.27238449892691845833e-2, 7.74545014278341407640e-4),
    (1.0, 2.05319162663775882187e0, 1.67638483018380384940e0, 6.89767334985100004550e-1,
     1.48103976427480074590e-1, 1.51986665636164571966e-2, 5.47593808499534494600e-4,
     1.05075007164441684324e-9),
)  # fmt: skip
_FAR_TAIL = (
    (6.65790464350110377720e0, 5.46378491116411436990e0, 1.78482653991729133580e0,
     2.96560571828504891230e-1, 2.65321895265761230930e-2, 1.24266094738807843860e-3,
     2.71155556874348757815e-5, 2.01033439929228813265e-7),
    (1.0, 5.99832206555887937690e-1, 1.36929880922735805310e-1, 1.48753612908506148525e-2,
     7.86869131145613259100e-4, 1.84631831751005468180e-5, 1.42151175831644588870e-7,
     2.04426310338993978564e-15),
)  # fmt: skip
#: Elements per step of ``normal_quantile`` (its temporaries stay in the CPU's cache).
CHUNK = 16384


def _rational(
    coefficients: tuple[tuple[float, ...], tuple[float, ...]], x: FloatArray
) -> FloatArray:
    """num(x)/den(x) by Horner's rule, in place on new arrays."""
    num_c, den_c = coefficients
    num, den = np.full_like(x, num_c[-1]), np.full_like(x, den_c[-1])
    for a, b in zip(num_c[-2::-1], den_c[-2::-1], strict=True):
        num *= x
        num += a
        den *= x
        den += b
    num /= den
    return num


def _quantile_chunk(p: FloatArray) -> FloatArray:
    q = p - 0.5
    out = _rational(_CENTRAL, 0.180625 - q * q)
    out *= q
    tail = np.abs(q) > 0.425
    if tail.any():
        pt, qt = p[tail], q[tail]
        r = np.sqrt(-np.log(np.where(qt < 0.0, pt, 1.0 - pt)))
        x = _rational(_NEAR_TAIL, r - 1.6)
        far = r > 5.0
        if far.any():
            x[far] = _rational(_FAR_TAIL, r[far] - 5.0)
        out[tail] = np.copysign(x, qt)
    return out


def normal_quantile(p: FloatArray, out: FloatArray | None = None) -> FloatArray:
    """Φ⁻¹(p), the standard normal quantile, for p in (0, 1) (AS 241, about 1e-16 relative);
    written to ``out`` when given (which may be ``p``)."""
    p = np.asarray(p, dtype=float)
    result = np.empty_like(p) if out is None else out
    flat_in, flat_out = p.reshape(-1), result.reshape(-1)
    for start in range(0, flat_in.size, CHUNK):
        part = slice(start, start + CHUNK)
        flat_out[part] = _quantile_chunk(flat_in[part])
    return result


def lambert_w0(z: FloatArray) -> FloatArray:
    """W0(z), the principal branch of Lambert's W (w·e^w = z, w >= -1), for z in [-1/e, 0).

    Start: the series at the branch point in p = sqrt(2(e·z + 1)), -1 + p - p²/3 + 11p³/72
    - 43p⁴/540, below z = -1/4; the series at 0, z - z² + 3z³/2 - 8z⁴/3, above; then five
    Halley steps w -= f/(e^w(w + 1) - (w + 2)f/(2w + 2)), f = w·e^w - z (each step triples
    the correct digits; a step that is not finite, at w = -1, is not taken)."""
    z = np.asarray(z, dtype=float)
    p = np.sqrt(np.maximum(2.0 * (math.e * z + 1.0), 0.0))
    at_branch = -1.0 + p * (1.0 - p * (1.0 / 3.0 - p * (11.0 / 72.0 - p * 43.0 / 540.0)))
    at_zero = z * (1.0 - z * (1.0 - z * (1.5 - z * 8.0 / 3.0)))
    w = np.where(z < -0.25, at_branch, at_zero)
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(5):
            ew = np.exp(w)
            f = w * ew - z
            step = f / (ew * (w + 1.0) - (w + 2.0) * f / (2.0 * w + 2.0))
            w = np.where(np.isfinite(step), w - step, w)
    return np.asarray(w, dtype=float)


__all__ = ["lambert_w0", "normal_quantile"]
