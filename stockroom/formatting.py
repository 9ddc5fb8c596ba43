"""How numbers read wherever a person sees them (pages, PDFs, JSON display strings): pure, no Flask.

Every value carries its unit; a value with an uncertainty is shown as value ± U with U to two
significant figures and the value rounded to the same decimal place (GUM 7.2.6, common practice).
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

DASH = "—"


def decimals_for(U: float | None, default: int = 4) -> int:
    """Decimal places that show U to two significant figures (and the value to the same place)."""
    if U is None or not math.isfinite(U) or U <= 0:
        return default
    return max(0, 1 - math.floor(math.log10(U)))


def coverage(k: float) -> str:
    """'k = 2' or 'k = 2.78': the coverage factor as printed beside an expanded uncertainty."""
    return f"k = {k:.3g}" if abs(k - round(k)) > 1e-9 else f"k = {int(round(k))}"


def value_u(value: float | None, U: float | None, unit: str, k: float | None = None, *, default_decimals: int = 5) -> str:
    """'0.10214 ± 0.00020 mol/L (k = 2)': value ± U in `unit`, rounded to U's second significant figure."""
    if value is None or not math.isfinite(value):
        return DASH
    if U is None or not math.isfinite(U):
        return f"{value:.{default_decimals}f} {unit}"
    d = decimals_for(U, default_decimals)
    text = f"{value:.{d}f} ± {U:.{d}f} {unit}"
    if k is not None:
        text += f" ({coverage(k)})"
    return text


def molarity(value: float | None, U: float | None = None, k: float | None = None, unit: str = "mol/L") -> str:
    """A molarity (mol/L) with ± U and k where it has them: '0.10214 ± 0.00020 mol/L (k = 2)'."""
    return value_u(value, U, unit, k)


def significant(x: float, digits: int = 4) -> str:
    """x to `digits` significant figures without an exponent (read at the bench)."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(x))))
    return f"{x:.{decimals}f}"


def percent(value: float | None, digits: int = 2) -> str:
    """A fraction (0.0123) as a percentage with its sign ('1.23 %')."""
    return DASH if value is None or not math.isfinite(value) else f"{value * 100:.{digits}f} %"


def quantity(value: float | None, unit: str, digits: int = 2) -> str:
    """A value with its unit to fixed decimals ('25.00 mL')."""
    return DASH if value is None or not math.isfinite(value) else f"{value:.{digits}f} {unit}"


def date(value: Any) -> str:
    """An ISO date (YYYY-MM-DD) from a date or a stored ISO text; a dash for none."""
    if not value:
        return DASH
    if isinstance(value, dt.date):
        return value.isoformat()[:10]
    return str(value)[:10]
