"""Writing DESIGN files: a candidate's ``design_file`` as TOML (``.toml``) or JSON (``.json``),
atomically, in the form ``designfile.load_design`` reads back.

TOML has no null: fields that are None (an unset spec option) are left out, which the spec
reads as the same default. Only the shapes a DESIGN file holds are written: tables of
strings, numbers, booleans and arrays of them.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from tristock.designs.results import SavedDesign
from tristock.stock.atomicio import write_atomic

#: File suffixes a DESIGN file may be written with (lower case) and their formats.
DESIGN_SUFFIXES = {".toml": "TOML", ".json": "JSON"}


def design_document(saved: SavedDesign) -> dict[str, Any]:
    """The DESIGN file's mapping: ``spec``, ``parts``, ``wiper``, ``range``."""
    return saved.model_dump(mode="json")


def _toml_scalar(value: Any, where: str) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)  # a JSON string is a TOML basic string
    if isinstance(value, list):
        return "[" + ", ".join(_toml_scalar(v, where) for v in value if v is not None) + "]"
    raise TypeError(f"{where}: cannot write a {type(value).__name__} to TOML")


def _key(name: str) -> str:
    """A bare TOML key when ``name`` allows one, else a quoted one."""
    bare = name and all(ch.isascii() and (ch.isalnum() or ch in "_-") for ch in name)
    return name if bare else json.dumps(name, ensure_ascii=False)


def toml_text(data: dict[str, Any]) -> str:
    """``data`` (nested tables of scalars and arrays) as TOML; None values are left out."""
    lines: list[str] = []

    def table(name: str, mapping: dict[str, Any]) -> None:
        scalars = [(k, v) for k, v in mapping.items() if v is not None and not isinstance(v, dict)]
        tables = [(k, v) for k, v in mapping.items() if isinstance(v, dict)]
        if name and (scalars or not tables):
            lines.append(f"\n[{name}]")
        for k, v in scalars:
            lines.append(f"{_key(k)} = {_toml_scalar(v, f'{name}.{k}'.lstrip('.'))}")
        for k, v in tables:
            table(f"{name}.{_key(k)}" if name else _key(k), v)

    table("", data)
    return "\n".join(lines).lstrip("\n") + "\n"


def design_text(saved: SavedDesign, suffix: str) -> str:
    """The DESIGN file's text for a file name ending in ``suffix`` (.toml or .json)."""
    doc = design_document(saved)
    if DESIGN_SUFFIXES.get(suffix.lower()) == "TOML":
        return toml_text(doc)
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def write_design(path: Path, saved: SavedDesign) -> None:
    """Write ``saved`` to ``path`` (TOML or JSON by its suffix), replacing it atomically."""
    write_atomic(path, design_text(saved, path.suffix).encode("utf-8"))
