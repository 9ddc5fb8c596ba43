"""Where the shipped folders (templates, labels, demo_data) are, in a checkout and in an installed wheel."""

from __future__ import annotations

from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent


def resource_dir(name: str) -> Path:
    """The folder `name`: inside the package in a wheel, at the repository top level in a checkout."""
    inside = _PACKAGE / name
    if inside.is_dir():
        return inside
    beside = _PACKAGE.parent / name
    if beside.is_dir():
        return beside
    raise FileNotFoundError(f"stockroom resource folder {name!r} is missing from this installation")
