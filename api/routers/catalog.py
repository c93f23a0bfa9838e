"""``/v1/catalog/{kind}``: list (filters, paging), one part, and stock updates.

Items are the ``tristock.parts`` rows as parsed: the table's columns, values in SI units.
Stock writes go through ``tristock.catalog.set_stock``/``adjust_stock`` (file lock, atomic
replace), one at a time in this process as well.
"""

from __future__ import annotations

import dataclasses
import threading
from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Query, Request

from api.deps import CatalogDep, SettingsDep, StoreDep, require_writer
from api.errors import FieldProblem
from api.jsonout import StrictJSON, answer
from api.schemas import ErrorBody, Item, Kind, Page, StockPatch, ValidationBody
from api.settings import MAX_PAGE, MAX_STOCK
from tristock.catalog import ALTERNATIVE_COLUMNS, Catalog, StockError, adjust_stock, set_stock
from tristock.parts import Capacitor, Part, Pot, PotKind, Resistor

router = APIRouter(prefix="/v1/catalog", tags=["catalog"])

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
    409: {"model": ErrorBody, "description": "refused: the stock would go below zero"},
    413: {"model": ErrorBody, "description": "request body too large"},
}

_write_lock = threading.Lock()


def _table(catalog: Catalog, kind: Kind) -> tuple[Part, ...]:
    tables: dict[str, tuple[Part, ...]] = {
        "resistors": catalog.resistors,
        "capacitors": catalog.capacitors,
        "opamps": catalog.opamps,
        "pots": catalog.pots,
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
    return part.value


@router.get(
    "/{kind}",
    response_model=Page,
    responses=_READ_ERRORS,
    summary="Parts of one table, filtered and paged (table order)",
)
def list_parts(
    kind: Kind,
    catalog: CatalogDep,
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
        {"items": [item(p) for p in page], "total": len(parts), "offset": offset, "limit": limit}
    )


def _find(catalog: Catalog, kind: Kind, part_id: str) -> Part:
    if part_id not in catalog or catalog.kind_of(part_id) != kind:
        raise HTTPException(status_code=404, detail=f"no part with id {part_id!r} in {kind}")
    return catalog.get(part_id)


@router.get(
    "/{kind}/{part_id}",
    response_model=Item,
    responses=_READ_ERRORS,
    summary="One part by its stock code",
)
def get_part(kind: Kind, part_id: str, catalog: CatalogDep) -> StrictJSON:
    return answer(item(_find(catalog, kind, part_id)))


@router.patch(
    "/{kind}/{part_id}",
    response_model=Item,
    responses=_WRITE_ERRORS,
    summary="Set (`stock`) or adjust (`stock_delta`) the pieces on hand of one part",
    description="Atomic on disk and serialised. Needs `Authorization: Bearer TOKEN` when the "
    "server has a token; refused when it has none unless started with open writes allowed. "
    "A delta that would take the stock below zero is refused with 409 and changes nothing.",
    dependencies=[Depends(require_writer)],
)
def patch_part(
    kind: Kind, part_id: str, body: StockPatch, request: Request, store: StoreDep
) -> StrictJSON:
    # A write needs only the part's table and columns, not a fresh catalog: re-reading the
    # tables after every write (this server's own included) would cost a full load per write.
    loaded = store.peek()
    if loaded is None or part_id not in loaded:
        loaded = store.current()
    part = _find(loaded, kind, part_id)
    try:
        with _write_lock:
            if body.stock is not None:
                set_stock(store.directory, part_id, body.stock)
                new = body.stock
            else:
                assert body.stock_delta is not None
                new = adjust_stock(store.directory, part_id, body.stock_delta)
    except StockError as err:
        raise HTTPException(status_code=409, detail=str(err)) from None
    return answer(item(dataclasses.replace(part, stock=new)))
