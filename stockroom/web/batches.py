"""The batch register: a filterable list and one page per batch with its whole history."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, flash, redirect, render_template, request, url_for

from stockroom import chemistry, readmodel, records
from stockroom.db import get_db
from stockroom.policy import URGENCY, release_in_force
from stockroom.web import containers as web_containers
from stockroom.web import forms, int_arg, lab_today, parse_date_arg
from stockroom.web import runs as web_runs
from stockroom.web.access import current_user, require
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("batches", __name__, url_prefix="/batches")

PAGE_SIZE = 50
# A search of the register: codes, names and notes, at most 100 characters; pages past 10^5 (five
# million batches) are no page anyone reached by following links.
MAX_SEARCH = 100
MAX_PAGE = 100_000


@bp.get("/")
def list_batches() -> str:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    reagent = request.args.get("reagent") or None
    status = request.args.get("status") or None
    p = Parser()
    # The search is literal text: readmodel.batch_page escapes LIKE's % and _ so that they match themselves.
    search = p.text(request.args.get("q"), "q", required=False, max_length=MAX_SEARCH)
    p.raise_if_errors()
    page = int_arg("page", 1, ge=1, le=MAX_PAGE)
    db = get_db()
    shown, total = readmodel.batch_page(
        db, on, reagent=reagent, status=status, search=search, limit=PAGE_SIZE, offset=(page - 1) * PAGE_SIZE
    )
    pages = max(1, -(-total // PAGE_SIZE))
    if page > pages:  # past the end: show the last page
        page = pages
        shown, total = readmodel.batch_page(
            db, on, reagent=reagent, status=status, search=search, limit=PAGE_SIZE, offset=(page - 1) * PAGE_SIZE
        )
    return render_template(
        "batches/list.html",
        views=shown,
        on=on,
        reagent=reagent,
        status=status,
        q=search or "",
        statuses=URGENCY,
        reagents=[t.key for t in chemistry.list_titrants()],
        page=page,
        pages=pages,
        total=total,
    )


@bp.get("/<code>")
def show(code: str) -> str:
    db = get_db()
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    batch = records.batch_by_code(db, code)
    facts = readmodel.batch_facts(db, batch["id"])
    from stockroom.policy import status_on

    report = status_on(facts, on)
    history = readmodel.batch_history(db, batch["id"])
    return render_template(
        "batches/show.html",
        batch=batch,
        report=report,
        history=history,
        on=on,
        in_force=release_in_force(facts, on),
        titrant=chemistry.titrant(batch["reagent"]),
        amend_labels=_AMEND_LABELS,
        preparation=records.preparation_of(db, batch["id"]),
        against={r["id"]: a for r in history["runs"] if (a := web_runs.against_release(facts, r)) is not None},
        tracking=web_containers.batch_tracking(db, batch, facts, on),
    )


_AMEND_LABELS = {
    "volume_l": "Volume (L)",
    "prepared_by": "Prepared by",
    "concentrate_lot": "Concentrate lot",
    "concentrate_assay_w_w": "Concentrate assay (mass fraction)",
    "concentrate_density_g_ml": "Concentrate density (g/mL)",
    "water_grade": "Water",
    "container": "Container",
    "notes": "Notes",
}
_AMEND_NUMERIC = {"volume_l": (0.1, 50.0), "concentrate_assay_w_w": (0.01, 1.0), "concentrate_density_g_ml": (0.8, 2.5)}


@bp.post("/<code>/amend")
@require("batch.register")
@once
def amend(code: str) -> Any:
    """Correct one descriptive detail of a batch, with a reason; the original entry stays as written."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    p = forms.parser()
    name = p.choice(request.form.get("field") or None, "field", records.AMENDABLE_BATCH_FIELDS)
    reason = p.text(request.form.get("reason") or None, "reason", max_length=500)
    raw = request.form.get("new_value")
    value: Any = None
    if name in _AMEND_NUMERIC:
        low, high = _AMEND_NUMERIC[name]
        value = p.number(raw or None, "new_value", ge=low, le=high)
    elif name is not None:
        value = (
            p.text(
                raw,
                "new_value",
                required=name not in ("notes", "concentrate_lot", "container", "water_grade"),
                max_length=2000 if name == "notes" else 120,
                multiline=name == "notes",
            )
            or ""
        )
    p.raise_if_errors()
    user = current_user()
    assert name is not None and reason is not None
    records.amend_batch(db, batch["id"], name, value, reason, user.username if user else "?")
    flash(f"{_AMEND_LABELS[name]} corrected; the earlier value and your reason stay on record.", "ok")
    return redirect(url_for("batches.show", code=code), 303)
