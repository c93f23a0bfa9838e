"""The layout's rules (DEVELOPERS.md, "Layers"), read from the source: no import circle, no
import from a lower layer up to a higher one, no private name (leading underscore) imported
across modules, no module over 400 lines. Every import counts, function-local and
``TYPE_CHECKING`` ones included: an upward import inside a function is still a circle.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
SOURCES = {"tristock": REPO / "src" / "tristock", "tristock.api": REPO / "api"}
MAX_LINES = 400

#: Each layer imports only its own and lower ones (lowest first). Package prefixes; a module
#: belongs to the longest prefix that names it.
LAYERS: tuple[tuple[str, ...], ...] = (
    ("tristock",),  # the root package: __version__ and the runtime's settings
    ("tristock.stock",),
    ("tristock.spec", "tristock.examples"),
    ("tristock.circuits",),
    ("tristock.analysis", "tristock.simulate"),
    ("tristock.search",),
    ("tristock.designs",),
    ("tristock.export", "tristock.report", "tristock.registry"),
    ("tristock.cli", "tristock.serve", "tristock.__main__", "tristock.api"),
)


@dataclass(frozen=True)
class Import:
    source: str  # the importing module
    target: str  # the imported module (a name of a module when ``from pkg import module``)
    names: tuple[str, ...]  # the names taken with ``from ... import``
    line: int


def module_name(path: Path) -> str:
    for package, root in SOURCES.items():
        if path.is_relative_to(root):
            parts = list(path.relative_to(root).with_suffix("").parts)
            if parts[-1] == "__init__":
                parts.pop()
            return ".".join([package, *parts])
    raise ValueError(path)


def modules() -> dict[str, Path]:
    return {
        module_name(p): p
        for root in SOURCES.values()
        for p in sorted(root.rglob("*.py"))
        if "__pycache__" not in p.parts
    }


def _absolute(source: str, is_package: bool, level: int, module: str | None) -> str:
    if level == 0:
        return module or ""
    base = source.split(".")
    base = base if is_package else base[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join([*base, module] if module else base)


def imports_of(name: str, path: Path, known: set[str]) -> list[Import]:
    """Every import of a ``tristock`` module in ``path`` (``api`` as ``tristock.api``)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_package = path.name == "__init__.py"
    out: list[Import] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("tristock"):
                    out.append(Import(name, alias.name, (), node.lineno))
        elif isinstance(node, ast.ImportFrom):
            target = _absolute(name, is_package, node.level, node.module)
            if not target.startswith("tristock"):
                continue
            names = tuple(a.name for a in node.names)
            submodules = [f"{target}.{n}" for n in names if f"{target}.{n}" in known]
            if submodules:
                out += [Import(name, sub, (), node.lineno) for sub in submodules]
            others = tuple(n for n in names if f"{target}.{n}" not in known)
            if others:
                out.append(Import(name, target, others, node.lineno))
    return out


def layer_of(name: str) -> int:
    best, level = -1, -1
    for n, prefixes in enumerate(LAYERS):
        for prefix in prefixes:
            if (name == prefix or name.startswith(prefix + ".")) and len(prefix) > best:
                best, level = len(prefix), n
    if level < 0:
        raise AssertionError(f"{name}: in no layer (add its package to LAYERS)")
    return level


MODULES = modules()
IMPORTS = [i for n, p in MODULES.items() for i in imports_of(n, p, set(MODULES))]


def test_the_sources_are_read() -> None:
    assert "tristock.circuits.topology" in MODULES and "tristock.api.app" in MODULES
    assert len(IMPORTS) > 300


def upward_imports(imports: list[Import]) -> list[str]:
    return [
        f"{i.source}:{i.line} imports {i.target} (layer {layer_of(i.target)} above "
        f"{layer_of(i.source)})"
        for i in imports
        if layer_of(i.target) > layer_of(i.source)
    ]


def test_no_import_from_a_lower_layer_up() -> None:
    assert upward_imports(IMPORTS) == []


def circles(imports: list[Import]) -> list[list[str]]:
    """The strongly connected components with more than one module (Tarjan's algorithm)."""
    graph: dict[str, set[str]] = {}
    for i in imports:
        if i.target != i.source:
            graph.setdefault(i.source, set()).add(i.target)
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_no_import_circle() -> None:
    assert circles(IMPORTS) == []


def test_no_private_name_across_modules() -> None:
    private = [
        f"{i.source}:{i.line} imports {n} from {i.target}"
        for i in IMPORTS
        for n in i.names
        if n.startswith("_") and n != "__version__" and i.target != i.source
    ]
    assert private == []


def test_no_module_over_400_lines() -> None:
    long = {
        name: n
        for name, path in MODULES.items()
        if (n := len(path.read_text(encoding="utf-8").splitlines())) > MAX_LINES
    }
    assert long == {}


@pytest.mark.parametrize(
    ("edges", "expected"),
    [
        ([("tristock.stock.a", "tristock.circuits.b")], 1),  # stock importing circuits
        ([("tristock.search.a", "tristock.designs.b")], 1),  # search importing designs
        ([("tristock.designs.a", "tristock.search.b")], 0),
        ([("tristock.circuits.a", "tristock.api.app")], 1),
    ],
)
def test_an_upward_import_is_seen(edges: list[tuple[str, str]], expected: int) -> None:
    imports = [Import(a, b, (), 1) for a, b in edges]
    assert len(upward_imports(imports)) == expected


def test_a_circle_is_seen() -> None:
    edges = [("a.x", "a.y"), ("a.y", "a.z"), ("a.z", "a.x"), ("a.z", "a.w")]
    assert circles([Import(a, b, (), 1) for a, b in edges]) == [["a.x", "a.y", "a.z"]]
