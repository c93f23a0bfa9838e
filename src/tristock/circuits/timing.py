"""Timing networks: how a pot in the integrator's path sets its resistance and drive.

Each wiring is one building block, a function of (R3, RV1, wiper α[, R4]) giving the effective
integrator resistance R_eff (Ω) and the drive fraction β (dimensionless); ``NETWORKS`` names
them by the spec's ``control``. The integrator then behaves as one with R3 → R_eff and
C1 → C1/β (the same ramp slope) and its error voltage Ve → Ve/β (it works against β·V). Exact
for an ideal square source; the op amp's output resistance (tens of Ω) is neglected. With a
single-pole integrator the mapping is not exact: its ε = 1/(ωt·R_eff·C1) comes out as β·ε
(C1/β in place of C1), an error below ε itself in the period (1e-3 for 1 MΩ, 56 pF and 3 MHz);
the lag τi is unaffected.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from tristock.circuits.topology import FloatArray

Ohms = FloatArray | float
Network = Callable[[Ohms, Ohms, FloatArray, Ohms], tuple[Ohms, Ohms]]


def series_rheostat(r3: Ohms, rv: Ohms, alpha: FloatArray, r4: Ohms = 0.0) -> tuple[Ohms, Ohms]:
    """RV1 as a variable resistor in series with R3; α in [0, 1] is the added fraction of RV1:
    R_eff = R3 + α·RV, β = 1, so f(α) = f0 / (1 + α·RV/R3). ``r4`` is not part of it."""
    return r3 + alpha * rv, np.ones_like(alpha) if np.ndim(alpha) else 1.0


def divider_pot(r3: Ohms, rv: Ohms, alpha: FloatArray, r4: Ohms = 0.0) -> tuple[Ohms, Ohms]:
    """RV1 across the square output (top) and the end-stop resistor R4 to the reference
    (bottom), its wiper driving R3; α is the wiper's fraction of travel from the bottom.
    Thévenin: β = (R4 + α·RV)/(R4 + RV), R_th = (1-α)·RV ∥ (R4 + α·RV), so R_eff = R3 + R_th
    and the ramp slope scales by β: f ∝ β/R_eff, linear in β when R3 ≫ RV."""
    bottom = r4 + alpha * rv
    top = (1.0 - alpha) * rv
    beta = bottom / (r4 + rv)
    r_th = top * bottom / (r4 + rv)
    return r3 + r_th, beta


#: The wirings by the spec's ``[tuning] control`` name.
NETWORKS: dict[str, Network] = {"series": series_rheostat, "divider": divider_pot}


def timing_network(
    r3: FloatArray | float,
    rv: FloatArray | float,
    alpha: FloatArray | float,
    control: str = "series",
    r4: FloatArray | float = 0.0,
) -> tuple[FloatArray | float, FloatArray | float]:
    """Effective integrator resistance (Ω) and drive fraction β of a pot in the timing path,
    wired as ``control`` names (``NETWORKS``: ``series_rheostat``, ``divider_pot``)."""
    a = np.asarray(alpha, dtype=float)
    if np.any((a < 0) | (a > 1)):
        raise ValueError("alpha: wiper position must lie in [0, 1]")
    if control not in NETWORKS:
        raise ValueError(f"control: expected 'series' or 'divider', got {control!r}")
    return NETWORKS[control](r3, rv, a, r4)
