"""Editable installs only: ``tristock.api`` imports from the checkout's top-level ``api/``.

A wheel installs the ``api/`` folder as ``tristock/api``. An editable install finds
``tristock`` in the checkout's ``src/`` instead, where no ``api`` folder is, so its wheel
carries this module (as ``_tristock_api_finder``) and a ``.pth`` line that calls
:func:`install` with the checkout's ``api/`` folder at interpreter start. The finder answers
for the package ``tristock.api`` alone; its sub-modules follow the package's ``__path__``.
Nothing named ``api`` becomes importable.
"""

from __future__ import annotations

import importlib.util
import os
import sys
from collections.abc import Sequence
from importlib.machinery import ModuleSpec
from types import ModuleType

#: The import name the ``api/`` folder takes.
PACKAGE = "tristock.api"


class ApiFolderFinder:
    """A ``sys.meta_path`` finder: ``tristock.api`` is the package in ``folder``."""

    def __init__(self, folder: str) -> None:
        self.folder = folder

    def find_spec(
        self,
        fullname: str,
        path: Sequence[str] | None = None,
        target: ModuleType | None = None,
    ) -> ModuleSpec | None:
        init = os.path.join(self.folder, "__init__.py")
        if fullname != PACKAGE or not os.path.isfile(init):
            return None
        return importlib.util.spec_from_file_location(
            fullname, init, submodule_search_locations=[self.folder]
        )


def install(folder: str) -> None:
    """Append the finder for ``folder`` to ``sys.meta_path`` (once): after the path finder,
    so a ``tristock/api`` that the path finder sees would still win."""
    if not any(isinstance(finder, ApiFolderFinder) for finder in sys.meta_path):
        sys.meta_path.append(ApiFolderFinder(folder))
