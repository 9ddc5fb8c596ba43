"""The layer order of stockroom (stockroom/layers.py), checked on the source with `ast`.

Every module of the package is parsed; every import of stockroom in it (at module level or inside a
function, absolute or relative, `import stockroom.x`, `from stockroom import x`, `from stockroom.x import
y`) is an edge. The test fails on an edge to a higher layer, on a module the table does not place, and on
any cycle among stockroom's modules.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from stockroom.layers import LAYERS, layer_of

PACKAGE = Path(__file__).resolve().parent.parent / "stockroom"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def modules() -> dict[str, Path]:
    """Every module of the package: dotted name -> file."""
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _resolve(name: str, known: set[str]) -> str | None:
    """The stockroom module an imported dotted name is (its longest known prefix), or None if not ours."""
    if name != "stockroom" and not name.startswith("stockroom."):
        return None
    while name not in known and "." in name:
        name = name.rsplit(".", 1)[0]
    return name


def imports_of(module: str, path: Path, known: set[str]) -> set[str]:
    """The stockroom modules `module` imports anywhere in its source."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    is_package = path.name == "__init__.py"
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                found = _resolve(alias.name, known)
                if found:
                    out.add(found)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = module.split(".") if is_package else module.split(".")[:-1]
                base = base[: len(base) - (node.level - 1)]
                source = ".".join(base + ([node.module] if node.module else []))
            else:
                source = node.module or ""
            if _resolve(source, known) is None:
                continue
            for alias in node.names:
                # `from stockroom import records` imports the module stockroom.records, not stockroom.
                found = _resolve(f"{source}.{alias.name}", known)
                if found == f"{source}.{alias.name}":
                    out.add(found)
                else:
                    out.add(_resolve(source, known) or source)
    out.discard(module)
    return out


def graph() -> dict[str, set[str]]:
    found = modules()
    known = set(found)
    return {m: imports_of(m, p, known) for m, p in found.items()}


def test_the_parser_sees_every_form_of_import(tmp_path):
    # The checker itself, on a module written for the purpose: each form must yield its edge.
    pkg = tmp_path / "stockroom" / "web"
    pkg.mkdir(parents=True)
    source = (
        "import stockroom.db\n"
        "from stockroom import records\n"
        "from stockroom.policy import status_on\n"
        "from . import forms\n"
        "from .. import workflow\n"
        "def late():\n"
        "    from stockroom.readmodel import facts_of\n"
    )
    (pkg / "thing.py").write_text(source, encoding="utf-8")
    known = {
        "stockroom",
        "stockroom.db",
        "stockroom.records",
        "stockroom.policy",
        "stockroom.web",
        "stockroom.web.forms",
        "stockroom.workflow",
        "stockroom.readmodel",
    }
    got = imports_of("stockroom.web.thing", pkg / "thing.py", known)
    assert got == {
        "stockroom.db",
        "stockroom.records",
        "stockroom.policy",
        "stockroom.web.forms",
        "stockroom.workflow",
        "stockroom.readmodel",
    }


def test_every_module_has_a_layer():
    placed = layer_of()
    missing = sorted(set(modules()) - set(placed))
    assert not missing, f"add these modules to stockroom/layers.py, in the layer of what they hold: {missing}"


def test_the_table_places_each_module_once():
    names = [m for _, ms in LAYERS for m in ms]
    assert len(names) == len(set(names))


def test_no_module_imports_a_higher_layer():
    placed = layer_of()
    names = [n for n, _ in LAYERS]
    upward = []
    for module, targets in graph().items():
        for target in sorted(targets):
            if module in placed and target in placed and placed[target] > placed[module]:
                upward.append(f"{module} ({names[placed[module]]}) imports {target} ({names[placed[target]]})")
    assert not upward, "imports reaching up a layer:\n" + "\n".join(upward)


def _cycles(edges: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(edges.get(v, ())):
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
                out.append(sorted(component))

    for v in sorted(edges):
        if v not in index:
            visit(v)
    return out


def test_the_cycle_finder_finds_a_cycle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycles():
    found = _cycles(graph())
    assert not found, f"import cycles among stockroom's modules: {found}"


@pytest.mark.parametrize("layer", ["pure", "db"])
def test_pure_layers_and_db_import_no_stockroom_module_above_them(layer):
    # db is the leaf of the persistence stack: it imports nothing of stockroom at all.
    placed = layer_of()
    edges = graph()
    members = dict(LAYERS)[layer]
    for module in members:
        if module not in edges:
            continue  # a module the table places ahead of its arrival (another branch adds it)
        if layer == "db":
            assert edges[module] == set(), f"{module} imports {edges[module]}"
        else:
            assert all(placed[t] == 0 for t in edges[module] if t in placed), module
