"""Trimmed designs: a trimmer RV1 in series with R3 brings every board to the target.

With the wiper at α (0 = none of RV1 added) the integrator's resistance is
R_eff = R3 + α·RV (``timing.timing_network``, series). A trimmed design is accepted when
every board, at every point of the analysis's spread box (tolerances, RV1's included; each
rail; temperature; op-amp offsets, bias, slew and delay), reaches the target with the wiper
inside [m, 1 - m] (m = ``trim.margin_pct``), when the nominal board's trimmed operating point
meets the fixed design's rules, and when it stays within the drift limit after trimming
(``trim.rows`` lists every rule and the operating point it applies at).

A trimmed design's guarantee is its coverage: ``limits.guarantee`` (the worst case or yield of
a fixed design's frequency band) and the ``[frequency]`` tolerance do not apply, since every
board is trimmed to the target itself.

Ranking, for every ``ranking.by``: finest trim resolution |d ln f/dα| at the nominal wiper α0
(where the nominal board runs at the target; % of frequency per % of travel), then the drift
after trimming (the change of f over the temperature range with the wiper left at α0), then
cost, then the stock codes of U1, R1, R2, R3, C1 and RV1.

Exact under the full model (``physics.predict``): every row scored is evaluated with
it; a cell (U1, R1, R2, C1, RV1) or an R3 is left out only by a relaxation (bounds of the full
model from ``search.bounds``, or the full model at corners of the spread box,
``trim.probes``), and cells are opened in order of a lower bound of the resolution valid for
every R3 (``trim.cells``, proven there). The final coverage check over the box
(``trim.checks.coverage``) decides candidates in exact rank order, and the walk
(``trim.walk``) stops only when the ``top``-th accepted answer ranks before every row not yet
opened. A time limit that cuts it says ``proven_optimal: false`` and never reports the spec
infeasible.

Modules: ``context`` (the search model with the trimmers), ``probes`` (corners of the box),
``cells`` (pairs, R3 windows, the resolution bound), ``rows`` (the full model per row),
``checks`` (coverage, drift), ``walk`` (the order and the stopping rule), ``answers``
(``design_trimmed``), ``reoptimise`` (fewest changed designators), ``explain`` (reasons).
"""

from __future__ import annotations

from tristock.designs.trimmed.answers import design_trimmed
from tristock.designs.trimmed.checks import coverage, drift_after_trim, nominal_wiper

__all__ = ["coverage", "design_trimmed", "drift_after_trim", "nominal_wiper"]
