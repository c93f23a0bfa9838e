"""What several commands share: reading the catalog, spec and DESIGN files, plot targets.

Errors name the file: a spec problem reads ``spec.toml: triangle.amplitude_vpp: ...``.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

from tristock.circuits.board import AnyBoard
from tristock.cli.exits import UsageError
from tristock.examples import demo_catalog_dir
from tristock.export.designfile import parse_design
from tristock.spec.loading import SpecError, parse_spec, read_mapping
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog, load_catalog

T = TypeVar("T")

#: Plot formats by file suffix (lower case), as ``tristock.report.plot`` writes them.
PLOT_SUFFIXES = (".png", ".svg")


#: The catalog folder when ``--catalog`` is not given (as for ``tristock serve``).
CATALOG_ENV = "TRISTOCK_CATALOG"


def catalog_from(path: str | None, *, example: bool = False) -> Catalog:
    """The catalog in folder ``path``; without one, a bundled example's is the demo, and any
    other command's is ``TRISTOCK_CATALOG``."""
    if path is None:
        if example:
            return load_catalog(demo_catalog_dir())
        path = os.environ.get(CATALOG_ENV) or None
        if path is None:
            raise UsageError(f"tristock: --catalog DIR is required (or {CATALOG_ENV})")
    return load_catalog(path)


def parsed_in(path: Path, parse: Callable[[Any], T], data: Any) -> T:
    """``parse(data)`` for data read from ``path``: a SpecError names the file on each line."""
    try:
        return parse(data)
    except SpecError as err:
        name = str(path)
        lines = [line if line.startswith(name) else f"{name}: {line}" for line in err.lines]
        raise SpecError(lines) from None


def read_file(path: Path) -> dict[str, Any]:
    """A spec or DESIGN file as a mapping (TOML for ``.toml``, else JSON)."""
    return parsed_in(path, read_mapping, path)


def spec_from_file(path: Path) -> Spec:
    """The validated spec in ``path``."""
    return parsed_in(path, parse_spec, read_file(path))


def design_from_file(path: Path, catalog: Catalog) -> tuple[Spec, AnyBoard]:
    """The spec and the parts (on ``catalog``) of the DESIGN file ``path``."""
    data = read_file(path)
    return parsed_in(path, lambda d: parse_design(d, catalog), data)


def with_ranking(spec: Spec, top: int | None, by: str | None) -> Spec:
    """``spec`` with ``ranking.top`` and ``ranking.by`` replaced where given."""
    changes = {k: v for k, v in (("top", top), ("by", by)) if v is not None}
    if not changes:
        return spec
    ranking = {**spec.ranking.model_dump(), **changes}
    return parse_spec({**spec.model_dump(), "ranking": ranking})


def plot_target(option: str, name: str) -> Path:
    """The file a plot will go to, checked before any work is done: a .png or .svg name in a
    folder that exists."""
    path = Path(name)
    if path.suffix.lower() not in PLOT_SUFFIXES:
        raise UsageError(
            f"tristock: {option}: {name!r} ends in {path.suffix or 'no suffix'!r}; "
            f"plots are written as {' or '.join(PLOT_SUFFIXES)}"
        )
    folder = path.parent
    if not folder.is_dir():
        raise UsageError(f"tristock: {option}: folder {str(folder)!r} does not exist")
    if path.is_dir():
        raise UsageError(f"tristock: {option}: {name!r} is a folder")
    return path
