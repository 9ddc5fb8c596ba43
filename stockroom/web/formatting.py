"""The Jinja filters: the pure formatter (stockroom.formatting) and the audit trail's action words."""

from __future__ import annotations

import re
from typing import Any

from flask import Flask
from markupsafe import Markup, escape

from stockroom.formatting import (
    coverage_basis,
    date,
    interval,
    molarity,
    p_value,
    percent,
    percent_u,
    quantity,
    relative,
    relative_percent,
    signed_percent,
    temperature,
    uncertainty,
    value_at,
    value_u,
)
from stockroom.records.audit import action_label  # the words come from the action registry

_ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}")


def unbroken_dates(text: Any) -> Markup:
    """Free text (escaped) with each ISO date kept on one line: a date broken at its hyphens misreads."""
    escaped = str(escape("" if text is None else text))
    return Markup(_ISO_DATE.sub(lambda m: f'<span class="nowrap">{m.group(0)}</span>', escaped))


def fromjson(text: str | None) -> Any:
    """A JSON-encoded stored value (amendments keep before and after as JSON), for display."""
    import json

    if text is None:
        return "—"
    value = json.loads(text)
    return "—" if value in (None, "") else value


def release_label(release_id: Any) -> str:
    """A release id as people read it, 'release 2 of HCL-2606-01' (looked up once per request)."""
    from flask import g

    from stockroom.db import get_db
    from stockroom.records import release_labels

    if release_id is None or release_id == "":
        return "—"
    cache = g.setdefault("release_labels", {})
    rid = int(release_id)
    if rid not in cache:
        cache[rid] = release_labels(get_db(), [rid]).get(rid, "release (not on record)")
    return str(cache[rid])


def install(app: Flask) -> None:
    """Register the filters with Jinja."""
    app.add_template_filter(molarity, "molarity")
    app.add_template_filter(coverage_basis, "coverage_basis")
    app.add_template_filter(value_u, "value_u")
    app.add_template_filter(value_at, "value_at")
    app.add_template_filter(percent_u, "percent_u")
    app.add_template_filter(relative, "relative")
    app.add_template_filter(relative_percent, "relative_percent")
    app.add_template_filter(uncertainty, "uncertainty")
    app.add_template_filter(interval, "interval")
    app.add_template_filter(signed_percent, "signed_percent")
    app.add_template_filter(p_value, "p_value")
    app.add_template_filter(temperature, "temperature")
    app.add_template_filter(percent, "percent")
    app.add_template_filter(quantity, "quantity")
    app.add_template_filter(date, "date")
    app.add_template_filter(action_label, "action_label")
    app.add_template_filter(fromjson, "fromjson")
    app.add_template_filter(unbroken_dates, "unbroken_dates")
    app.add_template_filter(release_label, "release_label")
