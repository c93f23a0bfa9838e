"""``POST /v1/analyse`` and ``POST /v1/simulate``: one design, the CLI's JSON reports."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from api.deps import CatalogDep, SettingsDep, SlotsDep
from api.errors import FieldProblem
from api.jsonout import StrictJSON, answer
from api.routers import COMPUTE_ERRORS
from api.schemas import AnalyseRequest, SimulateRequest
from tristock.designfile import design_for
from tristock.report import analysis_report, simulation_report
from tristock.simulate import SimulationError

router = APIRouter(prefix="/v1", tags=["design"])


@router.post(
    "/analyse",
    response_model=dict[str, Any],
    responses=COMPUTE_ERRORS,
    summary="Nominal, worst case, yield, sensitivities and checks of one design",
    description="The same object as `tristock analyse DESIGN --json`.",
)
def post_analyse(
    body: AnalyseRequest, settings: SettingsDep, catalog: CatalogDep, slots: SlotsDep
) -> StrictJSON:
    if body.samples > settings.max_samples:
        raise FieldProblem([(["body", "samples"], f"at most {settings.max_samples}")], "too_large")
    d = design_for(body.spec, body.parts, catalog, wiper=body.wiper, selected=body.range)
    with slots.slot(), FieldProblem.from_value_errors(["body"]):
        data = analysis_report(
            body.spec, d, samples=body.samples, seed=body.seed, distribution=body.distribution
        )
    return answer(data)


@router.post(
    "/simulate",
    response_model=dict[str, Any],
    responses=COMPUTE_ERRORS,
    summary="Time-domain simulation of one design against the model",
    description="The same object as `tristock simulate DESIGN --json`: measured values, "
    "the model's prediction and the sampled waveforms (`t_s`, `triangle_v`, `square_v`, at "
    "most `max_points` each). A loop that does not oscillate is a 422 saying why.",
)
def post_simulate(body: SimulateRequest, catalog: CatalogDep, slots: SlotsDep) -> StrictJSON:
    d = design_for(body.spec, body.parts, catalog, wiper=body.wiper, selected=body.range)
    with slots.slot(), FieldProblem.from_value_errors(["body"]):
        try:
            data = simulation_report(body.spec, d, periods=body.periods, max_points=body.max_points)
        except SimulationError as err:
            raise FieldProblem([(["body", "parts"], str(err))], "does_not_oscillate") from None
    return answer(data)
