"""The web layer's shared request helpers: the lab's date, JSON or HTML, date arguments, the CSRF guard.

The wiring of the blueprints into an app is stockroom.web.app (kept apart so that no blueprint, which
imports these helpers, is imported back by the package it lives in).
"""

from __future__ import annotations

import datetime as dt

from flask import current_app, request
from flask_wtf.csrf import CSRFProtect

from stockroom import db as dbmod
from stockroom.errors import InvalidInput

csrf = CSRFProtect()


def lab_today() -> dt.date:
    """Today's date in the lab's time zone."""
    return dbmod.lab_today(current_app.config["LAB_TIMEZONE"])


def wants_json() -> bool:
    return request.path.startswith("/api/") or request.accept_mimetypes.best == "application/json"


def parse_date_arg(value: str | None, field: str) -> dt.date | None:
    """An optional ISO date from a query string; InvalidInput naming the field if malformed."""
    from stockroom.errors import FieldError

    if value is None or value.strip() == "":
        return None
    try:
        return dt.date.fromisoformat(value.strip())
    except ValueError:
        raise InvalidInput([FieldError(field, f"{value!r} is not a date; write it as YYYY-MM-DD")]) from None
