"""How numbers read wherever a person sees them (pages, PDFs, JSON display strings): pure, no Flask.

Every value carries its unit; a value with an uncertainty is shown as value ± U with U rounded to two
significant figures and the value rounded to the same decimal place (JCGM 100:2008, 7.2.6; common
practice in certificates). Labels, certificates, reports and pages all call these functions, so the
same value reads the same everywhere. This module imports nothing of stockroom.
"""

from __future__ import annotations

import datetime as dt
import math
from typing import Any

DASH = "—"
PLUS_MINUS = "±"


def _usable_u(U: float | None) -> bool:
    return U is not None and math.isfinite(U) and U > 0


def decimals_for(U: float | None, default: int = 4) -> int:
    """Decimal places at which U (any unit) shows two significant figures; negative means tens, hundreds.

    The place is taken after rounding, so 0.000996 (which rounds to 0.0010) gives 4, not 5. None, zero,
    a negative or a non-finite U gives `default`.
    """
    if not _usable_u(U):
        return default
    assert U is not None
    exponent = int(f"{U:.1e}".split("e")[1])  # the exponent of U once rounded to 2 significant figures
    return 1 - exponent


def fixed(x: float, decimals: int) -> str:
    """x rounded to `decimals` places (negative: to tens, hundreds...), with no exponent and no '-0'.

    x and the result share one unit, whatever it is.
    """
    if decimals >= 0:
        text = f"{x:.{decimals}f}"
    else:
        text = f"{round(x, decimals):.0f}"
    if text.startswith("-") and not any(c in "123456789" for c in text):
        text = text[1:]  # a negative value that rounds to zero reads as zero
    return text


def coverage(k: float) -> str:
    """'k = 2' or 'k = 2.78': the coverage factor (dimensionless) as printed beside an expanded uncertainty."""
    return f"k = {k:.3g}" if abs(k - round(k)) > 1e-9 else f"k = {int(round(k))}"


def coverage_basis(k: float | None, nu_eff: float | None, probability: float | None) -> str:
    """How k was chosen, in words: 'k = 2.78 for 95 % coverage (ν_eff = 4.0, Welch-Satterthwaite, GUM G.4)'.

    k: the coverage factor (dimensionless); nu_eff: effective degrees of freedom (None or inf when every
    source is Type B); probability: the coverage probability k was taken for (0–1), or None when k was
    fixed, which reads 'k = 2 fixed by the laboratory's procedure'. A missing k gives a dash.
    """
    if k is None or not math.isfinite(k):
        return DASH
    if probability is None:
        return f"{coverage(k)} fixed by the laboratory's procedure"
    p = f"{fixed(probability * 100, 1).rstrip('0').rstrip('.')} %"
    if nu_eff is None or not math.isfinite(nu_eff):
        dof = "ν_eff = ∞: every source is Type B"
    else:
        dof = f"ν_eff = {fixed(nu_eff, 1)}, Welch-Satterthwaite, GUM G.4"
    return f"{coverage(k)} for {p} coverage ({dof})"


def value_u(value: float | None, U: float | None, unit: str, k: float | None = None, *, default_decimals: int = 5) -> str:
    """'0.10214 ± 0.00020 mol/L (k = 2)': value ± U in `unit` (both in that unit), at U's second significant figure.

    No U (None, negative or not finite): the value alone at `default_decimals`. U = 0: the value at
    `default_decimals` and '± 0'. A value of None or not finite: a dash. k (dimensionless) is added
    in brackets when given.
    """
    if value is None or not math.isfinite(value):
        return DASH
    sep = f" {unit}" if unit else ""
    if U is not None and math.isfinite(U) and U == 0:
        text = f"{fixed(value, default_decimals)} {PLUS_MINUS} 0{sep}"
    elif not _usable_u(U):
        return f"{fixed(value, default_decimals)}{sep}"
    else:
        assert U is not None
        d = decimals_for(U)
        text = f"{fixed(value, d)} {PLUS_MINUS} {fixed(U, d)}{sep}"
    if k is not None and math.isfinite(k):
        text += f" ({coverage(k)})"
    return text


def value_at(value: float | None, U: float | None, unit: str, *, default_decimals: int = 5, signed: bool = False) -> str:
    """A value without its own U, at the decimal place another value's U sets ('0.10205 mol/L').

    For figures derived from a certified value (the value at the bench temperature, a trend, an
    interval's ends): they read to the same place as the value they come from. value and U in `unit`;
    signed puts '+' before a positive value (a rate of change).
    """
    if value is None or not math.isfinite(value):
        return DASH
    text = fixed(value, decimals_for(U, default_decimals))
    if signed and not text.startswith("-"):
        text = "+" + text
    return f"{text} {unit}" if unit else text


def molarity(value: float | None, U: float | None = None, k: float | None = None, unit: str = "mol/L") -> str:
    """A molarity (mol/L) with ± U (mol/L) and k where it has them: '0.10214 ± 0.00020 mol/L (k = 2)'."""
    return value_u(value, U, unit, k)


def percent_u(value: float | None, U: float | None, k: float | None = None) -> str:
    """A fraction (0–1, e.g. an assay) and its U (as a fraction) in per cent: '99.975 ± 0.010 % (k = 2)'."""
    if value is None:
        return DASH
    return value_u(value * 100, None if U is None else U * 100, "%", k, default_decimals=3)


def relative_percent(u_rel: float | None) -> str:
    """A relative uncertainty (dimensionless, 0.00020) in per cent to two significant figures: '0.020 %'."""
    if u_rel is None or not math.isfinite(u_rel):
        return DASH
    rel = abs(u_rel) * 100
    return "0 %" if rel == 0 else f"{fixed(rel, decimals_for(rel))} %"


def relative(U: float | None, value: float | None, k: float | None = None) -> str:
    """U relative to the value, in per cent to two significant figures: '0.20 % (k = 2)'.

    U and value in one unit (any); a zero, missing or non-finite value or U gives a dash.
    """
    if U is None or value is None or not math.isfinite(U) or not math.isfinite(value) or value == 0:
        return DASH
    text = relative_percent(U / value)
    return text + (f" ({coverage(k)})" if k is not None else "")


def volume_u(volume_ml: float | None, U_ml: float | None, k: float | None = None) -> str:
    """A volume in mL with its U in mL: '25.000 ± 0.030 mL (k = 2)'; without U, to 0.01 mL."""
    return value_u(volume_ml, U_ml, "mL", k, default_decimals=2)


def temperature(t_c: float | None, digits: int = 1) -> str:
    """A temperature in °C to `digits` decimals: '20.0 °C'."""
    return quantity(t_c, "°C", digits)


def reference_temperature(t_c: float | None) -> str:
    """A reference temperature (°C) as a round figure with no trailing zeros: 'at 20 °C' reads '20 °C'."""
    return DASH if t_c is None or not math.isfinite(t_c) else f"{t_c:g} °C"


def uncertainty(u: float | None, unit: str) -> str:
    """An uncertainty (standard or expanded, in `unit`) on its own, to two significant figures: '0.00010 mol/L'."""
    if u is None or not math.isfinite(u):
        return DASH
    text = "0" if u == 0 else fixed(u, decimals_for(abs(u)))
    return f"{text} {unit}" if unit else text


def interval(low: float | None, high: float | None, unit: str) -> str:
    """'0.10205 to 0.10223 mol/L': an interval's ends (in `unit`) at the place where its half-width has two
    significant figures."""
    if low is None or high is None or not math.isfinite(low) or not math.isfinite(high):
        return DASH
    d = decimals_for(abs(high - low) / 2, 5)
    return f"{fixed(low, d)} to {fixed(high, d)}" + (f" {unit}" if unit else "")


def significant(x: float, digits: int = 4) -> str:
    """x (any unit) to `digits` significant figures without an exponent (read at the bench): 1234.5 -> '1235'."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(x))))
    return fixed(x, decimals)


def percent(value: float | None, digits: int | None = 2) -> str:
    """A fraction (0.0123) as a percentage: '1.23 %'; digits None gives the shortest form ('37 %', '36.5 %')."""
    if value is None or not math.isfinite(value):
        return DASH
    return f"{value * 100:g} %" if digits is None else f"{fixed(value * 100, digits)} %"


def signed_percent(value: float | None, digits: int = 2) -> str:
    """A signed fraction (a deviation or a drift rate, 0.0012) as a percentage with its sign: '+0.120 %'."""
    if value is None or not math.isfinite(value):
        return DASH
    text = fixed(value * 100, digits)
    return f"{text if text.startswith('-') else '+' + text} %"


def p_value(p: float | None) -> str:
    """A test's p-value (0–1) as 'p = 0.012' (two significant figures), or 'p < 0.0001' when smaller."""
    if p is None or not math.isfinite(p):
        return f"p = {DASH}"
    if p < 1e-4:
        return "p < 0.0001"
    return f"p = {significant(p, 2)}"


def quantity(value: float | None, unit: str, digits: int = 2) -> str:
    """A value with its unit to fixed decimals ('25.00 mL')."""
    return DASH if value is None or not math.isfinite(value) else f"{fixed(value, digits)} {unit}"


def date(value: Any) -> str:
    """An ISO date (YYYY-MM-DD) from a date or a stored ISO text; a dash for none."""
    if not value:
        return DASH
    if isinstance(value, dt.date):
        return value.isoformat()[:10]
    return str(value)[:10]


def release_name(number: int | None, batch_code: str | None = None) -> str:
    """A release as people read it: 'release 2 of HCL-2606-01' (its number within the batch, never a row id)."""
    if number is None:
        return "release (not on record)"
    return f"release {number} of {batch_code}" if batch_code else f"release {number}"
