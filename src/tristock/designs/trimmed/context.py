"""What every stage of the trimmed search shares: the search model, the trimmers, the margin.

``TrimContext`` wraps ``search.model.SearchModel`` (eligible U1, R1..R3 and C1, each op amp's
loop on the nominal rails, per-designator masks) with the trimmer table (RV1: pots of kind
``trimmer`` with stock for the boards, sorted by value then stock code), the wiper margin
m = ``trim.margin_pct``/100 and the drift limit. A mask under the key ``"RV1"`` in
``model.allowed`` (over ``pots``) pins or frees the trimmer the way the other keys do for the
other designators (re-optimisation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits.board import Design
from tristock.search.model import SCORE_RESOLUTION, SearchModel, build_model
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Pot

I64 = NDArray[np.int64]
F64 = NDArray[np.float64]

#: Designators of a trimmed board, in BOM order of the search's rows.
TRIM_DESIGNATORS = ("U1", "R1", "R2", "R3", "C1", "RV1")
#: Cost keys are integers in steps of this many currency units.
COST_STEP = 1e-4


def quantise_score(x: F64 | float) -> I64:
    """Resolution and drift in integer steps of ``SCORE_RESOLUTION`` (round half to even)."""
    return np.rint(np.asarray(x, dtype=np.float64) / SCORE_RESOLUTION).astype(np.int64)


def quantise_cost(x: F64 | float) -> I64:
    return np.rint(np.asarray(x, dtype=np.float64) / COST_STEP).astype(np.int64)


@dataclass
class PotTable:
    """Trimmers as arrays (values in Ω, tolerance as a fraction, tempco in ppm/°C)."""

    parts: list[Pot]
    value: F64
    tol: F64
    tempco: F64
    cost: F64
    stock: I64

    @classmethod
    def of(cls, pots: list[Pot]) -> PotTable:
        return cls(
            parts=pots,
            value=np.array([p.value_ohm for p in pots], dtype=np.float64),
            tol=np.array([p.tolerance_pct / 100 for p in pots], dtype=np.float64),
            tempco=np.array([p.tempco_ppm for p in pots], dtype=np.float64),
            cost=np.array([p.unit_cost for p in pots], dtype=np.float64),
            stock=np.array([p.stock for p in pots], dtype=np.int64),
        )

    def __len__(self) -> int:
        return len(self.parts)


def trimmers(catalog: Catalog, boards: int) -> list[Pot]:
    """Pots of kind trimmer with stock for ``boards`` boards, by value then stock code."""
    return sorted(
        (p for p in catalog.pots if p.kind == "trimmer" and p.stock >= boards),
        key=lambda p: (p.value_ohm, p.id),
    )


@dataclass
class TrimContext:
    """The search model, the trimmers and the trim settings of one trimmed search."""

    model: SearchModel
    pots: PotTable
    margin: float  # m, fraction of travel kept free at each end
    drift_limit: float | None  # fraction, or None

    @property
    def spec(self) -> Spec:
        return self.model.spec

    @property
    def target_hz(self) -> float:
        return self.model.spec.target.target_hz

    @property
    def target_period_s(self) -> float:
        return 1.0 / self.model.spec.target.target_hz

    def pot_mask(self) -> NDArray[np.bool_]:
        return self.model.allows("RV1", len(self.pots))

    def design(self, u: int, i1: int, i2: int, i3: int, j: int, v: int, wiper: float) -> Design:
        """The Design of one row (indices into the model's tables and ``pots``)."""
        res, cap = self.model.resistors.parts, self.model.capacitors.parts
        return Design(
            u1=self.model.opamps[u].part,
            r1=res[i1],
            r2=res[i2],
            r3=res[i3],
            c1=cap[j],
            rv1=self.pots.parts[v],
            wiper=min(max(wiper, 0.0), 1.0),
        )


def trim_context(spec: Spec, catalog: Catalog) -> TrimContext:
    """The context of ``spec`` (which must have an enabled ``[trim]``) on ``catalog``."""
    assert spec.trim is not None
    drift = spec.trim.drift_after_trim_pct
    return TrimContext(
        model=build_model(spec, catalog),
        pots=PotTable.of(trimmers(catalog, spec.build.boards)),
        margin=spec.trim.margin_pct / 100,
        drift_limit=None if drift is None else drift / 100,
    )


__all__ = [
    "COST_STEP",
    "SCORE_RESOLUTION",
    "TRIM_DESIGNATORS",
    "PotTable",
    "TrimContext",
    "quantise_cost",
    "quantise_score",
    "trim_context",
    "trimmers",
]
