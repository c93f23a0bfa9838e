"""The tolerance ("spread") variables the set-duty loop will declare once the analysis
takes them from the topology (issue 12): what each moves in ``physics.DutyPoint`` and how.

Kinds: ``relative`` (field·(1 + tol·z), tol from the part's tolerance_pct), ``absolute``
(field + typ·z, typ from the part's typical figure), ``tempco`` (moved with the board's
temperature through the part's tempco), ``rail`` (the supply's tolerance). Data only: the
analysis layer will read it; nothing here runs an analysis.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class SpreadVariable:
    """One tolerance variable: its ``name`` (designator.quantity), the point ``fields`` it
    moves, its ``kind`` (see the module notes) and what sets its size."""

    name: str
    fields: tuple[str, ...]
    kind: str
    size: str


SPREAD_VARIABLES: tuple[SpreadVariable, ...] = (
    *(
        SpreadVariable(d, (d.lower(),), "relative", f"{d} tolerance_pct")
        for d in ("R1", "R2", "R3A", "R3B", "C1")
    ),
    SpreadVariable("D3.vf", ("vf3",), "relative", "D3 tolerance_pct (of vf_v)"),
    SpreadVariable("D4.vf", ("vf4",), "relative", "D4 tolerance_pct (of vf_v)"),
    SpreadVariable(
        "T",
        ("vf3", "vf4", "vt_therm", "r1", "r2", "r3a", "r3b", "c1"),
        "tempco",
        "spec temperature range (tempco_mv_per_c of D3/D4, ppm of R and C)",
    ),
    SpreadVariable("V+", ("v_pos",), "rail", "supply tolerance"),
    SpreadVariable("V-", ("v_neg",), "rail", "supply tolerance"),
    SpreadVariable("U1.offset", ("vos1", "vos2"), "absolute", "U1 offset_v"),
    SpreadVariable("U1.bias", ("ib1", "ib2"), "absolute", "U1 bias_a"),
    SpreadVariable("U1.slew", ("slew_rise", "slew_fall"), "relative", "common practice: ±20 %"),
    SpreadVariable("U1.delay", ("delay",), "relative", "common practice: ±20 %"),
)
