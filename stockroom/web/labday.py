"""The lab-day look-up (page, printable sheet, JSON), the class-data correction, and a batch's drift chart.

Reads are open like every other page (OPEN_READS); correcting class data needs `classdata.correct`
(instructors: it is their students' data). The look-up answers "what molarity do we use that day?"
from stockroom.labday; the correction stores one append-only row per upload plus its audit event.
"""

from __future__ import annotations

import datetime as dt
import functools
import json
from collections.abc import Mapping
from typing import Any

import sqlite_utils
from flask import Blueprint, Response, current_app, redirect, render_template, request, url_for

from stockroom import chemistry, corrections, readmodel, records, schedule_input
from stockroom import db as dbmod
from stockroom import labday as ld
from stockroom.chemistry import UnknownSubstance
from stockroom.db import get_db
from stockroom.errors import InvalidInput, NotFound, StockroomError
from stockroom.pdf.charts import drift_svg
from stockroom.pdf.labday_sheet import labday_sheet_pdf
from stockroom.policy import drift_on
from stockroom.records.containers import received_by
from stockroom.web import csv_attachment, forms, lab_today, viewcache
from stockroom.web.access import current_user, require
from stockroom.web.inputs import MISSING, Parser
from stockroom.web.once import once

bp = Blueprint("labday", __name__)
api_bp = Blueprint("labday_api", __name__, url_prefix="/api/v1")

API_KEYS = ("date", "titrant", "bench_temperature_c", "destination")
CHART_WIDTH, CHART_HEIGHT = 1080, 430  # px: the width of a batch page's panel


# ---------------------------------------------------------------- loading


def load_batches(db: sqlite_utils.Database, titrant: str | None, day: dt.date | None = None) -> list[ld.BatchRecord]:
    """Batches of a titrant (all when None) with their facts, in a fixed number of queries.

    With `day`, only batches that can have a value in force that day (a release made by then whose
    expiry is not before it, and no withdrawal by then) are loaded: the rest cannot appear.
    """
    sql, params = "SELECT id, code, reagent, nominal_molarity FROM batches b WHERE 1 = 1", []
    if titrant:
        sql += " AND reagent = ?"
        params.append(titrant)
    if day is not None:
        iso = day.isoformat()
        sql += (
            " AND EXISTS (SELECT 1 FROM releases r WHERE r.batch_id = b.id AND r.released_on <= ? "
            "AND r.expires_on >= ?) AND NOT EXISTS (SELECT 1 FROM withdrawals w WHERE w.batch_id = b.id "
            "AND w.withdrawn_on <= ?)"
        )
        params += [iso, iso, iso]
    rows = dbmod.query(db, sql + " ORDER BY code", params)
    if not rows:
        return []
    ids = [r["id"] for r in rows]
    facts = readmodel.facts_of(db, ids)
    # The withdrawal's reason, for a past day's "withdrawn on D: why" (BatchFacts keeps only the date).
    marks = ",".join("?" * len(ids))
    reasons: dict[int, str] = {}
    for w in dbmod.query(db, f"SELECT batch_id, reason FROM withdrawals WHERE batch_id IN ({marks}) ORDER BY id", ids):
        reasons.setdefault(w["batch_id"], w["reason"])
    return [
        ld.BatchRecord(
            code=r["code"],
            reagent=r["reagent"],
            nominal_molarity=float(r["nominal_molarity"]),
            facts=facts[r["id"]],
            id=r["id"],
            withdrawal_reason=reasons.get(r["id"]),
        )
        for r in rows
    ]


def referral_model(reagent: str, molarity: float) -> str:
    """Which model moves a 20 °C value to the bench temperature, in words, for a titrant (catalogue key)
    of a strength (mol/L): "water density (Tanaka 2001)" for a dilute one, else its solute's table."""
    try:
        model = chemistry.titrant(reagent).expansion
    except StockroomError:
        model = corrections.WATER_LIKE
    if model.kind == "linear":
        return f"{model.key}: a fixed expansion of {model.alpha_per_k:.3g} /K"
    if not model.excess_points or molarity <= model.dilute_limit_mol_l:
        return "water density (Tanaka 2001)"
    solute = model.key.removeprefix("aqueous ")
    return f"water density (Tanaka 2001) plus the 1 mol/kg {solute} density table, scaled to {molarity:g} mol/L"


# ---------------------------------------------------------------- parsing the question


@functools.lru_cache(maxsize=256)
def _catalogue_key(text: str) -> str:
    # The catalogue is fixed for the process: a name once looked up need not be matched again on
    # every request (programs ask the lab-day question many times with the same few names).
    return chemistry.titrant(text).key


def _titrant_key(p: Parser, raw: Any, field: str, required: bool) -> str | None:
    if raw is MISSING or raw is None or (isinstance(raw, str) and not raw.strip()):
        if required:
            p.error(field, "is required: a titrant such as HCl or NaOH")
        return None
    try:
        return _catalogue_key(str(raw))
    except UnknownSubstance:
        known = ", ".join(t.key for t in chemistry.list_titrants())
        p.error(field, f"unknown titrant {str(raw)!r}; known: {known}")
        return None


def _date(p: Parser, raw: Any, field: str, default: dt.date | None) -> dt.date | None:
    if raw is MISSING or raw is None or (isinstance(raw, str) and not raw.strip()):
        if default is None:
            p.error(field, "is required; write it as YYYY-MM-DD")
        return default
    try:
        return dt.date.fromisoformat(str(raw).strip())
    except ValueError:
        p.error(field, f"{raw!r} is not a date; write it as YYYY-MM-DD")
        return None


Destination = tuple[str, str]  # (course, section): schedule_input.read_destination


def parse_question(
    args: Mapping[str, Any], *, strict: bool, default_day: dt.date | None = None
) -> tuple[dt.date, str | None, float | None, Destination | None]:
    """(day, titrant key or None, bench temperature °C or None, destination or None) from a query.

    strict (the API): date and titrant are required and unknown keys are refused. destination is
    written "CHM 110/B" (course, "/", section; "CHM 110" for every section). InvalidInput names each field.
    """
    p = Parser()
    if strict:
        p.known_keys(args, API_KEYS)
    day = _date(p, args.get("date", MISSING), "date", None if strict else default_day)
    titrant = _titrant_key(p, args.get("titrant", MISSING), "titrant", strict)
    bench = p.number(
        args.get("bench_temperature_c", MISSING),
        "bench_temperature_c",
        required=False,
        ge=ld.BENCH_MIN_C,
        le=ld.BENCH_MAX_C,
        unit="°C",
    )
    destination = schedule_input.read_destination(p, args.get("destination", MISSING))
    p.raise_if_errors()
    assert day is not None
    return day, titrant, bench, destination


def received(day: dt.date, titrant: str | None, destination: Destination) -> list[ld.Received]:
    """The containers of a titrant (any when None) the destination had in use on a day, newest fill first."""
    db = get_db()
    rows = received_by(db, destination[0], destination[1], day)
    if not rows:
        return []
    ids = sorted({r["batch_id"] for r in rows})
    marks = ",".join("?" * len(ids))
    batches = {b["id"]: b for b in dbmod.query(db, f"SELECT id, code, reagent FROM batches WHERE id IN ({marks})", ids)}
    return [
        ld.Received(r["code"], batches[r["batch_id"]]["code"], dt.date.fromisoformat(r["filled_on"]), float(r["volume_l"]))
        for r in rows
        if titrant is None or batches[r["batch_id"]]["reagent"] == titrant
    ]


def answer(
    day: dt.date, titrant: str | None, bench: float | None, destination: Destination | None
) -> tuple[ld.LabDay, ld.DestinationAnswer | None]:
    """The lab day, narrowed to what the destination received when one is asked (with the words saying how)."""
    result = look_up(day, titrant, bench)
    if destination is None:
        return result, None
    said = ld.for_destination(result, received(day, titrant, destination), schedule_input.destination_text(*destination))
    return said.day, said


def look_up(day: dt.date, titrant: str | None, bench: float | None) -> ld.LabDay:
    """The lab day read from the database today."""
    db = get_db()
    today = lab_today()

    def compute() -> ld.LabDay:
        # Only the batches that can be in force are loaded; when none can, all are, so that the
        # answer can say why (none made yet, all expired, withdrawn...).
        batches = load_batches(db, titrant, day) or load_batches(db, titrant)
        return ld.lab_day(batches, day, today, titrant, bench)

    return viewcache.cached(db, ("lab-day", day, titrant, bench, today), compute)


# ---------------------------------------------------------------- the look-up


@bp.get("/lab-day")
def page() -> Any:
    """The look-up page; a bad question re-shows the form with the message beside the field (422)."""
    today = lab_today()
    values = {
        "date": request.args.get("date") or today.isoformat(),
        "titrant": request.args.get("titrant", ""),
        "bench_temperature_c": request.args.get("bench_temperature_c", ""),
        "destination": request.args.get("destination", ""),
    }
    context: dict[str, Any] = {
        "values": values,
        "errors": {},
        "day": None,
        "today": today,
        "referral_model": referral_model,
        "titrants": [(t.key, f"{t.key} ({t.name})") for t in chemistry.list_titrants()],
    }
    try:
        day, titrant, bench, destination = parse_question(request.args, strict=False, default_day=today)
    except InvalidInput as exc:
        context["errors"] = exc.fields
        return forms.render_form("labday/index.html", **context), 422
    query: dict[str, Any] = {
        "date": day.isoformat(),
        **({"titrant": titrant} if titrant else {}),
        **({"bench_temperature_c": f"{bench:g}"} if bench is not None else {}),
        **({"destination": "/".join(p for p in destination if p)} if destination else {}),
    }
    result, said = answer(day, titrant, bench, destination)
    context.update(
        day=result,
        destination=said,
        cautions=ld.cautions(result.entries),
        query=query,
        pdf_url=url_for("labday.sheet", **query),
        json_url=url_for("labday_api.lab_day_json", **query) if titrant else None,
    )
    return render_template("labday/index.html", **context)


@bp.get("/lab-day.pdf")
def sheet() -> Response:
    """The printable lab-day sheet (A4 PDF) for the same question as the page."""
    day, titrant, bench, destination = parse_question(request.args, strict=False, default_day=lab_today())
    result, said = answer(day, titrant, bench, destination)
    pdf = labday_sheet_pdf(
        result,
        printed_on=lab_today(),
        institution=str(current_app.config.get("INSTITUTION_NAME") or ""),
        destination_note=said.note if said else "",
    )
    name = f"lab-day-{day.isoformat()}{'-' + titrant if titrant else ''}.pdf"
    return Response(pdf, mimetype="application/pdf", headers={"Content-Disposition": f'inline; filename="{name}"'})


def _iso(d: dt.date | None) -> str | None:
    return d.isoformat() if d else None


def _point_json(p: Any) -> dict[str, Any] | None:
    return None if p is None else {"on": p.on.isoformat(), "molarity": p.molarity, "u": p.u, "k": p.k, "U": p.k * p.u}


def entry_json(e: ld.LabDayEntry, bench_asked: bool) -> dict[str, Any]:
    """One batch of the lab-day answer as JSON-ready values (mol/L, dates ISO).

    use_molarity is the value to use (mol/L, at use_temperature_c), or null when the batch is on hold,
    with hold the reason in words; molarity (certified), predicted_molarity and latest_recheck are for
    reference. status and flags are the day's own record; learnt_later what was recorded after it.
    """
    r = e.release
    body: dict[str, Any] = {
        "batch_id": e.batch.code,
        "titrant": e.batch.reagent,
        "nominal_molarity": e.batch.nominal_molarity,
        "unit": "mol/L",
        "use_molarity": e.use_molarity,
        "use_temperature_c": e.use_temperature_c if e.use_molarity is not None else None,
        "hold": e.hold,
        "release_id": r.id,
        "molarity": r.molarity,
        "u": r.u,
        "U": r.U,
        "k": r.k,
        "reference_temperature_c": ld.REFERENCE_TEMPERATURE_C,
        "released_on": r.released_on.isoformat(),
        "expires_on": r.expires_on.isoformat(),
        "tolerance_rel": r.tolerance_rel,
        "status": e.status.status.value,
        "status_label": e.status.status.label,
        "latest_recheck": _point_json(e.latest_recheck),
        "predicted_molarity": e.prediction.molarity if e.prediction else None,
        "prediction_interval": (
            {"low": e.prediction.pi_low, "high": e.prediction.pi_high, "confidence": e.prediction.confidence}
            if e.prediction
            else None
        ),
        "trend": None,
        "trend_note": e.fit_note,
        "flags": [{"kind": f.kind.value, "message": f.message, "date": _iso(f.date)} for f in e.flags],
        "learnt_later": [{"on": item.on.isoformat(), "kind": item.kind.value, "what": item.what} for item in e.learnt_later],
    }
    if e.fit is not None:
        lo, hi = e.fit.slope_per_period_ci
        body["trend"] = {
            "points": e.fit.n,
            "through": e.fit.last_on.isoformat(),
            "standardizations_up_to": e.trend_through.isoformat(),
            "slope_per_30_days": e.fit.slope_per_period,
            "slope_per_30_days_ci": [lo, hi],
            "confidence": e.fit.confidence,
            "p_value": e.fit.p_value,
            "significant": e.fit.significant,
        }
    if bench_asked:
        body["bench_temperature_c"] = e.bench_temperature_c
        body["molarity_at_bench"] = e.molarity_at_bench
        body["predicted_molarity_at_bench"] = e.predicted_at_bench
        body["bench_referral_model"] = referral_model(e.batch.reagent, r.molarity)
    return body


@api_bp.get("/lab-day")
def lab_day_json() -> Any:
    """GET /api/v1/lab-day?date=YYYY-MM-DD&titrant=HCl[&bench_temperature_c=23][&destination=CHM 110/B]."""
    day, titrant, bench, destination = parse_question(request.args, strict=True)
    today = lab_today()

    def serialized() -> bytes:
        result, said = answer(day, titrant, bench, destination)
        body: dict[str, Any] = {
            "date": day.isoformat(),
            "titrant": titrant,
            "known_on": today.isoformat(),
            "batches": [entry_json(e, bench is not None) for e in result.entries],
            "reason": result.reason,
        }
        if bench is not None:
            body["bench_temperature_c"] = bench
        if destination is not None and said is not None:
            body["destination"] = {"course": destination[0], "section": destination[1], "text": said.destination}
            body["received"] = said.found
            body["containers"] = [
                {"id": r.container, "batch_id": r.batch_code, "filled_on": r.filled_on.isoformat(), "volume_l": r.volume_l}
                for r in said.received
            ]
            body["destination_note"] = said.note
        return json.dumps(body, separators=(",", ":")).encode("utf-8")

    # Instructors' programs ask the same question many times a lab day; the answer only changes
    # with the records, so its serialized form is kept until the next write.
    text = viewcache.cached(get_db(), ("lab-day.json", day, titrant, bench, destination, today), serialized)
    return Response(text, mimetype="application/json")


# ---------------------------------------------------------------- drift chart


@bp.get("/batches/<code>/drift.svg")
def drift_chart(code: str) -> Response:
    """The drift chart of a batch's release as of ?on= (default today), as SVG."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    p = Parser()
    on = _date(p, request.args.get("on", MISSING), "on", lab_today())
    p.raise_if_errors()
    assert on is not None
    report = drift_on(readmodel.batch_facts(db, batch["id"]), on)
    if report is None:
        raise NotFound(f"batch {code} has no release by {on.isoformat()}, so it has no drift chart")
    svg = drift_svg(report, CHART_WIDTH, CHART_HEIGHT, title=f"Drift of {code} as of {on.isoformat()}", font_size=11.5)
    resp = Response(svg, mimetype="image/svg+xml")
    # reportlab's SVG styles its shapes with style attributes; this image runs no script, so allow those.
    resp.headers["Content-Security-Policy"] = "default-src 'none'; style-src 'unsafe-inline'"
    resp.headers["Cache-Control"] = "no-cache"
    return resp


# ---------------------------------------------------------------- class-data correction


def _correct_form(
    values: Mapping[str, Any],
    errors: Mapping[str, str],
    problems: list[tuple[int, str]],
    choices: list[ld.LabDayEntry],
    status: int = 200,
    destination_note: str = "",
) -> tuple[str, int]:
    return forms.render_form(
        "labday/correct.html",
        values=values,
        errors=errors,
        problems=problems,
        choices=choices,
        destination_note=destination_note,
        titrants=[(t.key, f"{t.key} ({t.name})") for t in chemistry.list_titrants()],
        columns=ld.CLASS_COLUMNS,
        max_rows=int(current_app.config["CSV_MAX_ROWS"]),
        max_bytes=int(current_app.config.get("MAX_CONTENT_LENGTH") or 0),
    ), status


def _held_message(entry: ld.LabDayEntry, choices: list[ld.LabDayEntry]) -> str:
    """Why a batch on hold cannot correct results, and which batches of the day could."""
    others = [e.batch.code for e in choices if e is not entry and e.hold is None]
    then = (
        "name another batch in force that day: " + ", ".join(others)
        if others
        else "no other batch of this titrant was in force that day, so these results cannot be corrected here"
    )
    return (
        f"{entry.batch.code} is on hold for {entry.on.isoformat()}, so it gives no value to correct with. "
        f"{entry.hold} To go on, {then}"
    )


def _choices_for(args: Mapping[str, Any]) -> tuple[list[ld.LabDayEntry], str]:
    """The batches in force for the day, titrant and destination a link carried, so the form offers them
    (with the words on what the destination received); [] when unclear."""
    if not args.get("titrant"):
        return [], ""
    p = Parser()
    day = _date(p, args.get("date") or MISSING, "lab_day", lab_today())
    titrant = _titrant_key(p, args.get("titrant"), "titrant", True)
    bench = p.number(
        args.get("bench_temperature_c") or None, "bench_temperature_c", required=False, ge=ld.BENCH_MIN_C, le=ld.BENCH_MAX_C
    )
    destination = schedule_input.read_destination(p, args.get("destination") or None)
    if not p.ok or day is None or titrant is None:
        return [], ""
    result, said = answer(day, titrant, bench, destination)
    return list(result.entries), said.note if said else ""


@bp.route("/lab-day/correct", methods=["GET", "POST"])
@require("classdata.correct")
@once
def correct() -> Any:
    """Upload a class's results for a lab day; each is recomputed with the molarity in force that day."""
    if request.method != "POST":  # HEAD answers like GET and never writes
        # Carried from the lab-day page: the day, titrant, bench temperature and batch it showed.
        values = {
            "lab_day": request.args.get("date") or lab_today().isoformat(),
            "titrant": request.args.get("titrant", ""),
            "bench_temperature_c": request.args.get("bench_temperature_c", ""),
            "batch": request.args.get("batch", ""),
            "destination": request.args.get("destination", ""),
        }
        offered, offered_note = _choices_for(request.args)
        return _correct_form(values, {}, [], offered, destination_note=offered_note)
    form = request.form
    p = forms.parser()
    day = _date(p, form.get("lab_day", MISSING), "lab_day", None)
    titrant = _titrant_key(p, form.get("titrant", MISSING), "titrant", True)
    bench = p.number(
        form.get("bench_temperature_c", MISSING),
        "bench_temperature_c",
        required=False,
        ge=ld.BENCH_MIN_C,
        le=ld.BENCH_MAX_C,
        unit="°C",
    )
    destination = schedule_input.read_destination(p, form.get("destination", MISSING))
    chosen = (form.get("batch") or "").strip()
    choices: list[ld.LabDayEntry] = []
    entry = None
    note = ""
    if p.ok and day is not None and titrant is not None:
        result, said = answer(day, titrant, bench, destination)
        note = said.note if said else ""
        choices = list(result.entries)
        if not choices:
            if said is not None and said.found:
                p.error("destination", result.reason or note)
            else:
                p.error("lab_day", result.reason or f"no {titrant} batch was in force that day")
        elif chosen:
            entry = next((e for e in choices if e.batch.code == chosen), None)
            if entry is None and said is not None and said.found:
                p.error(
                    "batch",
                    f"{said.destination} received {', '.join(e.batch.code for e in choices)} that day, not {chosen}; "
                    "leave the batch empty to use what it received",
                )
            elif entry is None:
                p.error(
                    "batch",
                    f"{chosen} was not in force on {day.isoformat()}; in force then: " + ", ".join(e.batch.code for e in choices),
                )
        elif len(choices) > 1:
            p.error(
                "batch", f"{len(choices)} {titrant} batches were in force on {day.isoformat()}: choose the one the class used"
            )
        else:
            entry = choices[0]
        if entry is not None and entry.hold is not None:
            p.error("batch", _held_message(entry, choices))
            entry = None
    upload = request.files.get("sheet")
    problems: list[tuple[int, str]] = []
    raw = b""
    sheet: ld.ClassSheet | None = None
    if upload is None or not upload.filename:
        p.error("sheet", "choose the class's CSV file")
    else:
        raw = upload.read()
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            p.error("sheet", "the file is not UTF-8 text; save it as CSV (UTF-8)")
            text = None
        if text is not None:
            sheet = ld.read_class_sheet(text, int(current_app.config["CSV_MAX_ROWS"]))
            problems = list(sheet.problems)
            if problems:
                p.error("sheet", f"{len(problems)} problem(s) in the file; nothing was recorded")
    if not p.ok:
        return _correct_form(form, InvalidInput(p.errors).fields, problems, choices, 422, destination_note=note)
    assert entry is not None and day is not None and sheet is not None and upload is not None
    molarity_used = entry.use_molarity
    assert molarity_used is not None  # a batch on hold was refused above
    user = current_user()
    assert user is not None
    cid = records.record_correction(
        get_db(),
        lab_day=day,
        entry=entry,
        molarity_used=molarity_used,
        rows=sheet.rows,
        upload=raw,
        upload_name=upload.filename or "",
        actor=user.username,
        destination=schedule_input.destination_text(*destination) if destination else "",
    )
    return redirect(url_for("labday.correction", cid=cid), 303)


def _stored(cid: int) -> tuple[dict[str, Any], tuple[ld.ClassResult, ...], ld.LabDayEntry | None]:
    db = get_db()
    row = records.correction_by_id(db, cid)
    results = ld.correct_class(ld.rows_from_csv(row["rows_csv"]), row["molarity_used"], row["nominal_molarity"])
    day = dt.date.fromisoformat(row["lab_day"])
    batch = next((b for b in load_batches(db, row["titrant"]) if b.id == row["batch_id"]), None)
    entry = ld.entry_for(batch, day, lab_today(), row["bench_temperature_c"]) if batch else None
    return row, results, entry


@bp.get("/lab-day/corrections/<int:cid>")
@require("classdata.correct")
def correction(cid: int) -> Any:
    row, results, entry = _stored(cid)
    errors = [r.relative_error for r in results]
    return render_template(
        "labday/correction.html", c=row, results=results, entry=entry, relative_error=errors[0] if errors else None
    )


def _about(row: Mapping[str, Any]) -> dict[str, str]:
    bench = row["bench_temperature_c"]
    return {
        "stockroom class-data correction": str(row["id"]),
        "lab day": row["lab_day"],
        "titrant": f"{row['titrant']} batch {row['batch_code']} "
        f"({records.release_labels(get_db(), [row['release_id']]).get(row['release_id'], 'release not on record')})",
        "certified molarity at 20 °C": f"{row['certified_molarity']:.6f} mol/L",
        "bench temperature": f"{bench:g} °C" if bench is not None else "not given (20 °C value used)",
        "molarity used": f"{row['molarity_used']:.6f} mol/L",
        "nominal molarity": f"{row['nominal_molarity']:g} mol/L",
        "formula": "c_analyte = c_titrant * V_titrant * analyte_per_titrant / V_aliquot",
        "relative error": "(result_nominal - result_corrected) / result_corrected",
        "recorded": f"{row['recorded_at']} by {row['recorded_by']}",
    }


@bp.get("/lab-day/corrections/<int:cid>.csv")
@require("classdata.correct")
def correction_csv(cid: int) -> Response:
    row, results, _ = _stored(cid)
    name = f"class-data-{row['lab_day']}-{row['batch_code']}-{cid}.csv"
    return csv_attachment(ld.results_to_csv(results, _about(row)), name)
