"""One record per click: every creating form carries a one-time form id; a second submission of it
writes nothing and is sent to what the first made.

The id is made when the form is rendered (`{{ once_field() }}` in the template) and stored in
`form_submissions` (an operational table, not a record: no audit entry) in the same transaction as
whatever the view writes. The view runs inside `db.write`, so a double click's two requests are
serialized: the second finds the id stored and is redirected to the first one's answer with a note.
A submission without the field (an older page, a script) is served as before; a refused one (4xx)
stores no id, so the corrected form can be sent again.
"""

from __future__ import annotations

import functools
import re
import secrets
from collections.abc import Callable
from typing import Any

from flask import Flask, flash, g, make_response, redirect, request
from markupsafe import Markup

from stockroom import db as dbmod
from stockroom.db import get_db
from stockroom.errors import FieldError, InvalidInput
from stockroom.web.access import current_user

FIELD = "form_id"
ALREADY = "this form was already submitted; here is what it made"
_SHAPE = re.compile(r"[A-Za-z0-9_-]{16,64}")


def new_form_id() -> str:
    """A fresh, unguessable one-time form id (URL-safe text, 24 characters)."""
    return secrets.token_urlsafe(18)


def once_field() -> Markup:
    """The hidden input a creating form carries (a template global)."""
    return Markup('<input type="hidden" name="{}" value="{}">').format(FIELD, new_form_id())


def made(location: str | None = None) -> None:
    """Mark the current submission as having made something, shown at `location` (default: the form's page).

    For the views that answer a successful POST with a page or a file instead of a redirect.
    """
    g.once_location = location or request.path


def first_submission(form_id: str) -> dict[str, Any] | None:
    """The stored submission of a form id, or None when it was never used."""
    rows = dbmod.query(get_db(), "SELECT * FROM form_submissions WHERE form_id = ?", [form_id])
    return rows[0] if rows else None


def once(view: Callable[..., Any]) -> Callable[..., Any]:
    """Decorate a creating view: a POST whose form id was already used writes nothing and redirects."""

    @functools.wraps(view)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        if request.method != "POST":
            return view(*args, **kwargs)
        form_id = request.form.get(FIELD)
        if not form_id:
            return view(*args, **kwargs)
        if not _SHAPE.fullmatch(form_id):
            raise InvalidInput([FieldError(FIELD, "is not a form id this server made; reload the page and try again")])
        db = get_db()
        with dbmod.write(db):
            prior = first_submission(form_id)
            if prior is not None:
                flash(ALREADY, "info")
                return redirect(prior["location"], 303)
            g.once_location = None
            resp = make_response(view(*args, **kwargs))
            location = g.once_location
            if location is None and 300 <= resp.status_code < 400:
                location = resp.headers.get("Location")
            if location and resp.status_code < 400:
                user = current_user()
                db.execute(
                    "INSERT INTO form_submissions (form_id, username, location, submitted_at) VALUES (?, ?, ?, ?)",
                    [form_id, user.username if user else None, location, dbmod.utc_now()],
                )
            return resp

    return wrapper


def install(app: Flask) -> None:
    """Make `once_field()` available to every template."""
    app.add_template_global(once_field)
