"""The lab schedule and the prep plan: pages, the schedule CSV import, and their JSON.

    GET      /schedule                       sessions by week (?from=&to=&titrant=&course=), the add form
    POST     /schedule                       enter one session (schedule.edit)
    GET/POST /schedule/import                read a schedule CSV: preview every row, store all or none
    GET/POST /schedule/<id>/cancel           cancel a session with the reason
    GET      /plan                           the prep plan (?from=&to=&titrant=)
    POST     /api/v1/lab-sessions            enter one session from JSON (API token, schedule.edit)
    GET      /api/v1/lab-sessions            sessions dated from..to
    GET      /api/v1/plan                    the prep plan as JSON (?from=&to=, ISO dates)

Every door reads a session with stockroom.schedule_input (one parser, one table of limits).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any
from urllib.parse import urlencode

from flask import Blueprint, current_app, flash, jsonify, redirect, render_template, request, url_for

from stockroom import chemistry, planning, prep_plan, preparation, schedule_input
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.records import lab_sessions
from stockroom.web import forms, lab_today, read_json_body
from stockroom.web.access import api_require, current_user, require
from stockroom.web.inputs import MISSING, Parser
from stockroom.web.once import once

bp = Blueprint("schedule", __name__)
api_bp = Blueprint("schedule_api", __name__, url_prefix="/api/v1")

destination = schedule_input.destination_text

# The schedule page shows this many weeks from the week of `from` when `to` is not given.
DEFAULT_WEEKS = 6
# A window asked for (schedule or plan) may span at most this many days.
MAX_WINDOW_DAYS = 400
WINDOW_LABELS = {"from": "From", "to": "To", "titrant": "Titrant", "course": "Course"}


def _titrant_options() -> list[tuple[str, str]]:
    return [(t.key, f"{t.key} ({t.name})") for t in chemistry.list_titrants()]


def read_window(
    args: Mapping[str, Any], today: dt.date, *, default_days: int, strict: bool = False, extra: tuple[str, ...] = ()
) -> tuple[dt.date, dt.date, str | None, str | None]:
    """(from, to, titrant key or None, course or None) from a query; InvalidInput naming each bad field.

    from defaults to today and to to from + default_days; to may not be before from, and the window
    spans at most MAX_WINDOW_DAYS. strict (the JSON API): unknown keys are refused.
    """
    p = Parser()
    if strict:
        p.known_keys(args, ("from", "to", "titrant", "course", *extra))
    start = p.date(args.get("from", MISSING), "from", required=False) or today
    end = p.date(args.get("to", MISSING), "to", required=False)
    titrant = schedule_input.read_titrant(p, args.get("titrant", MISSING), "titrant", required=False)
    course = p.text(args.get("course", MISSING), "course", required=False, max_length=schedule_input.LIMITS.max_course)
    if p.ok:
        end = end or start + dt.timedelta(days=default_days)
        if end < start:
            p.error("to", f"cannot be before the start of the window ({start.isoformat()})")
        elif (end - start).days > MAX_WINDOW_DAYS:
            p.error("to", f"the window may span at most {MAX_WINDOW_DAYS} days")
    p.raise_if_errors()
    assert end is not None
    return start, end, titrant, course or None


def _week_of(day: dt.date) -> dt.date:
    return day - dt.timedelta(days=day.weekday())


def _week_url(start: str) -> str:
    """The schedule page from a date (YYYY-MM-DD); "from" is a Python keyword, hence the query built by hand."""
    return url_for("schedule.list_sessions") + "?" + urlencode({"from": start})


def _weeks(sessions: list[dict[str, Any]]) -> list[tuple[dt.date, list[dict[str, Any]]]]:
    """Sessions grouped by the Monday of their week, in date order."""
    out: list[tuple[dt.date, list[dict[str, Any]]]] = []
    for s in sessions:
        s = dict(s, destination=destination(s["course"], s["section"], s["room"]))
        monday = _week_of(dt.date.fromisoformat(s["session_on"]))
        if not out or out[-1][0] != monday:
            out.append((monday, []))
        out[-1][1].append(s)
    return out


def _schedule_page(values: Mapping[str, Any], errors: Mapping[str, str], status: int = 200) -> tuple[str, int]:
    today = lab_today()
    try:
        start, end, titrant, course = read_window(request.args, today, default_days=7 * DEFAULT_WEEKS)
        window_errors: dict[str, str] = {}
    except InvalidInput as exc:
        start, end, titrant, course = today, today + dt.timedelta(days=7 * DEFAULT_WEEKS), None, None
        window_errors, status = exc.fields, 422
    sessions = lab_sessions.sessions_between(get_db(), start, end, reagent=titrant, course=course)
    standing = [s for s in sessions if s["cancelled_reason"] is None]
    page = forms.render_form(
        "schedule/list.html",
        values=values,
        errors=errors,
        labels=schedule_input.LABELS,
        window_errors=window_errors,
        window={"from": start.isoformat(), "to": end.isoformat(), "titrant": titrant or "", "course": course or ""},
        weeks=_weeks(sessions),
        total_l=sum(float(s["volume_needed_l"]) for s in standing),
        counted=len(standing),
        cancelled=len(sessions) - len(standing),
        titrants=_titrant_options(),
        limits=schedule_input.LIMITS,
        today=today,
    )
    return page, status


@bp.get("/schedule")
def list_sessions() -> Any:
    return _schedule_page({"session_on": lab_today().isoformat()}, {})


@bp.post("/schedule")
@require("schedule.edit")
@once
def add() -> Any:
    # The form's own fields (its CSRF token and one-time id are not the session's).
    values = {k: v for k, v in request.form.items() if k in schedule_input.KEYS}
    try:
        session = schedule_input.parse_session(values, today=lab_today(), decimal_comma=True)
    except InvalidInput as exc:
        return _schedule_page(values, exc.fields, 422)
    user = current_user()
    assert user is not None
    lab_sessions.add_session(get_db(), session, user.username, source="form")
    flash(
        f"Entered {destination(session.course, session.section, session.room)} on {session.session_on.isoformat()}: "
        f"{session.volume_needed_l:g} L of {session.nominal_molarity:g} mol/L {session.reagent}.",
        "info",
    )
    return redirect(_week_url(_week_of(session.session_on).isoformat()), 303)


# ---------------------------------------------------------------- the CSV import


def _import_page(
    problems: list[schedule_input.Problem], rows: list[tuple[int, schedule_input.SessionInput]], text: str, status: int = 200
) -> tuple[str, int]:
    return render_template(
        "schedule/import.html",
        problems=problems,
        rows=[(line, s, destination(s.course, s.section, s.room)) for line, s in rows],
        text=text,
        columns=schedule_input.KEYS,
        required=schedule_input.REQUIRED_COLUMNS,
        limits=schedule_input.LIMITS,
        max_rows=int(current_app.config["CSV_MAX_ROWS"]),
    ), status


@bp.route("/schedule/import", methods=["GET", "POST"])
@require("schedule.edit")
@once
def import_schedule() -> Any:
    """Read a schedule CSV: "Check" shows every row and every problem; "Store" writes all rows or none."""
    if request.method != "POST":
        return _import_page([], [], "")
    text: str | None = request.form.get("sheet_text")
    upload = request.files.get("sheet")
    if upload is not None and upload.filename:
        raw = upload.read()
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            return _import_page(
                [schedule_input.Problem(0, "", "the file is not UTF-8 text; save it as CSV (UTF-8)")], [], "", 422
            )
    if not text or not text.strip():
        return _import_page([schedule_input.Problem(0, "", "choose a CSV file to upload")], [], "", 422)
    read = schedule_input.read_schedule(text, max_rows=int(current_app.config["CSV_MAX_ROWS"]), today=lab_today())
    if read.problems:
        return _import_page(read.problems, read.sessions, "", 422)
    if request.form.get("store") != "1":
        return _import_page([], read.sessions, text)
    user = current_user()
    assert user is not None
    ids = lab_sessions.add_sessions(get_db(), [s for _, s in read.sessions], user.username, source="csv")
    flash(f"Entered {len(ids)} lab session{'s' if len(ids) != 1 else ''} from the file.", "info")
    first = min(s.session_on for _, s in read.sessions)
    return redirect(_week_url(_week_of(first).isoformat()), 303)


# ---------------------------------------------------------------- cancelling


@bp.route("/schedule/<int:session_id>/cancel", methods=["GET", "POST"])
@require("schedule.edit")
def cancel(session_id: int) -> Any:
    db = get_db()
    session = dict(lab_sessions.session_by_id(db, session_id))
    session["destination"] = destination(session["course"], session["section"], session["room"])
    if request.method != "POST":
        return render_template("schedule/cancel.html", s=session, values={}, errors={})
    user = current_user()
    assert user is not None
    try:
        lab_sessions.cancel_session(db, session_id, request.form.get("reason", ""), user.username)
    except InvalidInput as exc:
        return forms.render_form(
            "schedule/cancel.html", s=session, values=request.form, errors=exc.fields, labels={"reason": "Reason"}
        ), 422
    flash(f"Cancelled {session['destination']} on {session['session_on']}.", "info")
    return redirect(_week_url(_week_of(dt.date.fromisoformat(session["session_on"])).isoformat()), 303)


# ---------------------------------------------------------------- the prep plan


def current_plan(start: dt.date, end: dt.date, titrant: str | None = None) -> prep_plan.Plan:
    """The prep plan of the records as they stand, with the configured lead time."""
    return planning.build_plan(
        get_db(), today=lab_today(), start=start, end=end, lead=planning.lead_days(current_app.config), reagent=titrant
    )


@bp.get("/plan")
def plan_page() -> Any:
    today = lab_today()
    status = 200
    try:
        start, end, titrant, _ = read_window(request.args, today, default_days=7 * planning.DEFAULT_WEEKS)
        errors: dict[str, str] = {}
    except InvalidInput as exc:
        start, end, titrant, errors, status = today, today + dt.timedelta(days=7 * planning.DEFAULT_WEEKS), None, exc.fields, 422
    plan = current_plan(start, end, titrant)
    cfg = current_app.config
    # "Make a new batch" tells someone to prepare a titrant, often from a concentrated acid or base:
    # the usual cautions go with it, deferring to the SDS and the local rules (preparation.cautions_for).
    cautions = {t.reagent: preparation.cautions_for(t.reagent) for t in plan.titrants if t.short}
    return render_template(
        "schedule/plan.html",
        plan=plan,
        errors=errors,
        labels=WINDOW_LABELS,
        window={"from": start.isoformat(), "to": end.isoformat(), "titrant": titrant or ""},
        titrants=_titrant_options(),
        destination=destination,
        preparation_days=int(cfg.get("PREP_LEAD_PREPARATION_DAYS") or 0),
        standardization_days=int(cfg.get("PREP_LEAD_STANDARDIZATION_DAYS") or 0),
        cautions=cautions,
    ), status


def plan_json(plan: prep_plan.Plan) -> dict[str, Any]:
    """The prep plan as JSON-ready values: litres, ISO dates, mol/L."""
    return {
        "from": plan.start.isoformat(),
        "to": plan.end.isoformat(),
        "known_on": plan.today.isoformat(),
        "lead_time_days": plan.lead_days,
        "unit": "L",
        "titrants": [
            {
                "titrant": t.reagent,
                "nominal_molarity": t.nominal_molarity,
                "in_force_now_l": round(t.in_force_now_l, 6),
                "awaiting_standardization_l": round(t.pending_l, 6),
                "demand_l": round(t.demand_l, 6),
                "earlier_demand_l": round(t.earlier_demand_l, 6),
                "shortfall_on": t.shortfall_on.isoformat() if t.shortfall_on else None,
                "short_by_l": round(t.short_by_l, 6),
                "make_new_batch_by": t.make_by.isoformat() if t.make_by else None,
                "late": t.late,
                "not_usable_at_shortfall": list(t.unusable),
                "sessions": [
                    {
                        "session_id": line.demand.session_id,
                        "on": line.demand.on.isoformat(),
                        "destination": destination(line.demand.course, line.demand.section, line.demand.room),
                        "course": line.demand.course,
                        "section": line.demand.section,
                        "room": line.demand.room,
                        "volume_needed_l": line.demand.volume_l,
                        "in_force_l": round(line.in_force_l, 6),
                        "draws": [{"batch_id": d.code, "volume_l": round(d.volume_l, 6)} for d in line.draws],
                        "short_l": round(line.short_l, 6),
                    }
                    for line in t.lines
                ],
            }
            for t in plan.titrants
        ],
    }


@api_bp.get("/plan")
def plan_api() -> Any:
    """GET /api/v1/plan?from=YYYY-MM-DD&to=YYYY-MM-DD[&titrant=NaOH]."""
    start, end, titrant, _ = read_window(request.args, lab_today(), default_days=7 * planning.DEFAULT_WEEKS, strict=True)
    return jsonify(plan_json(current_plan(start, end, titrant)))


def session_json(s: Mapping[str, Any]) -> dict[str, Any]:
    """One stored session as JSON (mol/L, L, ISO date)."""
    return {
        "id": s["id"],
        "session_on": s["session_on"],
        "course": s["course"],
        "section": s["section"],
        "room": s["room"],
        "destination": destination(s["course"], s["section"], s["room"]),
        "titrant": s["reagent"],
        "nominal_molarity": s["nominal_molarity"],
        "volume_needed_l": s["volume_needed_l"],
        "notes": s["notes"],
        "cancelled": s.get("cancelled_reason") is not None,
        "cancelled_reason": s.get("cancelled_reason"),
    }


@api_bp.get("/lab-sessions")
def sessions_api() -> Any:
    """GET /api/v1/lab-sessions?from=&to=[&titrant=][&course=]: the schedule, cancelled sessions marked."""
    start, end, titrant, course = read_window(request.args, lab_today(), default_days=7 * DEFAULT_WEEKS, strict=True)
    rows = lab_sessions.sessions_between(get_db(), start, end, reagent=titrant, course=course)
    return jsonify({"from": start.isoformat(), "to": end.isoformat(), "sessions": [session_json(s) for s in rows]})


@api_bp.post("/lab-sessions")
@api_require("schedule.edit")
def create_session_api() -> Any:
    """Enter one session from JSON: the same keys, parser and limits as the form and the CSV import."""
    session = schedule_input.parse_session(read_json_body(), today=lab_today())
    user = current_user()
    sid = lab_sessions.add_session(get_db(), session, user.username if user else "?", source="api")
    return jsonify(session_json(lab_sessions.session_by_id(get_db(), sid))), 201
