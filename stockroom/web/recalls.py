"""Recalls in the browser, and the traceability chain of a batch.

    GET      /recalls/                    every recall: what is suspect, from when, what it reaches
    GET/POST /recalls/new                 mark a lot, an instrument or a batch as suspect (?subject=lot:3)
    GET      /recalls/<id>                the impact report
    GET      /recalls/<id>.csv, .pdf      the report to download
    POST     /recalls/<id>/clear          clear it, with the reason, for one batch or as a whole
    GET      /batches/<code>/chain.svg    the drawn chain of a batch's value

Opening and clearing need `recall.manage` (prep staff and administrators). The batch page asks
`traceability_of(batch, on)` (a template global) for its chain panel.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from flask import Blueprint, Response, flash, redirect, render_template, request, url_for
from markupsafe import Markup

from stockroom import recall as recall_mod
from stockroom import records, traceability
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.pdf import chain_drawing
from stockroom.pdf.recall_report import recall_report_pdf
from stockroom.web import csv_attachment, forms, lab_today, parse_date_arg
from stockroom.web.access import current_user, require
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("recalls", __name__, url_prefix="/recalls")
trace_bp = Blueprint("traceability", __name__)

LABELS = {
    "subject": "Suspect item",
    "suspect_from": "Suspect from",
    "reason": "Reason",
    "scope": "Clear for",
    "clear_reason": "Reason for clearing",
}
KIND_TITLES = {"lot": "Primary-standard lots", "instrument": "Instruments", "batch": "Batches"}


def _subject_groups() -> list[tuple[str, list[tuple[str, str]]]]:
    options = recall_mod.subject_options(get_db())
    return [(KIND_TITLES[k], options[k]) for k in ("lot", "instrument", "batch")]


def _read_subject(p: Parser, raw: Any) -> tuple[str, int] | None:
    text = (raw or "").strip() if isinstance(raw, str) else ""
    kind, _, sid = text.partition(":")
    if not text:
        p.error("subject", "is required: choose the lot, instrument or batch that is suspect")
        return None
    if kind not in recall_mod.SUBJECT_LABELS or not sid.isdigit():
        p.error("subject", "choose the suspect item from the list")
        return None
    return kind, int(sid)


@bp.get("/")
def list_recalls() -> str:
    db = get_db()
    today = lab_today()
    recalls = recall_mod.list_recalls(db)
    graph = recall_mod.read_reach_graph(db, [rc.suspect for rc in recalls])  # what the recalls reach, not every release
    releases = recall_mod.reached_release_ids(graph, recalls)
    batches = recall_mod.reached_batch_ids(graph, recalls)
    return render_template("recalls/list.html", recalls=recalls, releases=releases, batches=batches, today=today)


@bp.route("/new", methods=["GET", "POST"])
@require("recall.manage")
@once
def new_recall() -> Any:
    today = lab_today()
    context: dict[str, Any] = {"groups": _subject_groups(), "labels": LABELS, "today": today}
    if request.method != "POST":  # HEAD answers like GET and never writes
        values = {"subject": request.args.get("subject", ""), "suspect_from": request.args.get("suspect_from", "")}
        return render_template("recalls/new.html", values=values, errors={}, **context)
    form = request.form
    p = Parser()
    subject = _read_subject(p, form.get("subject"))
    suspect_from = forms.date(p, form.get("suspect_from"), "suspect_from", not_after=today)
    reason = p.text(form.get("reason"), "reason", max_length=1000)
    try:
        p.raise_if_errors()
        assert subject is not None and suspect_from is not None and reason is not None
        user = current_user()
        assert user is not None
        rid = recall_mod.open_recall(get_db(), subject[0], subject[1], suspect_from, reason, today, user.username)
    except InvalidInput as exc:
        return forms.reshow("recalls/new.html", exc, **context)
    flash(f"Recall {rid} recorded. Below is everything that rests on the suspect item.", "ok")
    return redirect(url_for("recalls.show", recall_id=rid), 303)


def _report(recall_id: int) -> recall_mod.Impact:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    return recall_mod.impact(get_db(), recall_id, on)


@bp.get("/<int:recall_id>")
def show(recall_id: int) -> Any:
    report = _report(recall_id)
    return render_template(
        "recalls/show.html", report=report, rc=report.recall, values={}, errors={}, labels=LABELS, today=lab_today()
    )


@bp.get("/<int:recall_id>.csv")
def report_csv(recall_id: int) -> Response:
    report = _report(recall_id)
    name = f"recall-{recall_id}-impact-{report.on.isoformat()}.csv"
    return csv_attachment(recall_mod.impact_csv(report), name)


@bp.get("/<int:recall_id>.pdf")
def report_pdf(recall_id: int) -> Response:
    report = _report(recall_id)
    name = f"recall-{recall_id}-impact-{report.on.isoformat()}.pdf"
    return Response(
        recall_report_pdf(report, printed_on=lab_today()),
        mimetype="application/pdf",
        headers={"Content-Disposition": f'inline; filename="{name}"'},
    )


@bp.post("/<int:recall_id>/clear")
@require("recall.manage")
@once
def clear(recall_id: int) -> Any:
    db = get_db()
    today = lab_today()
    report = recall_mod.impact(db, recall_id, today)
    p = Parser()
    scope = (request.form.get("scope") or "").strip()
    batch_id: int | None = None
    if not scope:
        p.error("scope", "choose the batch to clear, or the whole recall")
    elif scope != "all":
        found = next((b for b in report.batches if b.code == scope), None)
        if found is None:
            p.error("scope", f"{scope[:40]} is not a batch this recall reaches")
        else:
            batch_id = found.batch_id
    reason = p.text(request.form.get("clear_reason"), "clear_reason", max_length=1000)
    try:
        p.raise_if_errors()
        assert reason is not None
        user = current_user()
        assert user is not None
        recall_mod.clear_recall(db, recall_id, batch_id, today, reason, user.username)
    except InvalidInput as exc:
        fields = {("clear_reason" if k == "reason" else "scope" if k == "batch" else k): v for k, v in exc.fields.items()}
        return render_template(
            "recalls/show.html", report=report, rc=report.recall, values=request.form, errors=fields, labels=LABELS, today=today
        ), 422
    flash("Recall cleared" + (f" for {scope}." if batch_id else " as a whole.") + " The reason is on record.", "ok")
    return redirect(url_for("recalls.show", recall_id=recall_id), 303)


# --------------------------------------------------------------------------------------------- the chain


def _hrefs(chain: traceability.Chain) -> dict[str, str]:
    out = {}
    for step in chain.steps:
        out[step.release.key] = url_for("batches.show", code=step.release.label)
        for _, inst in step.instruments:
            out[inst.key] = url_for("instruments.show", instrument_id=inst.id)
    if chain.origin is not None:
        out[chain.origin.key] = url_for("lots.show", code=chain.origin.label)
    return out


def _svg(trace: recall_mod.BatchTrace, code: str) -> str:
    return chain_drawing.chain_svg(
        trace.chain, hrefs=_hrefs(trace.chain), suspect=trace.suspect, title=f"What the certified value of {code} rests on"
    )


@trace_bp.app_template_global("traceability_of")
def traceability_of(batch: dict[str, Any], on: dt.date) -> dict[str, Any] | None:
    """The batch page's chain panel: trace (recall.BatchTrace), svg (inline markup), recalls by id; or None."""
    db = get_db()
    trace = recall_mod.batch_trace(db, batch["id"], on)
    if trace is None:
        return None
    ids = sorted({rv.recall_id for rv in trace.reviews})
    return {
        "trace": trace,
        "svg": Markup(_svg(trace, batch["code"])),  # chain_drawing.chain_svg escapes every text it writes
        "recalls": {rc.id: rc for rc in recall_mod.list_recalls(db, ids)} if ids else {},
    }


@trace_bp.get("/batches/<code>/chain.svg")
def chain_svg(code: str) -> Response:
    """The drawn chain of a batch's value as of ?on= (default today), as an SVG file."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    trace = recall_mod.batch_trace(db, batch["id"], on)
    if trace is None:
        from stockroom.errors import NotFound

        raise NotFound(f"batch {code} has no certified value by {on.isoformat()}, so it has no chain")
    resp = Response(_svg(trace, code), mimetype="image/svg+xml")
    resp.headers["Content-Security-Policy"] = "default-src 'none'"
    resp.headers["Cache-Control"] = "no-cache"
    return resp
