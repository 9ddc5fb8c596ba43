"""Hazard data an administrator keeps: the GHS classification of each reagent's solutions by concentration.

    GET/POST /admin/hazards     the classifications in force, their history, and a form to add one

Rows are never changed: a correction is a new row with its reason, effective from a date (today or
later). For a concentration, the newest row in force whose band covers it wins (stockroom.hazards).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

from flask import Blueprint, flash, redirect, render_template, request, url_for

from stockroom import chemistry, hazards, records
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.web import forms, lab_today
from stockroom.web.access import current_user, require
from stockroom.web.once import once
from stockroom.web.printing import pictogram_uri

bp = Blueprint("hazards_admin", __name__, url_prefix="/admin")

HAZARD_LABELS: dict[str, str] = {
    "reagent": "Reagent",
    "min_molarity": "From (inclusive)",
    "max_molarity": "Up to (not including)",
    "signal_word": "Signal word",
    "pictograms": "Pictograms",
    "hazard_statements": "Hazard statements",
    "precautionary_statements": "Precautionary statements",
    "source_note": "Source",
    "effective_from": "In force from",
    "reason": "Reason for this entry",
}
SIGNAL_CHOICES = [("Danger", "Danger"), ("Warning", "Warning"), ("", "none (not classified)")]


def read_classification(form: Mapping[str, Any], pictograms: list[str], today: dt.date) -> tuple[hazards.Classification, str]:
    """The posted form as a Classification and its reason; InvalidInput naming every bad field.

    Concentrations in mol/L; codes typed separated by spaces or commas; effective_from today or later.
    """
    p = forms.parser()
    reagents = tuple(t.key for t in chemistry.list_titrants())
    reagent = p.choice(form.get("reagent") or None, "reagent", reagents)
    low = p.number(form.get("min_molarity"), "min_molarity", ge=0, unit="mol/L")
    high = p.number(form.get("max_molarity"), "max_molarity", required=False, gt=0, unit="mol/L")
    raw_word = form.get("signal_word")
    signal_word = "" if raw_word is None else str(raw_word).strip()
    h_codes = hazards.split_codes(str(form.get("hazard_statements") or ""))
    p_codes = hazards.split_codes(str(form.get("precautionary_statements") or ""))
    source = p.text(form.get("source_note"), "source_note", max_length=500)
    effective = forms.date(p, form.get("effective_from") or today.isoformat(), "effective_from", not_before=today)
    reason = p.text(form.get("reason"), "reason", max_length=500)
    chosen = [code.strip().upper() for code in pictograms if code.strip()]
    if reagent is not None and low is not None:
        for e in hazards.check(reagent, low, high, signal_word, chosen, h_codes, p_codes):
            if not p.has_error(e.field):
                p.error(e.field, e.message)
    p.raise_if_errors()
    assert reagent is not None and low is not None and source is not None and effective is not None
    assert reason is not None
    c = hazards.Classification(
        reagent=reagent,
        min_molarity=low,
        max_molarity=high,
        signal_word=signal_word,
        pictograms=tuple(sorted(set(chosen))),
        hazard_statements=hazards.statement_order(h_codes),
        precautionary_statements=hazards.statement_order(p_codes),
        source_note=source,
        effective_from=effective,
    )
    return c, reason


def _context(today: dt.date) -> dict[str, Any]:
    db = get_db()
    rows = records.classifications(db)
    current = hazards.in_force(rows, today)
    return {
        "current": [(c, hazards.label_elements(c)) for c in current],
        "upcoming": [c for c in rows if c.effective_from > today],
        "history": records.classification_rows(db),
        "reagents": [(t.key, f"{t.key} ({t.name})") for t in chemistry.list_titrants()],
        "signal_choices": SIGNAL_CHOICES,
        "drawn": [(code, hazards.PICTOGRAMS[code], pictogram_uri(code, 40)) for code in hazards.DRAWN],
        "uris": {code: pictogram_uri(code, 40) for code in hazards.DRAWN},
        "h_texts": hazards.HAZARD_TEXT,
        "p_texts": hazards.PRECAUTION_TEXT,
        "labels": HAZARD_LABELS,
        "today": today,
    }


@bp.route("/hazards", methods=["GET", "POST"])
@require("hazard.edit")
@once
def hazard_data() -> Any:
    today = lab_today()
    if request.method != "POST":  # HEAD answers like GET and never writes
        values = {"effective_from": today.isoformat(), "signal_word": "Warning", "min_molarity": "0"}
        return render_template("admin/hazards.html", values=values, errors={}, chosen=[], **_context(today))
    chosen = request.form.getlist("pictograms")
    try:
        c, reason = read_classification(request.form, chosen, today)
    except InvalidInput as exc:
        return forms.reshow("admin/hazards.html", exc, chosen=chosen, **_context(today))
    user = current_user()
    assert user is not None
    records.record_classification(get_db(), c, reason, user.username)
    flash(
        f"Recorded: {c.reagent} {c.band_text}, {c.signal_word or 'not classified'}, in force from "
        f"{c.effective_from.isoformat()}. Labels printed from then on use it.",
        "info",
    )
    return redirect(url_for("hazards_admin.hazard_data"), code=303)
