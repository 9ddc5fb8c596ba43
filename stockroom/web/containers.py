"""Where a batch went: dispensing into containers, losses of batch volume, a container's page, label and the CSV.

    GET/POST /batches/<code>/dispense          fill a container from the batch (the batch page carries the form)
    GET/POST /batches/<code>/volume-loss       record a loss or disposal of the batch's own volume, with a reason
    GET      /batches/<code>/dispensings.csv   every container filled from the batch
    GET      /containers/<code>                one container: its parent, status, destination, label
    POST     /containers/<code>/dispose        take a container out of use early, with a reason
    GET      /containers/<code>/label.pdf      the container's label

The form and POST /api/v1/batches/<code>/dispensings (web.api) read a dispensing with the one reader,
stock.read_dispensing, and record it with records.containers.dispense.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

import sqlite_utils
from flask import Blueprint, current_app, flash, redirect, render_template, request, url_for

from stockroom import csvsafe, readmodel, records, stock
from stockroom.db import get_db
from stockroom.errors import Conflict, InvalidInput
from stockroom.pdf import container_label
from stockroom.policy import BatchFacts, release_in_force, status_on
from stockroom.records import containers
from stockroom.web import csv_attachment, forms, lab_today, parse_date_arg
from stockroom.web.access import current_user, require
from stockroom.web.once import FIELD as ONCE_FIELD
from stockroom.web.once import once
from stockroom.web.printing import pdf_attachment

bp = Blueprint("containers", __name__)

LABELS = stock.LABELS
KIND_OPTIONS = [(k, k[:1].upper() + k[1:]) for k in stock.KINDS]
LOSS_LABELS = {"kind": "Kind", "volume_l": "Volume", "occurred_on": "Date", "reason": "Reason"}
LOSS_OPTIONS = [("loss", "Lost (spilt, evaporated, contaminated)"), ("disposal", "Disposed of (poured away)")]
_FORM_ONLY = ("csrf_token", ONCE_FIELD)


def form_data(form: Mapping[str, Any]) -> dict[str, Any]:
    """A submitted form's fields without the page's own (CSRF token, one-time form id)."""
    return {k: v for k, v in form.items() if k not in _FORM_ONLY}


def _actor() -> str:
    user = current_user()
    return user.username if user else "?"


def container_rows(db: sqlite_utils.Database, batch_id: int, facts: BatchFacts, on: dt.date) -> list[dict[str, Any]]:
    """The containers of a batch, each with its `state` (stock.ContainerState) and `destination` in words on `on`."""
    report = status_on(facts, on)
    out = []
    for c in containers.containers_of(db, batch_id):
        state = stock.container_state(
            report,
            dt.date.fromisoformat(c["filled_on"]),
            dt.date.fromisoformat(c["expires_on"]),
            dt.date.fromisoformat(c["disposed_on"]) if c["disposed_on"] else None,
            on,
        )
        out.append({**c, "state": state, "destination": stock.Destination.of(c).words()})
    return out


def batch_tracking(db: sqlite_utils.Database, batch: Mapping[str, Any], facts: BatchFacts, on: dt.date) -> dict[str, Any]:
    """The batch page's "Where it went": registered and remaining litres, the containers and the losses."""
    rows = container_rows(db, int(batch["id"]), facts, on)
    return {
        # Why nothing may be dispensed on the day shown (None: it may): the form is offered only then.
        "refusal": stock.dispensing_refusal(status_on(facts, on), release_in_force(facts, on)),
        "registered_l": float(batch["volume_l"]),
        "remaining_l": containers.volume_remaining_l(db, int(batch["id"])),
        "dispensed_l": sum(float(c["volume_l"]) for c in rows),
        "containers": rows,
        "losses": containers.losses_of(db, int(batch["id"])),
        "kinds": KIND_OPTIONS,
        "loss_kinds": LOSS_OPTIONS,
        "labels": LABELS,
    }


def container_json(c: Mapping[str, Any]) -> dict[str, Any]:
    """A container as the JSON API gives it (a container_rows entry)."""
    return {
        "id": c["id"],
        "code": c["code"],
        "kind": c["kind"],
        "volume_l": c["volume_l"],
        "filled_on": c["filled_on"],
        "expires_on": c["expires_on"],
        "destination": {"room": c["room"], "course": c["course"], "section": c["section"], "text": c["destination"]},
        "status": c["state"].status.value,
        "status_label": c["state"].status.label,
        "disposed_on": c["disposed_on"],
    }


def record_dispensing(
    db: sqlite_utils.Database, batch: Mapping[str, Any], data: Mapping[str, Any], *, form: bool
) -> dict[str, Any]:
    """Read (stock.read_dispensing) and record (records.containers.dispense) one dispensing: every door's path."""
    d = stock.read_dispensing(data, today=lab_today(), decimal_comma=form)
    return containers.dispense(db, batch, d, _actor(), facts_of=readmodel.batch_facts)


# --------------------------------------------------------------------------------------------- views


def _dispense_context(db: sqlite_utils.Database, batch: Mapping[str, Any]) -> dict[str, Any]:
    facts, today = readmodel.batch_facts(db, int(batch["id"])), lab_today()
    return {
        "refusal": stock.dispensing_refusal(status_on(facts, today), release_in_force(facts, today)),
        "batch": batch,
        "remaining_l": containers.volume_remaining_l(db, int(batch["id"])),
        "kinds": KIND_OPTIONS,
        "labels": LABELS,
    }


@bp.route("/batches/<code>/dispense", methods=["GET", "POST"])
@require("stock.dispense")
@once
def dispense(code: str) -> Any:
    """Fill a container from a batch: volume, date, kind and destination; one record with its audit entry."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    context = _dispense_context(db, batch)
    if request.method != "POST":
        return render_template("containers/dispense.html", values={"dispensed_on": lab_today().isoformat()}, errors={}, **context)
    try:
        row = record_dispensing(db, batch, form_data(request.form), form=True)
    except InvalidInput as exc:
        return forms.reshow("containers/dispense.html", exc, **context)
    except Conflict as exc:
        return render_template("containers/dispense.html", values=request.form, errors={}, conflict=exc.message, **context), 409
    flash(
        f"{row['code']} filled: {row['volume_l']:g} L for {stock.Destination.of(row).words()}, "
        f"use by {row['expires_on']}. Print its label from its page.",
        "ok",
    )
    return redirect(url_for("containers.show", code=row["code"]), 303)


@bp.route("/batches/<code>/volume-loss", methods=["GET", "POST"])
@require("stock.dispense")
@once
def volume_loss(code: str) -> Any:
    """Record a loss or disposal of a batch's own remaining volume, with the reason."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    context = _dispense_context(db, batch) | {"loss_kinds": LOSS_OPTIONS, "labels": LOSS_LABELS}
    if request.method != "POST":
        return render_template("containers/loss.html", values={"occurred_on": lab_today().isoformat()}, errors={}, **context)
    try:
        change = stock.read_volume_change(form_data(request.form), today=lab_today(), decimal_comma=True)
        containers.record_volume_change(db, batch, change, _actor())
    except InvalidInput as exc:
        return forms.reshow("containers/loss.html", exc, **context)
    flash(f"{change.volume_l:g} L recorded as {'lost' if change.kind == 'loss' else 'disposed of'}: {change.reason}", "ok")
    return redirect(url_for("batches.show", code=batch["code"], _anchor="where-it-went"), 303)


def _container_context(db: sqlite_utils.Database, code: str, on: dt.date) -> dict[str, Any]:
    c = containers.container_by_code(db, code)
    batch = records.batch_by_id(db, c["batch_id"])
    facts = readmodel.batch_facts(db, int(batch["id"]))
    row = next(r for r in container_rows(db, int(batch["id"]), facts, on) if r["id"] == c["id"])
    return {
        "container": row,
        "batch": batch,
        "batch_report": status_on(facts, on),
        "in_force": release_in_force(facts, on),
        "on": on,
        "labels": LABELS,
    }


@bp.get("/containers/<code>")
def show(code: str) -> str:
    db = get_db()
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    return render_template(
        "containers/show.html", values={"disposed_on": lab_today().isoformat()}, errors={}, **_container_context(db, code, on)
    )


@bp.post("/containers/<code>/dispose")
@require("stock.dispense")
@once
def dispose(code: str) -> Any:
    """Take a container out of use from a date, with the reason (once)."""
    db = get_db()
    context = _container_context(db, code, lab_today())
    c = context["container"]
    p = forms.parser()
    disposed_on = p.date(
        request.form.get("disposed_on"), "disposed_on", not_after=lab_today(), not_before=dt.date.fromisoformat(c["filled_on"])
    )
    reason = p.text(request.form.get("reason"), "reason", max_length=stock.MAX_REASON)
    try:
        p.raise_if_errors()
        assert disposed_on is not None and reason is not None
        containers.dispose_container(db, c, disposed_on, reason, _actor())
    except InvalidInput as exc:
        return forms.reshow("containers/show.html", exc, **context)
    except Conflict as exc:
        return render_template("containers/show.html", values=request.form, errors={}, conflict=exc.message, **context), 409
    flash(f"{c['code']} is out of use from {disposed_on.isoformat()}.", "ok")
    return redirect(url_for("containers.show", code=c["code"]), 303)


@bp.get("/containers/<code>/label.pdf")
def label(code: str) -> Any:
    db = get_db()
    c = containers.container_by_code(db, code)
    batch = records.batch_by_id(db, c["batch_id"])
    config = dict(current_app.config)
    config.setdefault("REQUEST_ROOT", request.host_url)
    pdf = container_label.container_label_pdf(db, config, c, batch, lab_today())
    return pdf_attachment(pdf, f"label-{c['code']}.pdf")


CSV_COLUMNS = (
    "container",
    "kind",
    "volume_l",
    "filled_on",
    "expires_on",
    "room",
    "course",
    "section",
    "status",
    "taken_out_of_use_on",
    "notes",
    "recorded_by",
)


def dispensings_csv(batch: Mapping[str, Any], tracking: Mapping[str, Any], on: dt.date) -> str:
    """A batch's dispensings as CSV: `# key: value` lines, then one row per container (volumes in L)."""
    out = csvsafe.SafeCsv()
    out.comment(f"stockroom dispensings of batch: {batch['code']}")
    out.comment(f"registered volume (L): {tracking['registered_l']:g}")
    out.comment(f"remaining (L): {tracking['remaining_l']:.3f}")
    out.comment(f"status as of: {on.isoformat()}")
    out.row(CSV_COLUMNS)
    for c in tracking["containers"]:
        out.row(
            [
                c["code"],
                c["kind"],
                c["volume_l"],
                c["filled_on"],
                c["expires_on"],
                c["room"],
                c["course"],
                c["section"],
                c["state"].status.label,
                c["disposed_on"] or "",
                c["notes"],
                c["recorded_by"],
            ]
        )
    return out.text()


@bp.get("/batches/<code>/dispensings.csv")
def export_dispensings(code: str) -> Any:
    db = get_db()
    on = lab_today()
    batch = records.batch_by_code(db, code)
    tracking = batch_tracking(db, batch, readmodel.batch_facts(db, int(batch["id"])), on)
    return csv_attachment(dispensings_csv(batch, tracking, on), f"{batch['code']}-dispensings.csv")
