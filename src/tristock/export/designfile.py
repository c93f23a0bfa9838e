"""DESIGN files: a spec and the chosen part of each designator, as TOML or JSON.

    {"spec": {...}, "parts": {"U1": "GA-JF2", "R1": "R1F-10K7", ...}}

A part may also be an object with an ``id`` field, so a candidate copied from
``tristock design --json`` works as it is. Trimmed and tuned designs add ``RV1`` (and ``R4``,
the divider's end stop) and range capacitors ``C2``..``C8`` to ``parts``, and at the top level
``wiper`` (0..1, default 0) and ``range`` (the capacitor in use, default "C1"). A board of
another circuit names it in ``topology`` (``tristock.circuits.TOPOLOGIES``; default the spec's
``[circuit]``, else the op-amp Schmitt loop) and its parts by that circuit's designators.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import (
    DESIGNATORS,
    OPTIONAL,
    AnyBoard,
    part_ids,
    resolve,
    resolve_board,
)
from tristock.spec.loading import SpecError, parse_spec, read_mapping
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def design_for(
    spec: Spec,
    parts: Any,
    catalog: Catalog,
    *,
    wiper: Any = 0.0,
    selected: Any = "C1",
    topology: Any = None,
) -> AnyBoard:
    """The board of ``parts`` (designator -> stock code) for ``spec``, with the pot's
    ``wiper`` (0..1) and the ``selected`` range capacitor ("C1".."C8"), of ``topology`` (a
    name; None: the spec's ``[circuit]``); errors name the field."""
    name = topology
    if name is None:
        name = spec.circuit.topology_name if spec.circuit.topology != "any" else None
    if name is not None and name not in TOPOLOGIES:
        known = ", ".join(TOPOLOGIES)
        raise SpecError([f"topology: {name!r} is not a circuit tristock knows ({known})"])
    if name not in (None, "opamp_schmitt") and (spec.tuning is not None or spec.trimmed):
        raise SpecError([f"topology: {name} boards are neither trimmed nor tuned"])
    if name is not None and name not in ("opamp_schmitt", "comparator_schmitt"):
        return resolve_board(TOPOLOGIES[name], part_ids_of(parts), catalog)
    if isinstance(wiper, bool) or not isinstance(wiper, int | float) or not 0 <= wiper <= 1:
        raise SpecError([f"wiper: expected a number in [0, 1], got {wiper!r}"])
    if not (isinstance(selected, str) and selected[:1] == "C" and selected[1:].isdigit()):
        raise SpecError([f"range: expected a capacitor designator like 'C2', got {selected!r}"])
    control = spec.tuning.control if spec.tuning is not None else "series"
    return resolve(
        part_ids(parts),
        catalog,
        wiper=float(wiper),
        control=control,
        selected=int(selected[1:]) - 1,
    )


def parse_design(data: dict[str, Any], catalog: Catalog) -> tuple[Spec, AnyBoard]:
    """Spec and Design from a mapping with ``spec``, ``parts`` and optionally ``wiper`` and
    ``range``."""
    keys = ("spec", "parts", "wiper", "range", "topology")
    unknown = [k for k in data if k not in keys]
    if unknown:
        raise SpecError([f"{k}: unknown key (expected {', '.join(keys)})" for k in unknown])
    if "spec" not in data:
        raise SpecError(["spec: missing"])
    spec = parse_spec(data["spec"])
    design = design_for(
        spec,
        data.get("parts"),
        catalog,
        wiper=data.get("wiper", 0.0),
        selected=data.get("range", "C1"),
        topology=data.get("topology"),
    )
    return spec, design


def design_ids(spec: Spec, parts: Any, topology: Any = None) -> tuple[dict[str, str], str | None]:
    """A DESIGN file's ``parts`` as designator -> stock code, and its ``topology`` (a name, or
    None: the spec's ``[circuit]``), for a job that takes stock codes (``reoptimise``): the
    op-amp Schmitt and comparator loops' designators are checked by name (``part_ids``); any
    other circuit's, and designators beyond those under ``topology = "any"``, are taken as
    given (the job checks them against the circuit). Errors name the field."""
    if topology is not None and (not isinstance(topology, str) or topology not in TOPOLOGIES):
        known = ", ".join(TOPOLOGIES)
        raise SpecError([f"topology: {topology!r} is not a circuit tristock knows ({known})"])
    name = topology
    if name is None and spec.circuit.topology != "any":
        name = spec.circuit.topology_name
    named = set(DESIGNATORS) | set(OPTIONAL)
    beyond = isinstance(parts, dict) and not set(parts) <= named
    if name in ("opamp_schmitt", "comparator_schmitt") or (name is None and not beyond):
        return part_ids(parts), topology
    return part_ids_of(parts), topology


def part_ids_of(parts: Any) -> dict[str, str]:
    """Designator -> stock code of a board of any circuit (a code, or an object with an
    ``id``); errors name the field."""
    if not isinstance(parts, dict):
        raise SpecError(["parts: expected a table of designator = stock code"])
    out: dict[str, str] = {}
    errors: list[str] = []
    for name, item in parts.items():
        code = item.get("id") if isinstance(item, dict) else item
        if not isinstance(code, str) or not code:
            errors.append(f"parts.{name}: expected a stock code, or an object with an id")
        else:
            out[name] = code
    if errors:
        raise SpecError(errors)
    return out


def load_design(path: Path, catalog: Catalog) -> tuple[Spec, AnyBoard]:
    return parse_design(read_mapping(path), catalog)
