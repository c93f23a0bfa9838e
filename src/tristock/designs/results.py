"""Result models shared by the CLI's ``--json`` and the HTTP API (same field names)."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from tristock.spec.model import Spec


class _Out(BaseModel):
    model_config = ConfigDict(extra="forbid")


class PartOut(_Out):
    """One designator's part: stock code, value in SI units, and what the BOM needs."""

    id: str
    kind: str
    value: float | None
    display: str
    tolerance_pct: float | None = None
    unit_cost: float
    pieces_per_board: int
    stock: int


class Predicted(_Out):
    """The full model at nominal values, rails and 25 °C. ``timing_share``: the share of the
    period set by op-amp delay, slew and GBW, 1 - T_ideal/T (``limits.max_timing_share``)."""

    frequency_hz: float
    amplitude_vpp: float
    duty_high: float
    offset_v: float
    square_high_v: float
    square_low_v: float
    timing_share: float


class ErrorOut(_Out):
    """Nominal prediction against the target, percent."""

    frequency_pct: float
    amplitude_pct: float


class WarningOut(_Out):
    code: str
    severity: str
    message: str


class TrimOut(_Out):
    """A trimmed design: RV1 in series with R3; wiper 0 adds no resistance."""

    wiper_nominal: float
    range_hz: list[float]  # nominal frequency at wiper 1 and 0 (full travel)
    reach_hz: list[float]  # every board of the spread box reaches this span inside the margins
    margin_pct: float
    resolution_pct_per_pct: float  # % of frequency per % of travel at the target
    drift_after_trim_pct: float  # over the temperature range, wiper fixed after trimming


class RangeOut(_Out):
    capacitor: str
    low_hz: float
    high_hz: float
    guaranteed_low_hz: float
    guaranteed_high_hz: float


class TuningOut(_Out):
    """A panel-tuned design: one capacitor per range, ranges from low to high frequency."""

    control: str
    ranges: list[RangeOut]
    dial_law: dict[str, list[float]]  # "wiper" and one list of frequencies per range capacitor


class SavedDesign(_Out):
    """A candidate as a DESIGN file (``tristock design --save``): the spec, designator ->
    stock code, the pot's wiper (0..1; trimmed designs: the nominal trim point) and the range
    capacitor in use; ``analyse``, ``simulate``, ``reoptimise`` and ``export`` read it as is."""

    spec: Spec
    parts: dict[str, str]
    wiper: float = 0.0
    range: str = "C1"
    #: The circuit (``tristock.circuits.TOPOLOGIES``); left out while it is the op-amp
    #: Schmitt loop, so such files read as before.
    topology: str = Field("opamp_schmitt", exclude_if=lambda t: t == "opamp_schmitt")


class VariantOut(_Out):
    """Another board of a candidate's class (``designs.variants``: R1/R2 scaled together,
    U1 of the same electrical parameters in another package, a part of equal value,
    tolerance and tempco under another stock code). ``parts``: designator -> stock code;
    ``differs``: the designators whose stock codes differ from the candidate's; ``cost``:
    per board; ``rank_all``: its place in the list with every variant (``--all-variants``)."""

    parts: dict[str, str]
    differs: list[str]
    cost: float
    rank_all: int


class Candidate(_Out):
    rank: int
    #: The circuit this design builds (``tristock.circuits.TOPOLOGIES``).
    topology: str = "opamp_schmitt"
    parts: dict[str, PartOut]
    predicted: Predicted
    error: ErrorOut
    worst_case: dict[str, Any]
    yield_fraction: float
    yield_detail: dict[str, Any]
    sensitivity: dict[str, dict[str, float]]
    drift: dict[str, float]
    cost: float
    bom_lines: int
    score: int
    warnings: list[WarningOut]
    trim: TrimOut | None = None
    tuning: TuningOut | None = None
    design_file: SavedDesign | None = None  # set by ``designs.design`` for every answer
    #: Distinct answers: the accepted variants of this design that rank above the last
    #: distinct design reported, in rank order (empty when every variant is listed).
    variants: list[VariantOut] = []


class Infeasible(_Out):
    reasons: list[str]


class SearchInfo(_Out):
    engine: str
    proven_optimal: bool
    elapsed_s: float
    combinations: int
    evaluated: int
    score_resolution: float
    dropped_by_full_model: int
    time_limit_s: float
    #: True: the top k are k distinct designs, variants listed under each (the default of
    #: the CLI and the API); False: every variant ranked on its own.
    distinct: bool = False


class DesignResult(_Out):
    spec: Spec
    candidates: list[Candidate]
    infeasible: Infeasible | None
    search: SearchInfo
    cautions: list[str]


class Change(_Out):
    """One changed position: its stock code before and after (null: no part there, as a
    pull-up R5 added to or taken from a comparator-IC board) and why it changed."""

    designator: str
    from_id: str | None
    to_id: str | None
    why: str


class ReoptimisedCandidate(Candidate):
    changed: list[str]
    changes: list[Change]


class Shortfall(_Out):
    """A part of the design whose stock does not cover the planned build."""

    designator: str
    id: str
    needed: int
    stock: int
    short: int


class OriginalDesign(_Out):
    """The design as it was: ``yield_fraction`` and ``worst_case`` (the analysis's, as in a
    candidate) when the full model analysed it (fixed and tuned designs; a tuned one at
    mid-dial of C1), for the before/after comparison."""

    parts: dict[str, str]
    passes: bool
    reasons: list[str]
    predicted: Predicted | None
    yield_fraction: float | None = None
    worst_case: dict[str, Any] | None = None


class ReoptimiseResult(_Out):
    spec: Spec
    original: OriginalDesign
    candidates: list[ReoptimisedCandidate]
    infeasible: Infeasible | None
    shortfall: list[Shortfall]
    search: SearchInfo
