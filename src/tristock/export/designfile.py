"""DESIGN files: a spec and the chosen part of each designator, as TOML or JSON.

    {"spec": {...}, "parts": {"U1": "GA-JF2", "R1": "R1F-10K7", ...}}

A part may also be an object with an ``id`` field, so a candidate copied from
``tristock design --json`` works as it is. Trimmed and tuned designs add ``RV1`` (and ``R4``,
the divider's end stop) and range capacitors ``C2``..``C8`` to ``parts``, and at the top level
``wiper`` (0..1, default 0) and ``range`` (the capacitor in use, default "C1").
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from tristock.circuits.board import Design, part_ids, resolve
from tristock.spec.loading import SpecError, parse_spec, read_mapping
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


def design_for(
    spec: Spec, parts: Any, catalog: Catalog, *, wiper: Any = 0.0, selected: Any = "C1"
) -> Design:
    """The Design of ``parts`` (designator -> stock code) for ``spec``, with the pot's
    ``wiper`` (0..1) and the ``selected`` range capacitor ("C1".."C8"); errors name the field."""
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


def parse_design(data: dict[str, Any], catalog: Catalog) -> tuple[Spec, Design]:
    """Spec and Design from a mapping with ``spec``, ``parts`` and optionally ``wiper`` and
    ``range``."""
    unknown = [k for k in data if k not in ("spec", "parts", "wiper", "range")]
    if unknown:
        raise SpecError([f"{k}: unknown key (expected spec, parts, wiper, range)" for k in unknown])
    if "spec" not in data:
        raise SpecError(["spec: missing"])
    spec = parse_spec(data["spec"])
    design = design_for(
        spec,
        data.get("parts"),
        catalog,
        wiper=data.get("wiper", 0.0),
        selected=data.get("range", "C1"),
    )
    return spec, design


def load_design(path: Path, catalog: Catalog) -> tuple[Spec, Design]:
    return parse_design(read_mapping(path), catalog)
