"""DESIGN files: a spec and the chosen part of each designator, as TOML or JSON.

    {"spec": {...}, "parts": {"U1": "UA-JF2", "R1": "R1F-10K7", ...}}

A part may also be an object with an ``id`` field, so a candidate copied from
``tristock design --json`` works as it is.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from tristock.catalog import Catalog
from tristock.design import DESIGNATORS, Design
from tristock.parts import Capacitor, OpAmp, Resistor
from tristock.spec import Spec, SpecError, parse_spec, read_mapping

_KINDS = {"U1": OpAmp, "R1": Resistor, "R2": Resistor, "R3": Resistor, "C1": Capacitor}


def part_ids(parts: Any) -> dict[str, str]:
    """Designator -> stock code from a ``parts`` mapping; errors name the field."""
    if not isinstance(parts, dict):
        raise SpecError(["parts: expected a table of designator = stock code"])
    errors: list[str] = []
    out: dict[str, str] = {}
    for name in DESIGNATORS:
        item = parts.get(name)
        if isinstance(item, dict):
            item = item.get("id")
        if not isinstance(item, str) or not item:
            errors.append(f"parts.{name}: missing (a stock code, or an object with an id)")
        else:
            out[name] = item
    errors += [f"parts.{k}: unknown designator" for k in parts if k not in DESIGNATORS]
    if errors:
        raise SpecError(errors)
    return out


def resolve(ids: dict[str, str], catalog: Catalog) -> Design:
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
    return Design(**found)


def parse_design(data: dict[str, Any], catalog: Catalog) -> tuple[Spec, Design]:
    """Spec and Design from a mapping with ``spec`` and ``parts``."""
    unknown = [k for k in data if k not in ("spec", "parts")]
    if unknown:
        raise SpecError([f"{k}: unknown key (expected spec and parts)" for k in unknown])
    if "spec" not in data:
        raise SpecError(["spec: missing"])
    spec = parse_spec(data["spec"])
    return spec, resolve(part_ids(data.get("parts")), catalog)


def load_design(path: Path, catalog: Catalog) -> tuple[Spec, Design]:
    return parse_design(read_mapping(path), catalog)
