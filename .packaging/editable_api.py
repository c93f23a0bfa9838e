"""Hatchling build hook: an editable install imports ``tristock.api`` from ``api/``.

The wheel maps the repository's top-level ``api/`` folder to ``tristock/api``
(``force-include`` in pyproject.toml). Hatchling's editable wheel cannot express that: it
puts ``src/`` on the path (so ``tristock`` is ``src/tristock``, without ``api``), refuses a
``sources`` rewrite that adds a prefix, and copies force-included files into site-packages,
where ``src/tristock`` shadows them and they go stale. So the editable wheel gets, instead of
those copies, ``_tristock_api_finder.py`` (``.packaging/tristock_api_finder.py``) and
``_tristock_api.pth``, whose one line installs the finder with this checkout's ``api/``.
Regular wheels and sdists are left as they are.
"""

from __future__ import annotations

import shutil
import tempfile
from pathlib import Path
from typing import Any

from hatchling.builders.hooks.plugin.interface import BuildHookInterface

FINDER_MODULE = "_tristock_api_finder"
PTH_NAME = "_tristock_api.pth"


class EditableApiHook(BuildHookInterface):  # type: ignore[type-arg]
    """Adds the finder and its ``.pth`` line to editable wheels."""

    PLUGIN_NAME = "custom"

    def initialize(self, version: str, build_data: dict[str, Any]) -> None:
        if self.target_name != "wheel" or version != "editable":
            return
        root = Path(self.root).resolve()
        self._staging = Path(tempfile.mkdtemp(prefix="tristock-editable-"))
        pth = self._staging / PTH_NAME
        line = f"import {FINDER_MODULE}; {FINDER_MODULE}.install({str(root / 'api')!r})\n"
        pth.write_text(line, encoding="utf-8")
        # Replaces the wheel's force-include map in the editable wheel only.
        build_data["force_include_editable"] = {
            str(root / ".packaging" / "tristock_api_finder.py"): f"{FINDER_MODULE}.py",
            str(pth): PTH_NAME,
        }

    def finalize(self, version: str, build_data: dict[str, Any], artifact_path: str) -> None:
        staging = getattr(self, "_staging", None)
        if staging is not None:
            shutil.rmtree(staging, ignore_errors=True)
