"""Reading a spec: from a mapping (``parse_spec``), a TOML or JSON file (``read_mapping``,
``load_spec``); every problem is a ``SpecError`` naming the field path or the file."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from tristock.spec import limits
from tristock.spec.model import Spec


class SpecError(ValueError):
    """A spec that cannot be used: each line names the field path and the reason."""

    def __init__(self, lines: list[str]):
        self.lines = lines
        super().__init__("; ".join(lines))


def _describe(err: ValidationError) -> list[str]:
    lines = []
    for e in err.errors():
        # union members add their type ("function-before[...]") to the path: not a field
        path = ".".join(str(p) for p in e["loc"] if "[" not in str(p)) or "spec"
        msg = e["msg"].removeprefix("Value error, ")
        if e["type"] == "extra_forbidden":
            msg = "unknown key (check the spelling)"
        lines.append(f"{path}: {msg}")
    return lines


def parse_spec(data: dict[str, Any]) -> Spec:
    """Validate a spec given as a mapping; raise SpecError naming every bad field."""
    try:
        return Spec.model_validate(data)
    except ValidationError as err:
        raise SpecError(_describe(err)) from None


def read_mapping(path: Path) -> dict[str, Any]:
    """Read a TOML (``.toml``) or JSON (anything else) file into a mapping.

    Every way a file can be unusable is a SpecError naming it: missing or unreadable (the
    OSError's reason), larger than ``limits.SPEC_FILE_MAX_BYTES``, not UTF-8, not valid TOML or
    JSON, nested too deeply to parse, or not a table at the top level.
    """
    path = Path(path)
    try:
        with path.open("rb") as stream:
            raw = stream.read(limits.SPEC_FILE_MAX_BYTES + 1)
    except OSError as err:
        raise SpecError([f"{path}: {err.strerror or err}"]) from None
    if len(raw) > limits.SPEC_FILE_MAX_BYTES:
        raise SpecError([f"{path}: larger than {limits.SPEC_FILE_MAX_BYTES} bytes; not a spec"])
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        raise SpecError([f"{path}: not UTF-8 text (byte {err.start})"]) from None
    kind = "TOML" if path.suffix.lower() == ".toml" else "JSON"
    try:
        data: Any = tomllib.loads(text) if kind == "TOML" else json.loads(text)
    except RecursionError:
        raise SpecError([f"{path}: not valid {kind}: nested too deeply"]) from None
    except ValueError as err:  # the decoders' errors, and integers of over 4300 digits
        raise SpecError([f"{path}: not valid {kind}: {err}"]) from None
    if not isinstance(data, dict):
        raise SpecError([f"{path}: the top level must be a table/object"])
    return data


def load_spec(path: Path) -> Spec:
    """Load and validate a spec file (TOML or JSON)."""
    return parse_spec(read_mapping(path))
