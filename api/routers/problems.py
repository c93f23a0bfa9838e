"""``GET /problems/{name}``: what each problem ``type`` of this API means (RFC 9457 asks that
a type URI lead to its documentation)."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, HTTPException
from pydantic import BaseModel

from ..errors import PROBLEM_TYPES
from ..jsonout import StrictJSON, answer
from ..schemas import ErrorBody, ValidationBody

router = APIRouter(tags=["service"])

ProblemName = Literal["invalid-request", "busy", "catalog-unavailable"]


class ProblemTypeDoc(BaseModel):
    type: str
    title: str
    status: int
    description: str


@router.get(
    "/problems/{name}",
    operation_id="problem_type",
    response_model=ProblemTypeDoc,
    responses={
        404: {"model": ErrorBody, "description": "no such problem type"},
        422: {"model": ValidationBody, "description": "not a problem type of this API"},
    },
    summary="What a problem type means and what to do about it",
)
async def problem_type(name: ProblemName) -> StrictJSON:
    known = PROBLEM_TYPES.get(name)
    if known is None:  # the Literal and PROBLEM_TYPES are kept equal by a test
        raise HTTPException(404, f"no problem type {name!r}")
    return answer(
        {
            "type": known.uri,
            "title": known.title,
            "status": known.status,
            "description": known.description,
        }
    )
