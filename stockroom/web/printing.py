"""Labels and certificates from the batch page.

    GET/POST /batches/<code>/labels           choose a layout, copies and start position; POST records the
                                              print (label.print) and answers with the PDF
    GET      /label-prints/<id>.pdf           the PDF of a recorded print, built again (same serials), while
                                              a label would still show what that print showed
    GET      /releases/<id>/certificate.pdf   the certificate of standardization of one release
    GET      /batches/<code>/certificate.pdf  the certificate of the release in force (else the latest)

The batch page asks `labels_in_circulation(...)` (a template global) whether printed labels show a value
other than the one a label printed now would show, and offers the reprint.
"""

from __future__ import annotations

import base64
from collections.abc import Mapping, Sequence
from typing import Any

from flask import Blueprint, Response, current_app, redirect, render_template, request, url_for

from stockroom import db as dbmod
from stockroom import readmodel, records
from stockroom.db import get_db
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.pdf import certificates, ghs, layouts
from stockroom.pdf import labels as pdflabels
from stockroom.policy import Status, release_in_force, status_on
from stockroom.web import forms, lab_today
from stockroom.web import once as once_mod
from stockroom.web.access import current_user, require
from stockroom.web.forms import field
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("printing", __name__)

DEFAULT_LAYOUT = "carboy-a5"
PRINT_LABELS = {"layout": "Layout", "copies": "Copies", "start": "Start at position"}


def pictogram_uri(code: str, size_px: int = 56) -> str:
    """A data: URI of the pictogram's SVG, for an <img> (the pages' CSP allows data: images)."""
    return "data:image/svg+xml;base64," + base64.b64encode(ghs.svg(code, size_px).encode("utf-8")).decode("ascii")


def safe_filename(text: str) -> str:
    """A file name of letters, digits, '-', '_' and '.', for Content-Disposition."""
    return "".join(ch if ch.isascii() and (ch.isalnum() or ch in "-_.") else "_" for ch in text)[:120] or "file"


def pdf_attachment(pdf: bytes, filename: str) -> Response:
    """A PDF download named `filename` (made safe), never cached."""
    resp = Response(pdf, mimetype="application/pdf")
    resp.headers["Content-Disposition"] = f'attachment; filename="{safe_filename(filename)}"'
    resp.headers["Cache-Control"] = "no-store"
    return resp


@bp.app_template_global("labels_in_circulation")
def labels_in_circulation(history: Mapping[str, Any], in_force: Any, status: Status) -> dict[str, Any] | None:
    """What the batch page says about printed labels: None when every print shows what a new one would.

    history: readmodel.batch_history(...); in_force: the ReleaseFact in force (or None); status: the
    batch's status. Returns the current text, the stale prints, their copies and serial ranges, and
    whether a print with the current value was made after the last stale one (the reprint).
    """
    prints = list(history.get("prints") or [])
    if not prints:
        return None
    current = pdflabels.current_value_text(history, in_force, status)
    stale = pdflabels.stale_prints(prints, current)
    if not stale:
        return None
    last_stale = max(p["id"] for p in stale)
    reprinted = any(p["id"] > last_stale and p["value_printed"] == current for p in prints)
    return {
        "current": current,
        "current_is_value": in_force is not None,
        "stale": stale,
        "copies": sum(p["copies"] for p in stale),
        "shown": sorted({p["value_printed"] for p in stale}),
        "serials": ", ".join(_serial_range(p) for p in stale),
        "reprinted": reprinted,
    }


def _label_config() -> dict[str, Any]:
    """The app's settings plus REQUEST_ROOT, the address this page was reached at: label QR codes use
    it when BASE_URL is empty, so a label printed from the web carries the address its printer used."""
    return dict(current_app.config, REQUEST_ROOT=request.host_url)


def _serial_range(p: Mapping[str, Any]) -> str:
    first, last = pdflabels.format_serial(p["serial_first"]), pdflabels.format_serial(p["serial_last"])
    return first if first == last else f"{first}–{last}"


def _context(
    batch: Mapping[str, Any], available: Mapping[str, layouts.Layout], broken: Sequence[layouts.LayoutError]
) -> dict[str, Any]:
    db = get_db()
    on = lab_today()
    content, problem = None, None
    try:
        content = pdflabels.label_content(db, _label_config(), batch, on)
    except Conflict as exc:
        problem = exc.message
    if records.registration_in_error_of(db, batch["id"]) is not None:
        problem = f"{batch['code']} is marked registered in error: no label is printed for it"
    history = readmodel.batch_history(db, batch["id"])
    facts = readmodel.batch_facts(db, batch["id"])
    report = status_on(facts, on)
    in_force = release_in_force(facts, on)
    current = pdflabels.current_value_text(history, in_force, report.status)
    prints = [
        dict(
            p,
            serials=_serial_range(p),
            current=p["value_printed"] == current,
            layout_title=available[p["layout"]].title if p["layout"] in available else p["layout"],
        )
        for p in reversed(history["prints"])
    ]
    return {
        "batch": batch,
        "content": content,
        "problem": problem,
        "layouts": list(available.values()),
        "broken": broken,
        "labels": PRINT_LABELS,
        "prints": prints,
        "report": report,
        "pictograms": [(code, ghs.name(code), pictogram_uri(code)) for code in (content.elements.pictograms if content else ())],
        "circulation": labels_in_circulation(history, in_force, report.status),
        "has_release": bool(history["releases"]),
        "max_copies": pdflabels.MAX_COPIES,
    }


def _read_print_form(
    form: Mapping[str, Any], available: Mapping[str, layouts.Layout]
) -> tuple[layouts.Layout | None, int | None, int | None, Parser]:
    p = Parser()
    name = p.choice(field("layout"), "layout", tuple(available))
    copies = p.integer(field("copies"), "copies", ge=1, le=pdflabels.MAX_COPIES)
    layout = available.get(name) if name else None
    start = p.integer(field("start") or "1", "start", ge=1, le=layout.per_page if layout else None)
    return layout, copies, start, p


@bp.route("/batches/<code>/labels", methods=["GET", "POST"])
@require("label.print")
@once
def print_labels(code: str) -> Any:
    db = get_db()
    batch = records.batch_by_code(db, code)
    available, broken = layouts.load_all()
    ctx = _context(batch, available, broken)
    if request.method != "POST":  # HEAD answers like GET and never writes
        wanted = request.args.get("layout")
        values = {
            "layout": wanted
            if wanted in available
            else (DEFAULT_LAYOUT if DEFAULT_LAYOUT in available else next(iter(available), "")),
            "copies": request.args.get("copies", "1"),
            "start": "1",
        }
        printed = _printed(batch, available, request.args.get("printed"), request.args.get("start"))
        return render_template("printing/labels.html", values=values, errors={}, printed=printed, **ctx)
    layout, copies, start, p = _read_print_form(request.form, available)
    if ctx["problem"]:
        p.error("_", ctx["problem"])
    try:
        p.raise_if_errors()
        assert layout is not None and copies is not None and start is not None
        user = current_user()
        assert user is not None
        job = pdflabels.print_labels(db, _label_config(), batch, layout, copies, start, user.username, lab_today())
    except pdflabels.LabelOverflow as exc:
        return _reshow(ctx, InvalidInput([FieldError("layout", exc.message)]))
    except InvalidInput as exc:
        return _reshow(ctx, exc)
    if request.form.get("then") == "confirm":
        # The page's own form: answer with the page confirming what was printed, which downloads the
        # PDF by itself (and offers it again); a second submission lands on the same confirmation.
        return redirect(url_for("printing.print_labels", code=batch["code"], printed=job.record["id"], start=start), 303)
    once_mod.made()  # a second submission is sent to this page (its list of prints), not printed again
    return pdf_attachment(job.pdf, _print_filename(batch, job.record))


def _print_filename(batch: Mapping[str, Any], row: Mapping[str, Any]) -> str:
    return f"labels-{batch['code']}-{pdflabels.format_serial(row['serial_first'])}.pdf"


def _print_row(batch: Mapping[str, Any], print_id: int) -> dict[str, Any]:
    rows = dbmod.query(get_db(), "SELECT * FROM label_prints WHERE id = ? AND batch_id = ?", [print_id, batch["id"]])
    if not rows:
        raise NotFound(f"{batch['code']} has no such label print")
    return rows[0]


def _printed(
    batch: Mapping[str, Any], available: Mapping[str, layouts.Layout], raw_id: str | None, raw_start: str | None
) -> dict[str, Any] | None:
    """The confirmation of a print just made (?printed=<id>&start=<n>), or None when none was asked for."""
    if not raw_id:
        return None
    p = Parser()
    print_id = p.integer(raw_id, "printed", ge=1)
    start = p.integer(raw_start or "1", "start", ge=1, le=1000)
    p.raise_if_errors()
    assert print_id is not None and start is not None
    row = _print_row(batch, print_id)
    layout = available.get(row["layout"])
    return dict(
        row,
        serials=_serial_range(row),
        layout_title=layout.title if layout else row["layout"],
        pdf_url=url_for("printing.print_pdf", print_id=print_id, start=start),
    )


@bp.get("/label-prints/<int:print_id>.pdf")
@require("label.print")
def print_pdf(print_id: int) -> Response:
    """A recorded print's PDF, built again with its own serials; 409 once a label would show another value."""
    db = get_db()
    rows = dbmod.query(db, "SELECT * FROM label_prints WHERE id = ?", [print_id])
    if not rows:
        raise NotFound(f"no label print with id {print_id}")
    row = rows[0]
    batch = records.batch_by_id(db, row["batch_id"])
    p = Parser()
    start = p.integer(request.args.get("start") or "1", "start", ge=1, le=1000)
    p.raise_if_errors()
    available, _ = layouts.load_all()
    layout = available.get(row["layout"])
    if layout is None:
        raise Conflict(f"the layout {row['layout']} of this print is no longer installed; print again with another")
    content = pdflabels.label_content(db, _label_config(), batch, lab_today())
    if content.certified != row["value_printed"] or content.release_id != row["release_id"]:
        raise Conflict(
            f"a label of {batch['code']} would now show {content.certified}, not {row['value_printed']} as this print "
            "did: print again from the labels page"
        )
    assert start is not None
    pdf = pdflabels.build_labels(content, layout, row["copies"], min(start, layout.per_page), row["serial_first"])
    return pdf_attachment(pdf, _print_filename(batch, row))


def _reshow(ctx: dict[str, Any], exc: InvalidInput) -> tuple[str, int]:
    return forms.render_form("printing/labels.html", values=request.form, errors=exc.fields, **ctx), 422


@bp.get("/releases/<int:release_id>/certificate.pdf")
def release_certificate(release_id: int) -> Response:
    data = certificates.certificate_data(get_db(), release_id, lab_today())
    data["curve_k"] = float(current_app.config["COVERAGE_FACTOR"])  # the end points' ±U, as the run page draws them
    pdf = certificates.build_certificate(data, institution=str(current_app.config.get("INSTITUTION_NAME") or ""))
    return pdf_attachment(pdf, f"certificate-{data['batch']['code']}-release-{data['release_number']}.pdf")


@bp.get("/batches/<code>/certificate.pdf")
def batch_certificate(code: str) -> Response:
    data = certificates.certificate_data_for_batch(get_db(), code, lab_today())
    data["curve_k"] = float(current_app.config["COVERAGE_FACTOR"])  # the end points' ±U, as the run page draws them
    pdf = certificates.build_certificate(data, institution=str(current_app.config.get("INSTITUTION_NAME") or ""))
    return pdf_attachment(pdf, f"certificate-{data['batch']['code']}-release-{data['release_number']}.pdf")
