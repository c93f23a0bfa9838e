"""One stage option of a topology's search form with what the search adds to it: its window
of divider ratios, the op amp's terms and, for the op-amp Schmitt loop, the loop linearised
at the target (``search.targetpoint``)."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

from tristock.circuits.opamp_schmitt.searchform import OpAmpStage
from tristock.circuits.rails import OpAmpModel
from tristock.circuits.searchform import Exclusion, StageLoop, StageOption
from tristock.search.targetpoint import TargetPoint, target_point
from tristock.spec.model import Spec
from tristock.stock.parts import OpAmp


@dataclass(frozen=True)
class OpAmpTerms:
    """One stage option of the topology's search form, with what the search adds to it.

    ``stage`` is the form's ``StageOption`` (its parts, stock, cost and ``loop``, what the
    bounds need: the timing parameters, the square levels and the integrator error voltage
    Ve = Vos1 + Ib1·R3 over the R3 values eligible, as intervals); ``k_range`` holds every
    k = R1/R2 a row can meet the spec with (``search.model._k_range``). ``part``, ``model``,
    ``vh``, ``vl`` and ``target`` are the op-amp Schmitt loop's: its op amp U1, its terms,
    the square levels, and the constants of the loop linearised at the target, None where
    the full model cannot meet the target exactly or the topology is another (the
    infeasibility reasons use them; ``target_note`` says why not). The target point is
    found on first use (a Newton search of about twenty full-model evaluations per stage):
    the engines never need it, so a big catalog's model does not wait for it.
    """

    index: int
    part: OpAmp
    model: OpAmpModel
    vh: float
    vl: float
    loop: StageLoop
    k_range: tuple[float, float]
    stage: StageOption | None = None
    #: The spec the target point is taken for (None: no target point).
    spec: Spec | None = None
    #: Where the form's ``divider_limit`` cut ``k_range``'s upper end: the limit's words
    #: (the infeasibility reasons name it), else None.
    k_cut: Exclusion | None = None

    @property
    def option(self) -> StageOption:
        """The stage option (always set by ``build_model``)."""
        if self.stage is None:
            raise ValueError("stage: this OpAmpTerms was not built from a stage option")
        return self.stage

    @cached_property
    def _target_found(self) -> tuple[TargetPoint | None, str]:
        if not isinstance(self.stage, OpAmpStage) or self.spec is None:
            return None, "the trimmed and tuned searches model the op-amp Schmitt loop only"
        return target_point(self.part, self.spec, self.vh, self.vl)

    @property
    def target(self) -> TargetPoint | None:
        """The loop linearised at the target (``search.targetpoint``), or None."""
        return self._target_found[0]

    @property
    def target_note(self) -> str:
        """Why ``target`` is None ("" when it is not)."""
        return self._target_found[1]


def stage_terms_of(
    stage: StageOption, spec: Spec, k_range: tuple[float, float], k_cut: Exclusion | None
) -> OpAmpTerms:
    """The search's terms of one stage option (its target point found on first use)."""
    vh, vl = stage.levels
    u1 = stage.part if isinstance(stage, OpAmpStage) else stage.parts["U1"]
    assert isinstance(u1, OpAmp)
    model = stage.model if isinstance(stage, OpAmpStage) else OpAmpModel.from_part(u1)
    return OpAmpTerms(stage.index, u1, model, vh, vl, stage.loop, k_range, stage, spec, k_cut)


__all__ = ["OpAmpTerms", "stage_terms_of"]
