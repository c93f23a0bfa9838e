"""``/v1/catalog/{kind}``: list (filters, paging), one part, and stock updates.

Items are the ``tristock.stock.parts`` rows as parsed: the table's columns, values in SI units. An
item's ``ETag`` is its ``tristock.stock.catalog.part_version`` (strong: it changes with any field).
Stock writes go through ``tristock.stock.catalog.update_stock`` (lock, quiet wait, validation of the
catalog as it is on disk, a check that nothing changed before the rename, idempotency keys);
this module only maps its outcomes to HTTP statuses.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
from typing import Annotated, Any, Final

from fastapi import APIRouter, Depends, Header, HTTPException, Query, Request, Response

from tristock.stock.catalog import (
    ALTERNATIVE_COLUMNS,
    Catalog,
    CatalogBusy,
    CatalogError,
    CatalogWriteError,
    KeyReused,
    PreconditionFailed,
    RequestKey,
    StockError,
    StockWrite,
    UnknownPart,
    part_version,
    update_stock,
)
from tristock.stock.parts import Capacitor, Part, Pot, PotKind, Resistor

from ..deps import SettingsDep, StoreDep, require_writer
from ..errors import FieldProblem
from ..jsonout import StrictJSON, answer
from ..schemas import ErrorBody, Item, Kind, Page, StockPatch, ValidationBody
from ..settings import MAX_PAGE, MAX_STOCK
from ..store import CatalogStore
from .registry import affected_designs

router = APIRouter(prefix="/v1/catalog", tags=["catalog"])

#: Headers of item answers, as OpenAPI declares them.
_ETAG_HEADER: Final[dict[str, Any]] = {
    "description": "strong version tag of the part (changes with any of its fields)",
    "schema": {"type": "string"},
}
_STALE_HEADER: Final[dict[str, Any]] = {
    "description": "`stale` while the table files do not load and the last good catalog is "
    "served (see /health)",
    "schema": {"type": "string", "enum": ["stale"]},
}
_RETRY_HEADER: Final[dict[str, Any]] = {
    "description": "seconds to wait before retrying",
    "schema": {"type": "integer"},
}
_ITEM_HEADERS: Final[dict[str, Any]] = {"ETag": _ETAG_HEADER, "X-Catalog": _STALE_HEADER}
_AFFECTED_HEADER: Final[dict[str, Any]] = {
    "description": "stock writes: the released designs (comma-separated names) whose planned "
    "builds this part's stock no longer covers together; empty when it covers them all, "
    "absent when the registry cannot be reached",
    "schema": {"type": "string"},
}

_READ_ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"model": ErrorBody, "description": "no part with this id in this table"},
    422: {"model": ValidationBody, "description": "invalid parameter; each item names it"},
    500: {"model": ErrorBody, "description": "internal error (no details are given)"},
    503: {"model": ErrorBody, "description": "no catalog has loaded"},
}
_WRITE_ERRORS: dict[int | str, dict[str, Any]] = {
    **_READ_ERRORS,
    400: {"model": ErrorBody, "description": "malformed request"},
    401: {"model": ErrorBody, "description": "a token is configured and none was given"},
    403: {"model": ErrorBody, "description": "wrong token, or writes are disabled"},
    409: {
        "model": ErrorBody,
        "description": "refused, nothing written: the stock would leave 0..1e9, or the catalog "
        "on disk does not validate (the detail names each file:line)",
    },
    412: {
        "model": ErrorBody,
        "description": "If-Match names none of the part's current version",
        "headers": {"ETag": _ETAG_HEADER},
    },
    413: {"model": ErrorBody, "description": "request body too large"},
    503: {
        "model": ErrorBody,
        "description": "no catalog has loaded; another program keeps writing the tables; or "
        "the write failed (read-only folder, disk full). The tables are unchanged.",
        "headers": {"Retry-After": _RETRY_HEADER},
    },
}


def _table(catalog: Catalog, kind: Kind) -> tuple[Part, ...]:
    tables: dict[str, tuple[Part, ...]] = {
        "resistors": catalog.resistors,
        "capacitors": catalog.capacitors,
        "opamps": catalog.opamps,
        "pots": catalog.pots,
        "comparators": catalog.comparators,
        "diodes": catalog.diodes,
    }
    return tables[kind]


def item(part: Part) -> dict[str, Any]:
    """A part as the API shows it: its fields (the table's columns) with parsed values; an
    alternative column the row did not use (opamps' delay_to_mid_s) is left out."""
    return {
        name: value
        for name, value in dataclasses.asdict(part).items()
        if value is not None or name not in _ALTERNATIVES
    }


_ALTERNATIVES = frozenset(name for alts in ALTERNATIVE_COLUMNS.values() for name in alts)


def _only_for(kinds: tuple[str, ...], kind: str, name: str, given: object) -> None:
    if given is not None and kind not in kinds:
        raise FieldProblem(
            [(["query", name], f"applies to {' and '.join(kinds)} only, not {kind}")],
            "not_applicable",
        )


def _value(part: Part) -> float:
    assert isinstance(part, Resistor | Capacitor | Pot)
    return float(part.value)


@router.get(
    "/{kind}",
    response_model=Page,
    responses={200: {"headers": {"X-Catalog": _STALE_HEADER}}, **_READ_ERRORS},
    summary="Parts of one table, filtered and paged (table order)",
)
def list_parts(
    kind: Kind,
    store: StoreDep,
    settings: SettingsDep,
    min_value: Annotated[float | None, Query(gt=0, description="value ≥ this (Ω or F)")] = None,
    max_value: Annotated[float | None, Query(gt=0, description="value ≤ this (Ω or F)")] = None,
    series: Annotated[str | None, Query(max_length=8, description="resistors: E24…")] = None,
    dielectric: Annotated[str | None, Query(max_length=16, description="capacitors")] = None,
    pot_kind: Annotated[PotKind | None, Query(description="pots: trimmer or panel")] = None,
    in_stock: Annotated[bool | None, Query(description="true: stock > 0; false: 0")] = None,
    min_stock: Annotated[int | None, Query(ge=0, le=MAX_STOCK)] = None,
    offset: Annotated[int, Query(ge=0, le=10_000_000)] = 0,
    limit: Annotated[int, Query(ge=1, le=MAX_PAGE)] = 100,
) -> StrictJSON:
    valued = ("resistors", "capacitors", "pots")
    _only_for(valued, kind, "min_value", min_value)
    _only_for(valued, kind, "max_value", max_value)
    _only_for(("resistors",), kind, "series", series)
    _only_for(("capacitors",), kind, "dielectric", dielectric)
    _only_for(("pots",), kind, "pot_kind", pot_kind)
    if limit > settings.max_page:
        raise FieldProblem([(["query", "limit"], f"at most {settings.max_page}")], "too_large")
    catalog = store.current()
    parts: list[Part] = list(_table(catalog, kind))
    if min_value is not None:
        parts = [p for p in parts if _value(p) >= min_value]
    if max_value is not None:
        parts = [p for p in parts if _value(p) <= max_value]
    if series is not None:
        wanted = series.strip().upper()
        parts = [p for p in parts if isinstance(p, Resistor) and (p.series or "") == wanted]
    if dielectric is not None:
        wanted = dielectric.strip().upper()
        parts = [p for p in parts if isinstance(p, Capacitor) and p.dielectric == wanted]
    if pot_kind is not None:
        parts = [p for p in parts if isinstance(p, Pot) and p.kind == pot_kind]
    if in_stock is not None:
        parts = [p for p in parts if (p.stock > 0) == in_stock]
    if min_stock is not None:
        parts = [p for p in parts if p.stock >= min_stock]
    page = parts[offset : offset + limit]
    return answer(
        {"items": [item(p) for p in page], "total": len(parts), "offset": offset, "limit": limit},
        headers=_stale_header(store),
    )


def _stale_header(store: CatalogStore) -> dict[str, str]:
    return {"X-Catalog": "stale"} if store.stale else {}


def _etag(version: str) -> str:
    return f'"{version}"'


def _tags(header: str) -> list[str]:
    """The entity tags of an If-Match / If-None-Match header, ``W/`` kept, quotes kept."""
    return [t.strip() for t in header.split(",") if t.strip()]


def _find(catalog: Catalog, kind: Kind, part_id: str) -> Part:
    if part_id not in catalog or catalog.kind_of(part_id) != kind:
        raise HTTPException(status_code=404, detail=f"no part with id {part_id!r} in {kind}")
    return catalog.get(part_id)


@router.get(
    "/{kind}/{part_id}",
    response_model=Item,
    responses={
        200: {"headers": _ITEM_HEADERS},
        304: {"description": "If-None-Match holds the current ETag", "headers": _ITEM_HEADERS},
        **_READ_ERRORS,
    },
    summary="One part by its stock code",
)
def get_part(
    kind: Kind,
    part_id: str,
    store: StoreDep,
    if_none_match: Annotated[
        str | None, Header(description="ETags held: 304 if one is current (weak comparison)")
    ] = None,
) -> Response:
    part = _find(store.current(), kind, part_id)
    etag = _etag(part_version(part))
    headers = {"ETag": etag, **_stale_header(store)}
    if if_none_match is not None:
        held = {t.removeprefix("W/") for t in _tags(if_none_match)}
        if "*" in held or etag in held:
            return Response(status_code=304, headers=headers)
    return answer(item(part), headers=headers)


#: Idempotency keys: 1 to 255 visible ASCII characters, optionally in double quotes.
KEY_MAX_LENGTH: Final[int] = 255
#: Where a 422 about the key points (the validation shape of every other 422).
_KEY_LOC: Final[tuple[str, str]] = ("header", "idempotency-key")


def _request_key(
    header: str | None, kind: str, part_id: str, body: StockPatch
) -> RequestKey | None:
    if header is None:
        return None
    key = header.strip()
    if len(key) >= 2 and key[0] == key[-1] == '"':
        key = key[1:-1]
    if not 1 <= len(key) <= KEY_MAX_LENGTH or not all("!" <= ch <= "~" for ch in key):
        raise FieldProblem(
            [(_KEY_LOC, f"1 to {KEY_MAX_LENGTH} visible ASCII characters expected")], "value_error"
        )
    request = {"kind": kind, "id": part_id, "body": body.model_dump(exclude_none=True)}
    text = json.dumps(request, sort_keys=True, separators=(",", ":"))
    return RequestKey(key, hashlib.sha256(text.encode("utf-8")).hexdigest())


def _expected_versions(if_match: str | None) -> list[str] | None:
    """The versions If-Match accepts (strong comparison: weak tags match nothing); None for
    no header or ``*`` (the part exists, or the write answers 404)."""
    if if_match is None:
        return None
    tags = _tags(if_match)
    if "*" in tags:
        return None
    return [t[1:-1] for t in tags if len(t) >= 2 and t[0] == t[-1] == '"']


def _write(
    store: CatalogStore,
    kind: Kind,
    part_id: str,
    body: StockPatch,
    expect_versions: list[str] | None,
    request_key: RequestKey | None,
) -> StockWrite:
    """``update_stock`` with its refusals as HTTP errors (the tables are unchanged in each)."""
    try:
        return update_stock(
            store.directory,
            part_id,
            stock=body.stock,
            delta=body.stock_delta,
            kind=kind,
            expect_versions=expect_versions,
            request_key=request_key,
            policy=store.write_policy,
        )
    except PreconditionFailed as err:
        etag = _etag(err.current_version)
        raise HTTPException(status_code=412, detail=str(err), headers={"ETag": etag}) from None
    except KeyReused as err:
        raise FieldProblem([(_KEY_LOC, str(err))], "key_reused") from None
    except UnknownPart as err:
        raise HTTPException(status_code=404, detail=str(err)) from None
    except StockError as err:
        raise HTTPException(status_code=409, detail=str(err)) from None
    except CatalogBusy as err:
        retry = str(max(1, math.ceil(err.retry_after_s)))
        detail = f"{err.errors[0]}; nothing was written"
        raise HTTPException(
            status_code=503, detail=detail, headers={"Retry-After": retry}
        ) from None
    except CatalogWriteError as err:
        raise HTTPException(status_code=503, detail=str(err.errors[0])) from None
    except CatalogError as err:
        lines = [str(issue) for issue in err.errors]
        shown = "; ".join(lines[:20]) + (
            f"; ... ({len(lines) - 20} more)" if len(lines) > 20 else ""
        )
        detail = f"the catalog on disk does not validate, so nothing was written: {shown}"
        raise HTTPException(status_code=409, detail=detail) from None


@router.patch(
    "/{kind}/{part_id}",
    response_model=Item,
    responses={
        200: {"headers": {**_ITEM_HEADERS, "X-Affected-Designs": _AFFECTED_HEADER}},
        **_WRITE_ERRORS,
    },
    summary="Set (`stock`) or adjust (`stock_delta`) the pieces on hand of one part",
    description="Atomic on disk and serialised; waits (up to 5 s) until no other program is "
    "writing the tables, validates the whole catalog as it is on disk and refuses (409) to "
    "write over one that does not validate. `If-Match` makes the write conditional (412); an "
    "`Idempotency-Key` repeated within 24 h returns the first answer and changes nothing. "
    "Needs `Authorization: Bearer TOKEN` when the server has a token; refused when it has "
    "none unless started with open writes allowed. The stock stays within 0..1e9 (409).",
    dependencies=[Depends(require_writer)],
)
def patch_part(
    request: Request,
    kind: Kind,
    part_id: str,
    body: StockPatch,
    store: StoreDep,
    if_match: Annotated[
        str | None, Header(description="write only if the part's ETag is one of these")
    ] = None,
    idempotency_key: Annotated[
        str | None,
        Header(description="a repeat within 24 h returns the first answer, changing nothing"),
    ] = None,
) -> StrictJSON:
    key = _request_key(idempotency_key, kind, part_id, body)
    write = _write(store, kind, part_id, body, _expected_versions(if_match), key)
    headers = {"ETag": _etag(write.version)}
    if write.replayed:
        headers["Idempotent-Replayed"] = "true"
        headers.update(_stale_header(store))
    else:
        store.adopt(write)
    affected = affected_designs(request, store.current(), part_id)
    if affected is not None:
        headers["X-Affected-Designs"] = ", ".join(affected)
    return answer(item(write.part), headers=headers)
