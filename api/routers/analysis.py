"""``POST /v1/analyse`` and ``POST /v1/simulate``: one design, the CLI's JSON reports,
computed and serialised in a compute process."""

from __future__ import annotations

from fastapi import APIRouter

from tristock.circuits.board import Design
from tristock.report.board import analysis_report, simulation_report
from tristock.simulate import SimulationError

from ..deps import CatalogDep, SettingsDep, SlotsDep
from ..errors import FieldProblem
from ..jsonout import RenderedJSON, to_json_bytes
from ..reports import AnalysisReport, SimulationReport
from ..schemas import AnalyseRequest, SimulateRequest
from . import COMPUTE_ERRORS

router = APIRouter(prefix="/v1", tags=["design"])


def _analysed(body: AnalyseRequest, design: Design) -> bytes:
    data = analysis_report(
        body.spec, design, samples=body.samples, seed=body.seed, distribution=body.distribution
    )
    return to_json_bytes(data)


def _simulated(body: SimulateRequest, design: Design) -> bytes:
    data = simulation_report(body.spec, design, periods=body.periods, max_points=body.max_points)
    return to_json_bytes(data)


@router.post(
    "/analyse",
    operation_id="analyse",
    response_model=AnalysisReport,
    responses=COMPUTE_ERRORS,
    summary="Nominal, worst case, yield, sensitivities and checks of one design",
    description="The same object as `tristock analyse DESIGN --json`.",
)
async def post_analyse(
    body: AnalyseRequest, settings: SettingsDep, catalog: CatalogDep, slots: SlotsDep
) -> RenderedJSON:
    if body.samples > settings.max_samples:
        raise FieldProblem([(["body", "samples"], f"at most {settings.max_samples}")], "too_large")
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        return RenderedJSON(await slots.run(_analysed, body, d))


@router.post(
    "/simulate",
    operation_id="simulate",
    response_model=SimulationReport,
    responses=COMPUTE_ERRORS,
    summary="Time-domain simulation of one design against the model",
    description="The same object as `tristock simulate DESIGN --json`: measured values, "
    "the model's prediction and the sampled waveforms (`t_s`, `triangle_v`, `square_v`, at "
    "most `max_points` each). A loop that does not oscillate is a 422 saying why.",
)
async def post_simulate(
    body: SimulateRequest, catalog: CatalogDep, slots: SlotsDep
) -> RenderedJSON:
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        try:
            return RenderedJSON(await slots.run(_simulated, body, d))
        except SimulationError as err:
            raise FieldProblem([(["body", "parts"], str(err))], "does_not_oscillate") from None
