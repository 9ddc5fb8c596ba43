"""Standardization runs in the browser: the replicate grid, recording, exclusions and decisions, CSV."""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

from flask import (
    Blueprint,
    Response,
    current_app,
    flash,
    redirect,
    render_template,
    request,
    url_for,
)
from markupsafe import Markup

from stockroom import chemistry, csvio, drift, formatting, readmodel, records, run_input, standardization, workflow
from stockroom.db import get_db
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound, StockroomError
from stockroom.pdf import curve_drawing
from stockroom.policy import expiry_for, release_in_force
from stockroom.web import csv_attachment, lab_today
from stockroom.web import instruments as web_instruments
from stockroom.web.access import current_user, require
from stockroom.web.forms import date as form_date
from stockroom.web.forms import field
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("runs", __name__)

GRID_ROWS = 6  # rows offered without JavaScript; the script adds more on demand


def _lots_for(batch: dict[str, Any], on: dt.date) -> list[dict[str, Any]]:
    titrant = chemistry.titrant(batch["reagent"])
    keys = {s.key for s in chemistry.list_standards(titrant)}
    return [
        lot for lot in records.list_lots(get_db()) if lot["substance"] in keys and dt.date.fromisoformat(lot["expires_on"]) >= on
    ]


def _references_for(batch: dict[str, Any], on: dt.date) -> list[tuple[dict[str, Any], Any]]:
    """Certified batches of a titrant that reacts with this one, with a value in force on `on` (references)."""
    db = get_db()
    titrant = chemistry.titrant(batch["reagent"])
    # Only live batches (released, not expired or withdrawn) can have a value in force; their release
    # in the status report is that value.
    live = [i for i, _, _ in readmodel.coarse_statuses(db, on, only=("live",)) if i != batch["id"]]
    out = []
    for v in readmodel.views_of(db, live, on):
        try:
            if not chemistry.reacts(titrant, chemistry.titrant(v.batch["reagent"])):
                continue
        except StockroomError:
            continue
        if v.report.release is not None:
            out.append((v.batch, v.report.release))
    return out


def _form_context(batch: dict[str, Any], method: str, purpose: str, on: dt.date) -> dict[str, Any]:
    db = get_db()
    facts = readmodel.batch_facts(db, batch["id"])
    policy = records.policy_for(db, batch["reagent"], on)
    titrant = chemistry.titrant(batch["reagent"])
    return {
        "batch": batch,
        "method": method,
        "purpose": purpose,
        "titrant": titrant,
        "policy": policy,
        "lots": _lots_for(batch, on) if method == "primary" else [],
        "references": _references_for(batch, on) if method == "secondary" else [],
        "in_force": release_in_force(facts, on),
        "burettes": run_input.LIMITS.burettes_ml,
        "grid_columns": run_input.GRID_COLUMNS[method],
        "path_aliases": run_input.PATH_ALIASES,
        "instrument_choices": web_instruments.run_choices(method, on),
        "instrument_figures": web_instruments.preview_figures(method, on),
        "rows": GRID_ROWS,
        "curve_readings": list(run_input.CURVE_READINGS.items()),
        "curve_methods": list(run_input.CURVE_METHODS.items()),
        "curve_limits": {
            "min": run_input.LIMITS.min_curve_points,
            "max": run_input.LIMITS.max_curve_points,
            "max_u": f"{run_input.LIMITS.curve_titre_max_u:g}",
        },
        "today": on,
        "standards": {s.key: s for s in chemistry.list_standards(titrant)},
        "pair_notes": chemistry.pair_notes(titrant),
        # Mass of each standard that gives a 40 mL titre at the nominal strength (a 50 mL burette).
        "suggested": {
            s.key: chemistry.suggested_standard_mass(titrant, s, batch["nominal_molarity"], 40.0)
            for s in chemistry.list_standards(titrant)
        },
    }


# ---------------------------------------------------------------- views


def _method_arg() -> str:
    method = request.values.get("method", "primary")
    return method if method in ("primary", "secondary") else "primary"


def _prepared_on(batch: dict[str, Any]) -> dt.date:
    return dt.date.fromisoformat(batch["prepared_on"])


def _render_form(ctx: dict[str, Any], values: Any, errors: list[FieldError], rows: list[int] | None, **extra: Any) -> str:
    """The run form with each error beside its field (form names) and listed by the form's labels."""
    shown = run_input.form_errors(errors, rows)
    by_field: dict[str, str] = {}
    for name, _label, message in shown:
        by_field.setdefault(name, message)
    boxes = _override_boxes(extra.get("result"), values, by_field)
    return render_template(
        "runs/new.html", values=values, errors=by_field, error_list=shown, override_boxes=boxes, **ctx, **extra
    )


def _override_boxes(result: Any, values: Any, errors: dict[str, str]) -> list[tuple[str, str]]:
    """(check code, message) for each reason box the form shows: every overridable check the computed
    result raised, and any override already typed or refused (so a bad reason is shown beside its box)."""
    boxes: dict[str, str] = {}
    for c in (result or {}).get("checks") or []:
        boxes.setdefault(str(c.get("code")), str(c.get("message")))
    for code, what in standardization.OVERRIDABLE_CHECKS.items():
        name = run_input.override_path(code)
        if code not in boxes and (str(values.get(name) or "").strip() or name in errors):
            boxes[code] = what[:1].upper() + what[1:]
    return list(boxes.items())


@bp.route("/batches/<code>/runs/new", methods=["GET", "POST"])
@require("run.record")
@once
def new_run(code: str) -> Any:
    db = get_db()
    batch = records.batch_by_code(db, code)
    workflow.check_not_withdrawn(db, batch)
    method = _method_arg()
    today = lab_today()
    user = current_user()
    defaults: dict[str, Any] = {
        "performed_on": today.isoformat(),
        "analyst": user.display_name if user else "",
        "burette_capacity_ml": "50.0",
        "method": method,
    }
    ctx = _form_context(batch, method, "certify", today)
    defaults["purpose"] = request.args.get("purpose") or ("recheck" if ctx["in_force"] else "certify")
    if request.method != "POST":  # HEAD answers like GET and never writes
        return _render_form(ctx, defaults, [], None, result=None)
    form = request.form
    data = run_input.from_form(form)
    data["method"] = method
    rows = run_input.from_form_rows(form)
    ctx["purpose"] = form.get("purpose") if form.get("purpose") in run_input.PURPOSES else "certify"
    # Rows the script added (a reading or a curve in row 7 and on) are shown again with the form.
    ctx["rows"] = min(max([GRID_ROWS, *rows]), run_input.LIMITS.max_replicates)
    actor = user.username if user else "?"
    try:
        run = run_input.parse_run(data, today=today, prepared_on=_prepared_on(batch), decimal_comma=True)
        if form.get("action") != "record":
            # "Compute" without JavaScript: show the same result the live preview shows, store nothing.
            result = workflow.compute_run(db, current_app.config, batch, run)
            return _render_form(ctx, form, [], rows, result=workflow.snapshot(result))
        run_id, _ = workflow.record_run(db, current_app.config, batch, run, actor)
    except InvalidInput as exc:
        return _render_form(ctx, form, exc.errors, rows, result=None), 422
    except Conflict:
        raise
    except StockroomError as exc:
        return _render_form(ctx, form, [FieldError("_", exc.message)], rows, result=None), 422
    flash(f"Run recorded for {batch['code']}. Review it, then accept or reject it.", "ok")
    return redirect(url_for("runs.show", run_id=run_id), 303)


@bp.get("/runs/<int:run_id>")
def show(run_id: int) -> Any:
    db = get_db()
    run = records.run_by_id(db, run_id)
    batch = records.batch_by_id(db, run["batch_id"])
    lot = records.lot_by_id(db, run["standard_lot_id"]) if run["standard_lot_id"] else None
    reference = records.batch_by_id(db, run["reference_batch_id"]) if run["reference_batch_id"] else None
    from stockroom import instruments

    used = instruments.instruments_of_run(db, run_id)
    today = lab_today()
    return render_template(
        "runs/show.html",
        run=run,
        batch=batch,
        lot=lot,
        reference=reference,
        used=used,
        result=run["current"]["result"],
        today=today,
        excluded={e["position"]: e for e in run["exclusions"]},
        in_force=release_in_force(readmodel.batch_facts(db, batch["id"]), lab_today()),
        against=recheck_against(db, run),
        expiry=expiry_preview(db, run, batch, today),
        curves=curve_figures(run["replicates"], float(current_app.config["COVERAGE_FACTOR"])),
    )


def curve_figures(replicates: list[dict[str, Any]], k: float) -> list[dict[str, Any]]:
    """Each stored curve of a run drawn (inline SVG) with the words of its caption; k: the coverage factor."""
    out = []
    for rep in replicates:
        curve = rep.get("curve")
        if not curve:
            continue
        method = run_input.CURVE_METHODS.get(curve["method"], curve["method"])
        U = k * float(curve["u_ml"])
        svg = curve_drawing.curve_svg(
            curve["points"],
            reading=curve["reading"],
            volume_ml=float(curve["volume_ml"]),
            U_ml=U,
            k=k,
            method=method,
            title=f"Replicate {rep['position']}: titration curve",
            key=f"r{rep['position']}",
        )
        parts = [f"the step {formatting.quantity(curve['u_step_ml'], 'mL', 3)}"] if curve.get("u_step_ml") else []
        if curve.get("u_noise_ml") is not None:
            parts.append(f"the reading noise {formatting.quantity(curve['u_noise_ml'], 'mL', 3)}")
        if curve.get("u_fit_ml") is not None:
            parts.append(f"the line's fit {formatting.quantity(curve['u_fit_ml'], 'mL', 3)}")
        out.append(
            {
                "position": rep["position"],
                "svg": Markup(svg),  # renderSVG escapes the drawing's strings; title and desc are escaped in curve_svg
                "located": formatting.volume_u(float(curve["volume_ml"]), U, k),
                "method": method,
                "points": len(curve["points"]),
                "reading": run_input.CURVE_READINGS.get(curve["reading"], curve["reading"]),
                "u_parts": parts,
                "titre_from_curve": rep.get("initial_ml") is None,
            }
        )
    return out


def recheck_against(db: Any, run: dict[str, Any]) -> dict[str, Any] | None:
    """A re-check's result against the certified value in force on the day it was performed, or None.

    Returns the release (ReleaseFact), the deviation in mol/L and as a fraction of the certified value,
    the tolerance (a fraction, from the release's policy) and whether the result lies within it.
    """
    if run["purpose"] != "recheck" or run["current"] is None:
        return None
    return against_release(readmodel.batch_facts(db, run["batch_id"]), run)


def against_release(facts: Any, run: Mapping[str, Any]) -> dict[str, Any] | None:
    """recheck_against with the batch's facts already read (a batch page reads them once for all its runs)."""
    if run["purpose"] != "recheck" or not run.get("current"):
        return None
    rel = release_in_force(facts, dt.date.fromisoformat(run["performed_on"]))
    if rel is None:
        return None
    band = drift.Band(rel.molarity, rel.tolerance_rel)
    measured = float(run["current"]["molarity"])
    return {
        "release": rel,
        "difference": measured - rel.molarity,
        "relative": band.deviation(measured),
        "tolerance_rel": rel.tolerance_rel,
        "within": band.contains(measured),
    }


def expiry_preview(db: Any, run: dict[str, Any], batch: dict[str, Any], today: dt.date) -> dict[str, Any] | None:
    """For an undecided certifying run: the expiry accepting it today would set, and the policy's terms."""
    if run["purpose"] != "certify" or run["decisions"]:
        return None
    try:
        policy = records.policy_for(db, batch["reagent"], today)
    except StockroomError:
        return None
    prepared_on = dt.date.fromisoformat(batch["prepared_on"])
    return {
        "expires_on": expiry_for(today, policy, prepared_on=prepared_on),
        "shelf_life_days": policy.shelf_life_days,
        "prepared_on": prepared_on,
        "recheck_interval_days": policy.recheck_interval_days,
        "tolerance_rel": policy.tolerance_rel,
    }


@bp.post("/runs/<int:run_id>/exclude")
@require("run.decide")
@once
def exclude(run_id: int) -> Any:
    p = Parser()
    position = p.integer(field("position"), "position", ge=1)
    reason = p.text(field("reason"), "reason", max_length=500)
    p.raise_if_errors()
    user = current_user()
    assert position is not None and reason is not None
    workflow.exclude(get_db(), current_app.config, run_id, position, reason, user.username if user else "?")
    flash(f"Replicate {position} excluded; the result was computed again without it.", "ok")
    return redirect(url_for("runs.show", run_id=run_id), 303)


@bp.post("/runs/<int:run_id>/decide")
@require("run.decide")
@once
def decide(run_id: int) -> Any:
    db = get_db()
    p = Parser()
    decision = p.choice(field("decision"), "decision", ("accept", "reject"))
    reason = p.text(field("reason"), "reason", required=decision == "reject", max_length=500) or ""
    run = records.run_by_id(db, run_id)
    released_on = form_date(
        p,
        field("released_on"),
        "released_on",
        required=False,
        not_after=lab_today(),
        not_before=dt.date.fromisoformat(run["performed_on"]),
    )
    # The id of the result the page showed: accepting refuses (409) when it is no longer current.
    shown_version = p.integer(field("result_version"), "result_version", ge=1, required=False)
    p.raise_if_errors()
    user = current_user()
    actor = user.username if user else "?"
    batch = records.batch_by_id(db, run["batch_id"])
    if decision == "accept":
        release_id = workflow.accept(db, run_id, actor, released_on=released_on, reason=reason, shown_version=shown_version)
        if release_id:
            flash(f"{batch['code']} released with its new certified value. Print its labels next (the button below).", "ok")
        else:
            flash("Re-check accepted; the certified value is unchanged.", "ok")
    else:
        workflow.reject(db, run_id, reason, actor)
        flash("Run rejected; nothing was released.", "ok")
    return redirect(url_for("batches.show", code=batch["code"]), 303)


@bp.route("/batches/<code>/runs/import", methods=["GET", "POST"])
@require("run.record")
def import_sheet(code: str) -> Any:
    """Upload a replicate sheet: it fills the run grid for review; nothing is stored until recorded there."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    method = _method_arg()
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("runs/import.html", batch=batch, method=method, problems=[], columns=csvio.SHEET_COLUMNS)
    upload = request.files.get("sheet")
    problems: list[tuple[int, str]] = []
    if upload is None or not upload.filename:
        problems.append((0, "choose a CSV file to upload"))
    else:
        raw = upload.read()
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            text = None
            problems.append((0, "the file is not UTF-8 text; save it as CSV (UTF-8)"))
        if text is not None:
            sheet = csvio.read_sheet(text, min(int(current_app.config["CSV_MAX_ROWS"]), run_input.LIMITS.max_replicates))
            problems.extend(sheet.problems)
            unused = csvio.columns_unused(sheet.rows, method == "secondary")
            if unused:
                problems.append((0, "columns " + ", ".join(unused) + " have values but this kind of run does not use them"))
            curves = _curve_upload(problems, len(sheet.rows))
            if not problems:
                replicates = csvio.rows_as_replicates(sheet.rows, method == "secondary")
                for number, lines in (curves.curves if curves else {}).items():
                    replicates[number - 1]["curve"] = "\n".join(lines)
                today = lab_today()
                user = current_user()
                values = {
                    "performed_on": today.isoformat(),
                    "analyst": user.display_name if user else "",
                    "burette_capacity_ml": "50.0",
                    "method": method,
                    **run_input.to_form({"replicates": replicates}),
                }
                if curves:
                    values["curve_reading"] = curves.reading
                ctx = _form_context(batch, method, "certify", today)
                values["purpose"] = "recheck" if ctx["in_force"] else "certify"
                ctx["rows"] = max(GRID_ROWS, len(sheet.rows))
                # Check every row by the run's own rules now, so row-level problems show before recording.
                check = Parser()
                run_input.read_replicates(
                    check, replicates, method, capacity_ml=None, curve_reading=curves.reading if curves else "ph"
                )
                flash(
                    f"{len(sheet.rows)} replicate rows read from {upload.filename}. Check them, choose the "
                    "standard and record the run; nothing is stored yet.",
                    "ok",
                )
                page = _render_form(ctx, values, check.errors, None, result=None, imported=len(sheet.rows))
                return page, (422 if check.errors else 200)
    return render_template("runs/import.html", batch=batch, method=method, problems=problems, columns=csvio.SHEET_COLUMNS), 422


def _curve_upload(problems: list[tuple[int, str]], n_replicates: int) -> csvio.CurveSheet | None:
    """The optional curve file of an import (replicate, volume_ml, ph|mv), or None; its problems added to `problems`."""
    upload = request.files.get("curves")
    if upload is None or not upload.filename:
        return None
    try:
        text = upload.read().decode("utf-8")
    except UnicodeDecodeError:
        problems.append((0, "the curve file is not UTF-8 text; save it as CSV (UTF-8)"))
        return None
    sheet = csvio.read_curve_sheet(text, max(n_replicates, 1), run_input.LIMITS.max_curve_points)
    problems.extend((line, f"curve file: {message}" if line else message) for line, message in sheet.problems)
    return sheet


@bp.get("/runs/<int:run_id>.csv")
def export_run(run_id: int) -> Response:
    db = get_db()
    run = records.run_by_id(db, run_id)
    batch = records.batch_by_id(db, run["batch_id"])
    return csv_attachment(csvio.write_run(run, batch), f"{batch['code']}-run-{run_id}.csv")


@bp.get("/runs/<int:run_id>/curves.csv")
def export_curves(run_id: int) -> Response:
    """A run's titration curves as a curve sheet, which the import page takes back as its curve file; 404 when it has none."""
    db = get_db()
    run = records.run_by_id(db, run_id)
    if not any(rep.get("curve") for rep in run["replicates"]):
        raise NotFound(f"Run {run_id} has no titration curves.")
    batch = records.batch_by_id(db, run["batch_id"])
    text = csvio.write_curves(run, batch, float(current_app.config["COVERAGE_FACTOR"]))
    return csv_attachment(text, f"{batch['code']}-run-{run_id}-curves.csv")


@bp.get("/batches/<code>/history.csv")
def export_history(code: str) -> Response:
    db = get_db()
    batch = records.batch_by_code(db, code)
    return csv_attachment(csvio.write_history(batch, readmodel.batch_history(db, batch["id"])), f"{batch['code']}-history.csv")
