"""The workbench's own routes under ``/ui``: SVG figures of one design (drawn by
``tristock.report.figures`` in a compute process, like every compute answer of the API) and
the spec or DESIGN file as TOML (``tristock.export.saving.toml_text``), and a pasted DESIGN
file (TOML or JSON) read back as JSON. Request bodies are the API's (``DesignBody`` and its
kin), so a bad field is the same 422 problem with the same ``loc``.
"""

from __future__ import annotations

import json
import tomllib
from typing import Any

from fastapi import APIRouter
from fastapi.responses import Response
from pydantic import BaseModel, ConfigDict, Field

from tristock.circuits.board import Design
from tristock.designs.results import SavedDesign, TuningOut
from tristock.export.saving import design_document, toml_text
from tristock.report.figures import dial_law_svg, histograms_svg, waveform_svg
from tristock.simulate import SimulationError
from tristock.spec.model import Spec

from ..deps import CatalogDep, SlotsDep
from ..errors import FieldProblem
from ..schemas import AnalyseRequest, DesignBody

router = APIRouter(prefix="/ui", include_in_schema=False)

SVG = "image/svg+xml"
#: The figure routes that run in a compute slot (the app's compute gate sees them).
COMPUTE_PATHS = frozenset({"/ui/figures/waveform.svg", "/ui/figures/histograms.svg"})


class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class SpecBody(_Body):
    spec: Spec


class DialLawBody(_Body):
    """A tuned candidate's ``tuning`` and the spec's wanted span (Hz)."""

    tuning: TuningOut
    wanted_hz: list[float] | None = Field(None, min_length=2, max_length=2)


class DesignText(_Body):
    """A DESIGN file's text, TOML or JSON (``tristock design --save``)."""

    text: str = Field(max_length=200_000)


def _svg(text: str) -> Response:
    return Response(text.encode("utf-8"), media_type=SVG, headers={"Cache-Control": "no-store"})


def _waveform(spec: Spec, design: Design) -> str:
    return waveform_svg(spec, design)


def _histograms(body: AnalyseRequest, design: Design) -> str:
    return histograms_svg(
        body.spec, design, samples=body.samples, seed=body.seed, distribution=body.distribution
    )


@router.post("/figures/waveform.svg")
async def waveform(body: DesignBody, catalog: CatalogDep, slots: SlotsDep) -> Response:
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        try:
            return _svg(await slots.run(_waveform, body.spec, d))
        except SimulationError as err:
            raise FieldProblem([(["body", "parts"], str(err))], "does_not_oscillate") from None


@router.post("/figures/histograms.svg")
async def histograms(body: AnalyseRequest, catalog: CatalogDep, slots: SlotsDep) -> Response:
    d = body.board(catalog)
    with FieldProblem.from_value_errors(["body"]):
        return _svg(await slots.run(_histograms, body, d))


@router.post("/figures/dial-law.svg")
def dial_law(body: DialLawBody) -> Response:
    ranges = [r.model_dump() for r in body.tuning.ranges]
    wanted = (body.wanted_hz[0], body.wanted_hz[1]) if body.wanted_hz else None
    return _svg(dial_law_svg(body.tuning.dial_law, ranges, wanted))


@router.post("/spec.toml")
def spec_toml(body: SpecBody) -> Response:
    """The spec as a TOML spec file (defaults written out, so the file says everything)."""
    text = toml_text(body.spec.model_dump(mode="json"))
    return Response(text.encode("utf-8"), media_type="application/toml; charset=utf-8")


@router.post("/design.toml")
def design_toml(body: SavedDesign) -> Response:
    """A candidate's ``design_file`` as a DESIGN file in TOML (``tristock design --save``)."""
    text = toml_text(design_document(body))
    return Response(text.encode("utf-8"), media_type="application/toml; charset=utf-8")


@router.post("/design.json")
def design_json(body: DesignText) -> dict[str, Any]:
    """A pasted DESIGN file (TOML, or JSON when it starts with ``{``) as the JSON the API's
    design bodies take; a file that does not parse or validate is a 422 at ``body.text``."""
    stripped = body.text.lstrip()
    try:
        data = json.loads(stripped) if stripped.startswith("{") else tomllib.loads(stripped)
    except (json.JSONDecodeError, tomllib.TOMLDecodeError) as err:
        raise FieldProblem([(["body", "text"], f"not TOML or JSON: {err}")], "bad_file") from None
    with FieldProblem.from_value_errors(["body", "text"]):
        saved = SavedDesign.model_validate(data)
    return saved.model_dump(mode="json")
