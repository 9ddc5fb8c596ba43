"""The project's own lint and type settings (pyproject.toml) hold over the whole package."""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
pytestmark = pytest.mark.slow


def _tool(name: str) -> str:
    found = shutil.which(name, path=str(Path(sys.executable).parent)) or shutil.which(name)
    if found is None:
        pytest.skip(f"{name} is not installed (it is in the test extra)")
    return found


def test_ruff_is_clean():
    result = subprocess.run(
        [_tool("ruff"), "check", "--output-format", "concise", "."], cwd=ROOT, capture_output=True, text=True, timeout=300
    )
    assert result.returncode == 0, result.stdout[-4000:]


def test_the_tree_is_ruff_formatted():
    # The project adopted `ruff format` in one mechanical commit; a file out of format fails here.
    result = subprocess.run([_tool("ruff"), "format", "--check", "."], cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stdout[-4000:]


def test_mypy_is_clean():
    result = subprocess.run([_tool("mypy"), "--no-error-summary"], cwd=ROOT, capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, result.stdout[-4000:]


def _imported_names(path: Path) -> set[str]:
    """Every dotted name a module imports, at module level or inside a function (from the ast)."""
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            names.add("." * node.level + (node.module or ""))  # relative: never allowed in a pure module
    return names


# Not Flask, not a database driver, and nothing of stockroom above the pure layer.
_FORBIDDEN_ROOTS = ("flask", "werkzeug", "sqlite3", "sqlite_utils")


def test_pure_modules_import_neither_flask_nor_the_database():
    from stockroom.layers import LAYERS

    pure = dict(LAYERS)["pure"]
    checked = 0
    for module in pure:
        path = ROOT / (module.replace(".", "/") + ".py")
        if not path.exists():
            continue  # placed in the table ahead of its arrival from another branch
        checked += 1
        for name in _imported_names(path):
            root = name.split(".")[0]
            assert root not in _FORBIDDEN_ROOTS, f"{module} imports {name}"
            assert not name.startswith("."), f"{module} has a relative import {name!r}"
            if root == "stockroom" and name != "stockroom":
                # `from stockroom.policy import X` yields stockroom.policy and stockroom.policy.X: one must be pure.
                assert name in pure or name.rsplit(".", 1)[0] in pure, f"{module} imports {name}, not a pure module"
    assert checked >= 15  # the table really names the pure modules


def test_the_pure_module_check_catches_a_function_level_import(tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text("def f():\n    from stockroom import db\n    import sqlite_utils\n", encoding="utf-8")
    assert {"stockroom", "stockroom.db", "sqlite_utils"} <= _imported_names(bad)
