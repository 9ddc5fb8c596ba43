"""The project's own lint and type settings (pyproject.toml) hold over the whole package."""

from __future__ import annotations

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


def test_mypy_is_clean():
    result = subprocess.run([_tool("mypy"), "--no-error-summary"], cwd=ROOT, capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, result.stdout[-4000:]


def test_pure_modules_import_neither_flask_nor_the_database():
    pure = (
        "chemistry",
        "corrections",
        "stats",
        "uncertainty",
        "drift",
        "standardization",
        "policy",
        "preparation",
        "traceability",
        "hazards",
        "labday",
    )
    for name in pure:
        text = (ROOT / "stockroom" / f"{name}.py").read_text()
        for forbidden in (
            "import flask",
            "from flask",
            "sqlite_utils",
            "sqlite3",
            "stockroom.db",
            "stockroom import db",
            "stockroom.records",
            "stockroom import records",
        ):
            assert forbidden not in text, f"stockroom/{name}.py mentions {forbidden!r}"
