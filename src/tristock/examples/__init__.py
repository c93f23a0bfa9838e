"""The bundled examples: six specs (``demo``, ``trimmed``, ``tuned``; the variants
``comparator``, ``clamped``, ``duty``) and the demo stock room.

The demo catalog sits inside the installed package (``tristock/demo_catalog``, put there by the
wheel build) or, in a source checkout, at ``catalogs/demo``.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

#: Names of the bundled example specs, the first the default.
EXAMPLES = ("demo", "trimmed", "tuned", "comparator", "clamped", "duty")


def demo_catalog_dir() -> Path:
    """The bundled demo stock room: inside the installed package, else the source tree."""
    packaged = resources.files("tristock") / "demo_catalog"
    if packaged.is_dir():
        return Path(str(packaged))
    return Path(__file__).resolve().parents[3] / "catalogs" / "demo"


def example_spec_path(name: str = "demo") -> Path:
    """The bundled example spec ``name`` (one of ``EXAMPLES``); ValueError for another name."""
    if name not in EXAMPLES:
        raise ValueError(f"unknown example {name!r} (choose {', '.join(EXAMPLES)})")
    return Path(str(resources.files("tristock") / "examples" / f"{name}.toml"))
