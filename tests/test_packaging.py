"""The wheel carries everything a non-editable install needs to serve every page."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_wheel_contains_templates_labels_demo_data_and_static(tmp_path):
    if not (ROOT / "pyproject.toml").is_file():
        pytest.skip("not running from a source checkout")
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path), str(ROOT)],
        check=True,
        capture_output=True,
        timeout=300,
    )
    wheel = next(tmp_path.glob("stockroom-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    for template in (ROOT / "templates").rglob("*.html"):
        assert f"stockroom/templates/{template.relative_to(ROOT / 'templates').as_posix()}" in names
    assert "stockroom/demo_data/scenario.json" in names
    assert "stockroom/static/stockroom.css" in names
    assert "stockroom/data/dixon_q_r10.csv" in names
    for layout in (ROOT / "labels").rglob("*"):
        if layout.is_file() and not layout.name.startswith("."):
            assert f"stockroom/labels/{layout.relative_to(ROOT / 'labels').as_posix()}" in names
    assert "stockroom/labels/containers/bench-bottle.toml" in names  # the container label's layout
    assert "stockroom/demo_data/dispensings.json" in names
    # The PDFs' typeface and its licence (stockroom.pdf.typeface).
    fonts = sorted(p.name for p in (ROOT / "stockroom" / "pdf" / "fonts").iterdir())
    assert "LICENSE.txt" in fonts and "DejaVuSans.ttf" in fonts
    for font in fonts:
        assert f"stockroom/pdf/fonts/{font}" in names
    entry = next(n for n in names if n.endswith("entry_points.txt"))
    assert "stockroom = stockroom.cli:main" in zipfile.ZipFile(wheel).read(entry).decode()
