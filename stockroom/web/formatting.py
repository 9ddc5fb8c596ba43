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


# Plain words for the audit trail's action codes; an unknown code is shown as it is.
ACTION_LABELS = {
    "batch.register": "registered a batch",
    "batch.release": "released a batch",
    "batch.withdraw": "withdrew a batch",
    "batch.amend": "corrected a batch detail",
    "lot.register": "registered a standard lot",
    "run.record.certify": "recorded a standardization",
    "run.record.recheck": "recorded a re-check",
    "run.accept": "accepted a run",
    "run.reject": "rejected a run",
    "replicate.exclude": "left out a replicate",
    "label.print": "printed labels",
    "hazard.classify": "added a hazard classification",
    "classdata.correct": "corrected class data",
    "token.create": "made an API token",
    "token.revoke": "revoked an API token",
    "account.create": "created an account",
    "account.disable": "disabled an account",
    "account.password_change": "changed their password",
    "account.password_reset": "reset a password",
    "account.signin": "signed in",
    "account.signin_failed": "failed to sign in",
    "account.signin_paused": "sign-in paused after failures",
    "account.signout": "signed out",
    "access.refused": "was refused an action",
    "instrument.register": "registered an instrument",
    "instrument.calibrate": "recorded a calibration",
    "run.instruments": "named the instruments of a run",
    "recall.open": "opened a recall",
    "recall.clear": "cleared a recall",
    "policy.change": "changed a reagent policy",
}


def fromjson(text: str | None) -> Any:
    """A JSON-encoded stored value (amendments keep before and after as JSON), for display."""
    import json

    if text is None:
        return "—"
    value = json.loads(text)
    return "—" if value in (None, "") else value


def action_label(code: str) -> str:
    return ACTION_LABELS.get(code, code)


def install(app: Flask) -> None:
    """Register the filters with Jinja."""
    app.add_template_filter(molarity, "molarity")
    app.add_template_filter(percent, "percent")
    app.add_template_filter(quantity, "quantity")
    app.add_template_filter(date, "date")
    app.add_template_filter(action_label, "action_label")
    app.add_template_filter(fromjson, "fromjson")
