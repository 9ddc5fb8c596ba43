"""The Jinja filters: the pure formatter (stockroom.formatting) and the audit trail's action words."""

from __future__ import annotations

import datetime as dt
import re
from typing import Any
from zoneinfo import ZoneInfo

from flask import Flask, current_app
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


# Provenance notes in the catalogues say "from memory" where a value was recalled rather than looked up
# (the rule for code and tests). A screen tells the reader what to do instead: these values are
# defaults to check against the safety data sheet or the certificate.
_SCREEN_REWRITES: tuple[tuple[re.Pattern[str], str], ...] = (
    (
        re.compile(r"values from memory, not from one supplier: verify against", re.I),
        "values, not from one supplier: defaults to check against",
    ),
    (
        re.compile(r"temperatures from memory\s*[—–-]\s*verify"),
        "temperatures are defaults to check against the supplier's certificate",
    ),
    (re.compile(r"from memory(?:, uncertain)?\s*[—–-]\s*(?:verify|check) against"), "a default to check against"),
    (re.compile(r"from memory(?:, uncertain)?\s*[—–-]\s*check (the [^);]+)"), r"a default to check against \1"),
    (re.compile(r",? from memory: check (?:them )?against"), ": defaults to check against"),
    (re.compile(r"; from memory\)"), ")"),
    (
        re.compile(r"(?:a value )?from memory(?:, uncertain)?(?:\s*[—–-]\s*verify)?"),
        "a default to check against the supplier's certificate or safety data sheet",
    ),
)


def on_screen(text: Any) -> str:
    """A catalogue text as a page shows it: "from memory — verify" notes read as defaults to check."""
    out = "" if text is None else str(text)
    for pattern, replacement in _SCREEN_REWRITES:
        out = pattern.sub(replacement, out)
    return out


def lab_time(utc_text: Any) -> str:
    """A stored UTC time (ISO 8601 text) in the lab's time zone, to the minute: '2026-12-02 19:30'.

    Every time a page shows is in the lab's zone (the LAB_TIMEZONE setting), named by the column
    heading or the `lab_zone` global; text that is not a time is shown as it is.
    """
    if not utc_text:
        return "—"
    try:
        moment = dt.datetime.fromisoformat(str(utc_text))
    except ValueError:
        return str(utc_text)
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=dt.UTC)
    return moment.astimezone(ZoneInfo(current_app.config["LAB_TIMEZONE"])).strftime("%Y-%m-%d %H:%M")


def lab_zone() -> str:
    """The lab's time zone as the pages name it (the LAB_TIMEZONE setting, e.g. 'Europe/Berlin')."""
    return str(current_app.config["LAB_TIMEZONE"])


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
    app.add_template_filter(lab_time, "lab_time")
    app.add_template_filter(on_screen, "on_screen")
    app.context_processor(lambda: {"lab_zone": lab_zone()})
