"""The form pattern every write page uses: read fields with a Parser, re-show the form on errors.

A bad submission is answered with the same form, what was typed kept, each message beside its
field, HTTP 422, and nothing written.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from flask import render_template, request

from stockroom.errors import InvalidInput
from stockroom.web.inputs import Parser


def field(name: str) -> Any:
    """The raw form value of `name`, or None when absent or blank (so optional fields stay optional)."""
    value = request.form.get(name)
    if value is None or value.strip() == "":
        return None
    return value


def date(
    parser: Parser,
    raw: Any,
    name: str,
    *,
    required: bool = True,
    not_after: dt.date | None = None,
    not_before: dt.date | None = None,
) -> dt.date | None:
    """An ISO date (YYYY-MM-DD) from a form field, within optional bounds, or None with an error recorded.

    The register's own bounds (parsing.EARLIEST_DATE .. LATEST_DATE) apply whatever the caller gives.
    """
    return parser.date(raw, name, required=required, not_before=not_before, not_after=not_after)


def reshow(template: str, exc: InvalidInput, status: int = 422, **context: Any) -> tuple[str, int]:
    """Render the form again with what was typed and each error beside its field."""
    return render_template(template, values=request.form, errors=exc.fields, **context), status
