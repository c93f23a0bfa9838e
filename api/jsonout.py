"""JSON answers: the library's dicts as they are, with non-finite floats (which JSON cannot
carry) written as null."""

from __future__ import annotations

import json
import math
from typing import Any

from fastapi.responses import JSONResponse, Response


def _finite(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def to_json_bytes(content: Any) -> bytes:
    """Compact UTF-8 JSON; NaN and ±inf become null instead of invalid JSON or an error."""
    try:
        text = json.dumps(content, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    except ValueError:
        text = json.dumps(_finite(content), ensure_ascii=False, separators=(",", ":"))
    return text.encode("utf-8")


class StrictJSON(JSONResponse):
    """Compact UTF-8 JSON; NaN and ±inf become null instead of invalid JSON or an error."""

    def render(self, content: Any) -> bytes:
        return to_json_bytes(content)


class RenderedJSON(Response):
    """JSON already rendered by :func:`to_json_bytes` (in a compute thread, so a large
    answer is not serialised on the event loop)."""

    media_type = "application/json"


def answer(
    content: Any, status_code: int = 200, headers: dict[str, str] | None = None
) -> StrictJSON:
    return StrictJSON(content=content, status_code=status_code, headers=headers)
