"""Standardization runs in the browser: the replicate grid, recording, exclusions and decisions, CSV."""

from __future__ import annotations

import datetime as dt
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

from stockroom import chemistry, csvio, readmodel, records, workflow
from stockroom.db import get_db
from stockroom.errors import FieldError, InvalidInput, StockroomError
from stockroom.policy import release_in_force
from stockroom.web import instruments as web_instruments
from stockroom.web import lab_today
from stockroom.web.access import current_user, require
from stockroom.web.forms import date as form_date
from stockroom.web.forms import field
from stockroom.web.inputs import Parser

bp = Blueprint("runs", __name__)

BURETTES_ML = (10.0, 25.0, 50.0, 100.0)
GRID_ROWS = 6  # rows offered without JavaScript; the script adds more on demand
MAX_ROWS = 50
MIN_MASS_G, MAX_MASS_G = 0.001, 50.0
TEMPERATURE_RANGE_C = (5.0, 40.0)


# ---------------------------------------------------------------- reading the form


def _rows_in_form(form: Any) -> int:
    n = GRID_ROWS
    for key in form:
        if key.startswith("r") and "_" in key:
            head = key[1:].split("_", 1)[0]
            if head.isdigit():
                n = max(n, int(head))
    return min(n, MAX_ROWS + 1)


def parse_grid(
    form: Any, secondary: bool, capacity_ml: float, run_temperature: float | None
) -> tuple[list[dict[str, Any]], dict[int, str], Parser]:
    """Replicate rows of the run form (blank rows skipped) -> stored-form dicts, exclusions, parser."""
    p = Parser()
    reps: list[dict[str, Any]] = []
    excluded: dict[int, str] = {}
    numeric: tuple[str, ...] = ("aliquot_ml",) if secondary else ("gross_g", "tare_g", "mass_g")
    numeric += ("initial_ml", "final_ml", "blank_ml", "temperature_c")
    for i in range(1, _rows_in_form(form) + 1):
        raw = {c: form.get(f"r{i}_{c}", "").strip() for c in numeric}
        if not any(raw.values()):
            continue
        if len(reps) >= MAX_ROWS:
            p.error(f"r{i}_initial_ml", f"at most {MAX_ROWS} replicates make one run")
            break

        def num(col: str, _raw: dict[str, str] = raw, _i: int = i, **kw: Any) -> float | None:
            return p.number(_raw[col] or None, f"r{_i}_{col}", **kw)

        rep: dict[str, Any] = {}
        if secondary:
            rep["aliquot_ml"] = num("aliquot_ml", gt=0, le=500, unit="mL")
        else:
            gross = num("gross_g", required=False, gt=0, le=1000, unit="g")
            tare = num("tare_g", required=False, ge=0, le=1000, unit="g")
            direct = num("mass_g", required=False, unit="g")
            mass: float | None = None
            if raw["mass_g"] and (raw["gross_g"] or raw["tare_g"]):
                p.error(f"r{i}_mass_g", "give either the mass or gross and tare, not both")
            elif raw["mass_g"]:
                mass = direct
                rep["mass_g"] = direct
            elif raw["gross_g"] and raw["tare_g"]:
                mass = None if gross is None or tare is None else gross - tare
                if mass is not None and mass <= 0:
                    p.error(f"r{i}_gross_g", "the gross weighing must be heavier than the tare")
                    mass = None
                rep["mass_gross_g"], rep["mass_tare_g"] = gross, tare
            else:
                missing = "tare_g" if raw["gross_g"] else "gross_g"
                p.error(f"r{i}_{missing}", "is required (or give the mass directly)")
            if mass is not None and not (MIN_MASS_G <= mass <= MAX_MASS_G):
                p.error(
                    f"r{i}_mass_g" if raw["mass_g"] else f"r{i}_gross_g",
                    f"a mass of {mass:.4f} g is outside {MIN_MASS_G:g}–{MAX_MASS_G:g} g: check the unit",
                )
        initial = num("initial_ml", ge=0, unit="mL")
        final = num("final_ml", gt=0, unit="mL")
        for col, reading in (("initial_ml", initial), ("final_ml", final)):
            if reading is not None and reading > capacity_ml:
                p.error(f"r{i}_{col}", f"{reading:g} mL is beyond the scale of the {capacity_ml:g} mL burette")
                if col == "final_ml":
                    final = None
                else:
                    initial = None
        if initial is not None and final is not None:
            if final <= initial:
                p.error(f"r{i}_final_ml", f"the final reading must be greater than the initial reading ({initial:g} mL)")
            else:
                rep["initial_ml"], rep["final_ml"] = initial, final
                rep["volume_ml"] = round(final - initial, 6)
        blank = num("blank_ml", required=False, ge=0, le=5, unit="mL")
        rep["blank_ml"] = blank or 0.0
        if blank and rep.get("volume_ml") is not None and blank >= rep["volume_ml"]:
            p.error(f"r{i}_blank_ml", "the blank must be smaller than the titre")
        t = num("temperature_c", required=False, ge=TEMPERATURE_RANGE_C[0], le=TEMPERATURE_RANGE_C[1], unit="°C")
        rep["temperature_c"] = t if raw["temperature_c"] else run_temperature
        if form.get(f"r{i}_exclude"):
            reason = (form.get(f"r{i}_exclude_reason") or "").strip()
            if not reason:
                p.error(f"r{i}_exclude_reason", "say why this replicate is left out")
            else:
                excluded[len(reps) + 1] = reason[:500]
        reps.append(rep)
    if not reps and p.ok:
        p.error("r1_initial_ml", "enter at least one replicate")
    return reps, excluded, p


def _lots_for(batch: dict[str, Any], on: dt.date) -> list[dict[str, Any]]:
    titrant = chemistry.titrant(batch["reagent"])
    keys = {s.key for s in chemistry.list_standards(titrant)}
    return [
        lot for lot in records.list_lots(get_db()) if lot["substance"] in keys and dt.date.fromisoformat(lot["expires_on"]) >= on
    ]


def _references_for(batch: dict[str, Any], on: dt.date) -> list[tuple[dict[str, Any], Any]]:
    """Certified batches of the opposite role with a value in force on `on` (candidates for reference)."""
    db = get_db()
    role = chemistry.titrant(batch["reagent"]).role
    # Only live batches (released, not expired or withdrawn) can have a value in force; their release
    # in the status report is that value.
    live = [i for i, c, _ in readmodel.coarse_statuses(db, on) if c == "live" and i != batch["id"]]
    out = []
    for v in readmodel.views_of(db, live, on):
        try:
            if chemistry.titrant(v.batch["reagent"]).role == role:
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
        "burettes": BURETTES_ML,
        "instrument_choices": web_instruments.run_choices(method, on),
        "instrument_figures": web_instruments.preview_figures(method, on),
        "rows": GRID_ROWS,
        "today": on,
        "standards": {s.key: s for s in chemistry.list_standards(titrant)},
        # Mass of each standard that gives a 40 mL titre at the nominal strength (a 50 mL burette).
        "suggested": {
            s.key: chemistry.suggested_standard_mass(titrant, s, batch["nominal_molarity"], 40.0)
            for s in chemistry.list_standards(titrant)
        },
    }


def parse_run(batch: dict[str, Any], method: str, form: Any) -> tuple[dict[str, Any], Any, list[dict], dict, Parser]:
    """The run form (or the API's equivalent mapping) -> run meta, lot or reference, replicates, exclusions.

    Errors are collected in the returned Parser, named by the form's fields (r3_final_ml ...).
    """
    p = Parser()

    def field(name: str) -> Any:
        value = form.get(name)
        return None if value is None or (isinstance(value, str) and value.strip() == "") else value

    today = lab_today()
    purpose = p.choice(form.get("purpose") or None, "purpose", ("certify", "recheck"))
    performed_on = form_date(
        p, field("performed_on"), "performed_on", not_after=today, not_before=dt.date.fromisoformat(batch["prepared_on"])
    )
    analyst = p.text(field("analyst"), "analyst", max_length=120)
    capacity = p.number(field("burette_capacity_ml"), "burette_capacity_ml", gt=0, le=100, unit="mL")
    if capacity is not None and capacity not in BURETTES_ML:
        p.error("burette_capacity_ml", "choose one of the burette sizes offered")
        capacity = None
    run_t = p.number(
        field("temperature_c"), "temperature_c", required=False, ge=TEMPERATURE_RANGE_C[0], le=TEMPERATURE_RANGE_C[1], unit="°C"
    )
    endpoint = p.text(field("endpoint"), "endpoint", required=False, max_length=200) or ""
    notes = p.text(field("notes"), "notes", required=False, max_length=2000) or ""
    partner: Any = None
    if method == "primary":
        lot_id = p.integer(field("standard_lot_id"), "standard_lot_id", ge=1)
        if lot_id is not None:
            try:
                partner = records.lot_by_id(get_db(), lot_id)
                chemistry.stoichiometric_factor(chemistry.titrant(batch["reagent"]), chemistry.standard(partner["substance"]))
            except StockroomError as exc:
                p.error("standard_lot_id", exc.message)
                partner = None
    else:
        code = p.text(field("reference_batch"), "reference_batch", max_length=40)
        if code:
            try:
                partner = records.batch_by_code(get_db(), code)
            except StockroomError as exc:
                p.error("reference_batch", exc.message)
    reps, excluded, grid = parse_grid(form, method == "secondary", capacity or 100.0, run_t)
    p.errors.extend(grid.errors)
    chosen = web_instruments.read_run_instruments(p, form, method, capacity)
    meta = {
        "purpose": purpose,
        "performed_on": performed_on.isoformat() if performed_on else None,
        "analyst": analyst,
        "burette_capacity_ml": capacity,
        "temperature_c": run_t,
        "endpoint": endpoint,
        "notes": notes,
        "instruments": chosen,
    }
    if purpose == "recheck" and performed_on is not None:
        if release_in_force(readmodel.batch_facts(get_db(), batch["id"]), performed_on) is None:
            p.error("purpose", "a re-check needs a certified value in force that day; record a standardization")
    return meta, partner, reps, excluded, p


def _compute(
    batch: dict[str, Any], method: str, meta: dict[str, Any], partner: Any, reps: list[dict], excluded: dict[int, str]
) -> Any:
    db = get_db()
    on = dt.date.fromisoformat(meta["performed_on"])
    policy = records.policy_for(db, batch["reagent"], on)
    figures = workflow.run_figures(current_app.config, meta["instruments"], on)
    if method == "primary":
        workflow.check_lot_usable(partner, on)
        return workflow.compute_primary(
            current_app.config, batch, partner, reps, excluded, policy, meta["burette_capacity_ml"], figures
        )
    ref = workflow.reference_in_force(db, partner, on)
    return workflow.compute_secondary(
        current_app.config, batch, partner, ref.molarity, ref.u, reps, excluded, policy, meta["burette_capacity_ml"], figures
    )


# ---------------------------------------------------------------- views


def _method_arg() -> str:
    method = request.values.get("method", "primary")
    return method if method in ("primary", "secondary") else "primary"


@bp.route("/batches/<code>/runs/new", methods=["GET", "POST"])
@require("run.record")
def new_run(code: str) -> Any:
    db = get_db()
    batch = records.batch_by_code(db, code)
    if records.withdrawal_of(db, batch["id"]) is not None:
        raise InvalidInput("this batch is withdrawn; no run can be recorded for it", field="batch")
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
    if request.method == "GET":
        return render_template("runs/new.html", values=defaults, errors={}, result=None, **ctx)
    form = request.form
    meta, partner, reps, excluded, p = parse_run(batch, method, form)
    ctx["purpose"] = meta["purpose"] or "certify"
    result = None
    if p.ok:
        try:
            result = _compute(batch, method, meta, partner, reps, excluded)
        except InvalidInput as exc:
            p.errors.extend(_grid_field_names(exc.errors))
        except StockroomError as exc:
            p.error("_", exc.message)
    if not p.ok:
        errors = InvalidInput(p.errors).fields
        return render_template("runs/new.html", values=form, errors=errors, result=None, **ctx), 422
    assert result is not None  # p.ok, so the computation ran
    if form.get("action") != "record":
        # "Compute" without JavaScript: show the same result the live preview shows, store nothing.
        return render_template("runs/new.html", values=form, errors={}, result=workflow.snapshot(result), **ctx)
    actor = user.username if user else "?"
    if method == "primary":
        run_id, _ = workflow.record_primary_run(
            db, current_app.config, batch, partner, meta, reps, actor, excluded, instruments=meta["instruments"]
        )
    else:
        run_id, _ = workflow.record_secondary_run(
            db, current_app.config, batch, partner, meta, reps, actor, excluded, instruments=meta["instruments"]
        )
    flash(f"Run recorded for {batch['code']}. Review it, then accept or reject it.", "ok")
    return redirect(url_for("runs.show", run_id=run_id), 303)


def _grid_field_names(errors: list[FieldError]) -> list[FieldError]:
    """Map the science core's paths (replicates[2].mass_g, 0-based) onto the grid's fields (r3_mass_g)."""
    out = []
    for e in errors:
        name = e.field
        if name.startswith("replicates[") and "]" in name:
            idx = int(name[len("replicates[") : name.index("]")])
            col = name[name.index("]") + 2 :] if "." in name else "initial_ml"
            col = {"volume_ml": "final_ml", "gross_g": "gross_g", "tare_g": "tare_g"}.get(col, col)
            name = f"r{idx + 1}_{col}"
        out.append(FieldError(name, e.message))
    return out


@bp.get("/runs/<int:run_id>")
def show(run_id: int) -> Any:
    db = get_db()
    run = records.run_by_id(db, run_id)
    batch = records.batch_by_id(db, run["batch_id"])
    lot = records.lot_by_id(db, run["standard_lot_id"]) if run["standard_lot_id"] else None
    reference = records.batch_by_id(db, run["reference_batch_id"]) if run["reference_batch_id"] else None
    from stockroom import instruments

    used = instruments.instruments_of_run(db, run_id)
    return render_template(
        "runs/show.html",
        run=run,
        batch=batch,
        lot=lot,
        reference=reference,
        used=used,
        result=run["current"]["result"],
        today=lab_today(),
        excluded={e["position"]: e for e in run["exclusions"]},
    )


@bp.post("/runs/<int:run_id>/exclude")
@require("run.decide")
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
    p.raise_if_errors()
    user = current_user()
    actor = user.username if user else "?"
    batch = records.batch_by_id(db, run["batch_id"])
    if decision == "accept":
        release_id = workflow.accept(db, run_id, actor, released_on=released_on, reason=reason)
        if release_id:
            flash(f"{batch['code']} released with its new certified value.", "ok")
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
    if request.method == "GET":
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
            sheet = csvio.read_sheet(text, min(int(current_app.config["CSV_MAX_ROWS"]), MAX_ROWS))
            problems.extend(sheet.problems)
            unused = csvio.columns_unused(sheet.rows, method == "secondary")
            if unused:
                problems.append((0, "columns " + ", ".join(unused) + " have values but this kind of run does not use them"))
            if not problems:
                form = csvio.rows_as_form(sheet.rows, method == "secondary")
                today = lab_today()
                user = current_user()
                values = {
                    "performed_on": today.isoformat(),
                    "analyst": user.display_name if user else "",
                    "burette_capacity_ml": "50.0",
                    "method": method,
                    **form,
                }
                ctx = _form_context(batch, method, "certify", today)
                values["purpose"] = "recheck" if ctx["in_force"] else "certify"
                ctx["rows"] = max(GRID_ROWS, len(sheet.rows))
                # Check every row by the form's own rules now, so row-level problems show before recording.
                _, _, grid = parse_grid(form, method == "secondary", 100.0, None)
                errors = InvalidInput(grid.errors).fields if grid.errors else {}
                flash(
                    f"{len(sheet.rows)} replicate rows read from {upload.filename}. Check them, choose the "
                    "standard and record the run; nothing is stored yet.",
                    "ok",
                )
                return render_template(
                    "runs/new.html", values=values, errors=errors, result=None, imported=len(sheet.rows), **ctx
                ), (422 if errors else 200)
    return render_template("runs/import.html", batch=batch, method=method, problems=problems, columns=csvio.SHEET_COLUMNS), 422


def _csv_response(text: str, filename: str) -> Response:
    safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in filename)
    return Response(text, mimetype="text/csv", headers={"Content-Disposition": f'attachment; filename="{safe}"'})


@bp.get("/runs/<int:run_id>.csv")
def export_run(run_id: int) -> Response:
    db = get_db()
    run = records.run_by_id(db, run_id)
    batch = records.batch_by_id(db, run["batch_id"])
    return _csv_response(csvio.write_run(run, batch), f"{batch['code']}-run-{run_id}.csv")


@bp.get("/batches/<code>/history.csv")
def export_history(code: str) -> Response:
    db = get_db()
    batch = records.batch_by_code(db, code)
    return _csv_response(csvio.write_history(batch, readmodel.batch_history(db, batch["id"])), f"{batch['code']}-history.csv")
