"""How numbers, dates and statuses look on pages: always with their unit, and ± U where there is one."""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

from flask import Flask


def _decimals_for(U: float | None, default: int = 4) -> int:
    """Decimals that show U to two significant figures (and the value to the same place)."""
    if not U or not math.isfinite(U) or U <= 0:
        return default
    return max(0, 1 - math.floor(math.log10(U)))


def molarity(value: float | None, U: float | None = None, k: float | None = None, unit: str = "mol/L") -> str:
    """'0.10214 ± 0.00020 mol/L (k = 2)' — the value rounded to U's second significant figure."""
    if value is None:
        return "—"
    if U is None:
        return f"{value:.5f} {unit}"
    d = _decimals_for(U)
    text = f"{value:.{d}f} ± {U:.{d}f} {unit}"
    if k is not None:
        text += f" (k = {k:g})"
    return text


def percent(value: float | None, digits: int = 2) -> str:
    return "—" if value is None else f"{value * 100:.{digits}f} %"


def quantity(value: float | None, unit: str, digits: int = 2) -> str:
    return "—" if value is None else f"{value:.{digits}f} {unit}"


def date(value: Any) -> str:
    if not value:
        return "—"
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value)[:10]


def install(app: Flask) -> None:
    """Register the filters with Jinja."""
    app.add_template_filter(molarity, "molarity")
    app.add_template_filter(percent, "percent")
    app.add_template_filter(quantity, "quantity")
    app.add_template_filter(date, "date")
