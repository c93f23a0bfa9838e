"""The tolerance ("spread") variables the zener-clamped loop will declare once the analysis
takes them from the topology (issue 12): what each moves in ``physics.ClampPoint`` and how.

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
        for d in ("R1", "R2", "R3", "R5", "C1")
    ),
    SpreadVariable("D1.vz", ("vz1",), "relative", "D1 tolerance_pct (of vz_v)"),
    SpreadVariable("D2.vz", ("vz2",), "relative", "D2 tolerance_pct (of vz_v)"),
    SpreadVariable("D1.rz", ("rz1",), "relative", "common practice: ±30 % of rz_ohm"),
    SpreadVariable("D2.rz", ("rz2",), "relative", "common practice: ±30 % of rz_ohm"),
    SpreadVariable("D1.vf", ("vf1",), "absolute", "common practice: ±30 mV forward spread"),
    SpreadVariable("D2.vf", ("vf2",), "absolute", "common practice: ±30 mV forward spread"),
    SpreadVariable(
        "T",
        ("vz1", "vz2", "vf1", "vf2", "vt_therm", "r1", "r2", "r3", "r5", "c1"),
        "tempco",
        "spec temperature range (tempco_mv_per_c of D1/D2, forward -2 mV/°C, ppm of R and C)",
    ),
    SpreadVariable("V+", ("v_pos",), "rail", "supply tolerance"),
    SpreadVariable("V-", ("v_neg",), "rail", "supply tolerance"),
    SpreadVariable("U1.offset", ("vos1", "vos2"), "absolute", "U1 offset_v"),
    SpreadVariable("U1.bias", ("ib1", "ib2"), "absolute", "U1 bias_a"),
    SpreadVariable("U1.slew", ("slew_rise", "slew_fall"), "relative", "common practice: ±20 %"),
    SpreadVariable("U1.delay", ("delay",), "relative", "common practice: ±20 %"),
)
