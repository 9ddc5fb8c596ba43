"""The form pattern every write page uses: read fields with a Parser, re-show the form on errors.

A bad submission is answered with the same form, what was typed kept, each message beside its
field, HTTP 422, and nothing written.
"""

from __future__ import annotations

import datetime as dt
import functools
import html
import re
from collections.abc import Callable, Mapping
from typing import Any

from flask import g, render_template, request

from stockroom import run_input
from stockroom.errors import InvalidInput
from stockroom.web.inputs import Parser


def field(name: str) -> Any:
    """The raw form value of `name`, or None when absent or blank (so optional fields stay optional)."""
    value = request.form.get(name)
    if value is None or value.strip() == "":
        return None
    return value


def parser() -> Parser:
    """The Parser of an HTML form: as strict as the JSON API's, but an unambiguous decimal comma is read."""
    return Parser(decimal_comma=True)


FORM_DOOR_HEADER = "X-Stockroom-Door"


def from_form_page() -> bool:
    """Whether a JSON request is a form page's live helper (its script sends X-Stockroom-Door: form).

    The live calculator and the run preview then read numbers as the form they serve will (a decimal
    comma where unambiguous); a program calling the JSON API sends no such header and stays strict.
    """
    return request.headers.get(FORM_DOOR_HEADER, "").strip().lower() == "form"


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


# A form field's label as the page shows it: <label for="f-NAME">Text <span class="unit">(g)</span></label>
_LABEL = re.compile(r'<label[^>]*\bfor="f-([A-Za-z0-9_.-]+)"[^>]*>(.*?)</label>', re.S)
_UNIT = re.compile(r'<span class="unit">.*?</span>', re.S)
_TAG = re.compile(r"<[^>]+>")


def labels_in(page: str) -> dict[str, str]:
    """Field name -> the label text a rendered form shows for it (units and markup dropped)."""
    out: dict[str, str] = {}
    for name, inner in _LABEL.findall(page):
        text = " ".join(html.unescape(_TAG.sub("", _UNIT.sub("", inner))).split())
        if text:
            out.setdefault(name, text)
    return out


def spoken(name: str) -> str:
    """A field name as words, for a field no label names ("shelf_life_days" -> "Shelf life days")."""
    words = name.replace("_", " ").replace(".", " ").strip()
    return words[:1].upper() + words[1:] if words else "This form"


def render_form(template: str, *, errors: Mapping[str, str], **context: Any) -> str:
    """Render a form; when it carries errors, each is listed under the label the form shows for its field.

    The labels are read from the form itself (a first rendering), so the list at the top of the form
    and the field it points to always use the same words; a name with no label is spelled as words.
    """
    given: dict[str, str] = dict(context.pop("labels", None) or {})  # a view's own table of labels wins
    if not errors or all(name in given for name in errors):
        return render_template(template, errors=errors, labels=given, **context)
    found = labels_in(render_template(template, errors=errors, labels=given, **context))
    labels = given | {name: found.get(name) or spoken(name) for name in errors if name not in given}
    return render_template(template, errors=errors, labels=labels, **context)


def reshow(template: str, exc: InvalidInput, status: int = 422, **context: Any) -> tuple[str, int]:
    """Render the form again with what was typed and each error beside its field, listed by its label."""
    return render_form(template, values=request.form, errors=exc.fields, **context), status


# ------------------------------------------------------------------ a refusal answered by the error page

# The words a form without its own page of errors uses for its fields (a decision, a leave-out, a
# disabled account, a batch correction). A view may name its own with @labelled(table).
COMMON_LABELS: dict[str, str] = {
    "reason": "Reason",
    "decision": "Decision",
    "released_on": "Released on",
    "result_version": "Result shown",
    "position": "Replicate",
    "field": "Detail to correct",
    "new_value": "Corrected value",
    "label": "What will use it",
    "new_password": "New password",
    "current_password": "Current password",
    "confirm_password": "New password again",
    "password": "Password",
    "username": "Username",
    "display_name": "Name",
    "role": "Role",
    "layout": "Label layout",
    "copies": "Copies",
    "start": "Start at label",
    "on": "Date shown",
    "date": "Lab day",
    "q": "Search",
    "page": "Page",
}


def labelled(table: Mapping[str, str]) -> Callable[[Callable[..., Any]], Callable[..., Any]]:
    """Decorate a view: a refusal it lets reach the error page names its fields by these labels."""

    def wrap(view: Callable[..., Any]) -> Callable[..., Any]:
        @functools.wraps(view)
        def inner(*args: Any, **kwargs: Any) -> Any:
            g.form_labels = table
            return view(*args, **kwargs)

        return inner

    return wrap


def label_for(name: str, labels: Mapping[str, str] | None = None) -> str | None:
    """The words a person reads for a field: the view's label, a common one, or its name as words; None for "_"."""
    if name in ("_", "_body", ""):
        return None
    table = {**COMMON_LABELS, **(labels or {})}
    if name in table:
        return table[name]
    if name.startswith(("replicates", "overrides")):  # a run's request paths: "Replicate 3, final reading"
        return run_input.label(name)
    return spoken(name)


def problems(exc: InvalidInput) -> list[tuple[str | None, str]]:
    """(label or None, message) of each refused field, for the error page."""
    labels = g.get("form_labels")
    return [(label_for(e.field, labels), e.message) for e in exc.errors]
