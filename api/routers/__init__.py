"""The API's routers; each only turns a request into one library call and its answer."""

from __future__ import annotations

from typing import Any

from ..schemas import ErrorBody, ValidationBody

#: Error answers every compute endpoint may give, for the OpenAPI schema.
COMPUTE_ERRORS: dict[int | str, dict[str, Any]] = {
    400: {"model": ErrorBody, "description": "malformed request"},
    413: {"model": ErrorBody, "description": "request body too large"},
    422: {"model": ValidationBody, "description": "invalid request; each item names the field"},
    500: {"model": ErrorBody, "description": "internal error (no details are given)"},
    503: {
        "model": ErrorBody,
        "description": "`busy`: every compute slot stayed taken (retry after `Retry-After` s); "
        "`catalog-unavailable`: no catalog has loaded",
    },
}
