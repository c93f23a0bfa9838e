"""The spec form of the workbench, read off the Spec's own JSON schema: one section per
``[table]`` of a spec file, one input per field, so a field added to the Spec appears in the
form without touching this module (``tests/api/test_web_pages.py`` checks every leaf).

Kinds of input: ``number`` and ``integer`` (a text box: the API, not the browser, judges the
value, so its message is the one shown), ``text`` (a string or ``"auto"`` or a count), ``list``
(comma-separated strings), ``choice`` (a select over the field's ``enum``), ``flag`` (a
checkbox). An input's ``name`` is the field's dotted path (``frequency.target_hz``): the
API's error ``loc`` after ``["body", "spec"]``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from functools import cache
from typing import Any

from tristock.spec.model import Spec


@dataclass(frozen=True)
class FormField:
    path: str
    label: str
    kind: str
    help: str
    placeholder: str
    choices: tuple[str, ...] = ()
    required: bool = False


@dataclass(frozen=True)
class FormSection:
    name: str
    help: str
    optional: bool
    fields: tuple[FormField, ...]


def _resolve(schema: dict[str, Any], node: dict[str, Any]) -> tuple[dict[str, Any], bool]:
    """The node without its ``null`` alternative and ``$ref``; True when null was allowed."""
    nullable = False
    options = node.get("anyOf")
    if options is not None:
        rest = [o for o in options if o.get("type") != "null"]
        nullable = len(rest) < len(options)
        node = {**node, **rest[0]} if len(rest) == 1 else {**node, "anyOf": rest}
        if len(rest) == 1:
            node.pop("anyOf", None)
    ref = node.get("$ref")
    if ref is not None:
        node = {**schema["$defs"][ref.rsplit("/", 1)[1]], **{k: v for k, v in node.items()}}
    return node, nullable


def _kind(node: dict[str, Any]) -> tuple[str, tuple[str, ...]]:
    if "enum" in node:
        return "choice", tuple(str(v) for v in node["enum"])
    kind = node.get("type")
    if kind == "boolean":
        return "flag", ()
    if kind == "array":
        return "list", ()
    if kind in ("number", "integer"):
        return str(kind), ()
    return "text", ()


def _placeholder(node: dict[str, Any]) -> str:
    if "default" not in node or node["default"] is None:
        return ""
    default = node["default"]
    if isinstance(default, list):
        return ", ".join(str(v) for v in default)
    return str(default) if not isinstance(default, bool) else ""


@cache
def spec_form() -> tuple[FormSection, ...]:
    """Every section and field of the Spec, in the Spec's order."""
    schema = Spec.model_json_schema()
    required_sections = set(schema.get("required", []))
    sections = []
    for name, node in schema["properties"].items():
        section, nullable = _resolve(schema, node)
        required = set(section.get("required", []))
        fields = []
        for field, raw in section["properties"].items():
            leaf, _ = _resolve(schema, raw)
            kind, choices = _kind(leaf)
            fields.append(
                FormField(
                    path=f"{name}.{field}",
                    label=field,
                    kind=kind,
                    help=str(leaf.get("description", "")),
                    placeholder=_placeholder(leaf),
                    choices=choices,
                    required=field in required,
                )
            )
        sections.append(
            FormSection(
                name=name,
                help=str(section.get("description", "")).split("\n\n")[0],
                optional=nullable and name not in required_sections,
                fields=tuple(fields),
            )
        )
    return tuple(sections)


def form_kinds_json() -> str:
    """``{dotted path: kind}`` for the page's script (how to turn a box into JSON)."""
    kinds = {f.path: f.kind for s in spec_form() for f in s.fields}
    return json.dumps(kinds, separators=(",", ":"))
