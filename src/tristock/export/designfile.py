"""DESIGN files: a spec and the chosen part of each designator, as TOML or JSON.

    {"spec": {...}, "parts": {"U1": "UA-JF2", "R1": "R1F-10K7", ...}}

A part may also be an object with an ``id`` field, so a candidate copied from
``tristock design --json`` works as it is. Trimmed and tuned designs add ``RV1`` (and ``R4``,
the divider's end stop) and range capacitors ``C2``..``C8`` to ``parts``, and at the top level
``wiper`` (0..1, default 0) and ``range`` (the capacitor in use, default "C1").
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from tristock.circuits.board import DESIGNATORS, Design
from tristock.spec.model import Spec, SpecError, parse_spec, read_mapping
from tristock.stock.catalog import Catalog
from tristock.stock.parts import Capacitor, OpAmp, Pot, Resistor

_RANGE_CAPS = tuple(f"C{n}" for n in range(2, 9))
OPTIONAL = ("R4", "RV1", *_RANGE_CAPS)
_KINDS: dict[str, type] = {
    "U1": OpAmp,
    "R1": Resistor,
    "R2": Resistor,
    "R3": Resistor,
    "C1": Capacitor,
    "R4": Resistor,
    "RV1": Pot,
    **{c: Capacitor for c in _RANGE_CAPS},
}


def part_ids(parts: Any) -> dict[str, str]:
    """Designator -> stock code from a ``parts`` mapping; errors name the field."""
    if not isinstance(parts, dict):
        raise SpecError(["parts: expected a table of designator = stock code"])
    errors: list[str] = []
    out: dict[str, str] = {}
    for name in (*DESIGNATORS, *OPTIONAL):
        item = parts.get(name)
        if item is None and name in OPTIONAL:
            continue
        if isinstance(item, dict):
            item = item.get("id")
        if not isinstance(item, str) or not item:
            errors.append(f"parts.{name}: missing (a stock code, or an object with an id)")
        else:
            out[name] = item
    errors += [f"parts.{k}: unknown designator" for k in parts if k not in _KINDS]
    caps = [c for c in _RANGE_CAPS if c in out]
    if caps and caps != list(_RANGE_CAPS[: len(caps)]):
        errors.append("parts: range capacitors must be numbered C2, C3, ... without gaps")
    if errors:
        raise SpecError(errors)
    return out


def resolve(
    ids: dict[str, str],
    catalog: Catalog,
    *,
    wiper: float = 0.0,
    control: str = "series",
    selected: int = 0,
) -> Design:
    """The Design for these stock codes; unknown or wrong-kind ids raise SpecError."""
    errors: list[str] = []
    found: dict[str, Any] = {}
    for name, pid in ids.items():
        try:
            part = catalog.get(pid)
        except KeyError:
            errors.append(f"parts.{name}: {pid!r} is not in the catalog {catalog.path}")
            continue
        if not isinstance(part, _KINDS[name]):
            errors.append(
                f"parts.{name}: {pid!r} is a {type(part).__name__}, not a {_KINDS[name].__name__}"
            )
            continue
        found[name.lower()] = part
    if errors:
        raise SpecError(errors)
    range_caps = tuple(found.pop(c.lower()) for c in _RANGE_CAPS if c.lower() in found)
    try:
        return Design(
            **found,
            range_caps=range_caps,
            wiper=wiper,
            control=control,  # type: ignore[arg-type]
            selected=selected,
        )
    except ValueError as err:
        raise SpecError([str(err)]) from None


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
