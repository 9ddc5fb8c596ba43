"""The read-only JSON API under /api/v1 (the preview endpoint lives in preview.py)."""

from __future__ import annotations

import datetime as dt
from typing import Any

from flask import Blueprint, current_app, jsonify, request

from stockroom import accounts, readmodel, records
from stockroom.db import get_db
from stockroom.policy import StatusReport
from stockroom.records import containers
from stockroom.web import containers as web_containers
from stockroom.web import int_arg, lab_today, parse_date_arg, read_json_body
from stockroom.web.access import api_require, current_user

bp = Blueprint("api", __name__, url_prefix="/api/v1")


def _summary(batch: dict[str, Any], report: StatusReport) -> dict[str, Any]:
    release = report.release if report.status.value not in ("expired", "withdrawn", "awaiting") else None
    return {
        "id": batch["code"],
        "titrant": batch["reagent"],
        "nominal_molarity": batch["nominal_molarity"],
        "unit": "mol/L",
        "status": report.status.value,
        "status_label": report.status.label,
        "status_reasons": list(report.reasons),
        "prepared_on": batch["prepared_on"],
        "molarity": release.molarity if release else None,
        "U": release.U if release else None,
        "k": release.k if release else None,
        "expires_on": report.release.expires_on.isoformat() if report.release else None,
        "next_check_due": report.next_check_due.isoformat() if report.next_check_due else None,
    }


@bp.get("/batches")
def batches() -> Any:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    db = get_db()
    titrant, status = request.args.get("titrant") or None, request.args.get("status") or None
    limit = int_arg("limit", 200, ge=1, le=1000)
    offset = int_arg("offset", 0, ge=0, le=10_000_000)
    views, total = readmodel.batch_page(db, on, reagent=titrant, status=status, limit=limit, offset=offset)
    body: dict[str, Any] = {
        "on": on.isoformat(),
        "total": total,
        "limit": limit,
        "offset": offset,
        "batches": [_summary(v.batch, v.report) for v in views],
    }
    if offset + limit < total:
        body["next"] = f"{request.path}?{_query(on, titrant, status, limit, offset + limit)}"
    return jsonify(body)


def _query(on: Any, titrant: str | None, status: str | None, limit: int, offset: int) -> str:
    from urllib.parse import urlencode

    q = {"on": on.isoformat(), "limit": limit, "offset": offset}
    if titrant:
        q["titrant"] = titrant
    if status:
        q["status"] = status
    return urlencode(q)


@bp.get("/batches/<code>")
def batch(code: str) -> Any:
    db = get_db()
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    b = records.batch_by_code(db, code)
    from stockroom.policy import status_on

    facts = readmodel.batch_facts(db, b["id"])
    report = status_on(facts, on)
    history = readmodel.batch_history(db, b["id"])
    # Open reads show who released by display name: a sign-in name here would tell guessers whom to lock out.
    shown = {u.username.lower(): u.display_name for u in accounts.list_users(db)}
    body = _summary(b, report)
    body.update(
        {
            "volume_l": b["volume_l"],
            "prepared_by": b["prepared_by"],
            "concentrate_lot": b["concentrate_lot"],
            "water_grade": b["water_grade"],
            "container": b["container"],
            "releases": [
                {
                    "molarity": r["molarity"],
                    "u": r["u"],
                    "U": r["expanded_u"],
                    "k": r["k"],
                    "reference_temperature_c": r["reference_temperature_c"],
                    "released_on": r["released_on"],
                    "expires_on": r["expires_on"],
                    "released_by": shown.get(r["recorded_by"].lower(), r["recorded_by"]),
                    "superseded": r["superseded"],
                }
                for r in history["releases"]
            ],
            "rechecks": [
                {
                    "performed_on": r["performed_on"],
                    "molarity": r["current"]["molarity"],
                    "u": r["current"]["u"],
                    "U": r["current"]["expanded_u"],
                    "k": r["current"]["k"],
                    "n": r["current"]["n"],
                    "analyst": r["analyst"],
                    "decision": r["decision"]["decision"] if r["decision"] else None,
                }
                for r in history["runs"]
                if r["purpose"] == "recheck"
            ],
            "withdrawn_on": history["withdrawals"][0]["withdrawn_on"] if history["withdrawals"] else None,
            "volume_remaining_l": round(containers.volume_remaining_l(db, b["id"]), 6),
            "containers": [web_containers.container_json(c) for c in web_containers.container_rows(db, b["id"], facts, on)],
        }
    )
    return jsonify(body)


@bp.post("/batches/<code>/dispensings")
@api_require("stock.dispense")
def create_dispensing(code: str) -> Any:
    """Fill a container from a batch: {volume_l, dispensed_on, container, destination}; the form's reader and rules.

    201 with the container; 422 for bad input or more than remains; 409 when the batch has no value in
    force that day (not released, expired, withdrawn) or is on hold.
    """
    db = get_db()
    batch = records.batch_by_code(db, code)
    row = web_containers.record_dispensing(db, batch, _json_body(), form=False)
    remaining = containers.volume_remaining_l(db, batch["id"])
    return jsonify(
        {
            "container_id": row["id"],
            "code": row["code"],
            "batch": batch["code"],
            "kind": row["kind"],
            "volume_l": row["volume_l"],
            "filled_on": row["filled_on"],
            "expires_on": row["expires_on"],
            "destination": {"room": row["room"], "course": row["course"], "section": row["section"]},
            "volume_remaining_l": round(remaining, 6),
        }
    ), 201


# ---------------------------------------------------------------- writes (API token only)


def _json_body() -> dict[str, Any]:
    # The one JSON body reader (content type, size, depth, characters): stockroom.web.read_json_body.
    return read_json_body()


def _as_text(value: Any) -> Any:
    # The form readers take what a browser sends; a JSON number is passed as its plain decimal text
    # (a bool stays itself so the reader refuses it).
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, (int, float)):
        return repr(value) if isinstance(value, float) else str(value)
    return value


@bp.post("/batches")
@api_require("batch.register")
def create_batch() -> Any:
    """Register a batch from JSON: the same fields and rules as the register form."""
    from stockroom.web import intake

    db = get_db()
    data = _json_body()
    user = current_user()
    values, warnings = intake.read_batch({k: _as_text(v) for k, v in data.items()}, records.policies(db), lab_today())
    row = records.create_batch(db, values, user.username if user else "?")
    return jsonify({"id": row["code"], "status": "awaiting", "warnings": warnings}), 201


@bp.post("/batches/<code>/runs")
@api_require("run.record")
def create_run(code: str) -> Any:
    """Record a run from JSON (stockroom.run_input's shape); answers the computed result; nothing is decided.

    The same parser and the same record_run as the run form: unknown keys, a withdrawn batch, an
    expired lot, an instrument of the wrong kind... are refused here exactly as there.
    """
    from stockroom import run_input, workflow

    db = get_db()
    batch = records.batch_by_code(db, code)
    data = _json_body()
    run = run_input.parse_run(data, today=lab_today(), prepared_on=dt.date.fromisoformat(batch["prepared_on"]))
    user = current_user()
    run_id, _ = workflow.record_run(db, current_app.config, batch, run, user.username if user else "?")
    # The result as stored, with the warnings about the run's instruments; result_version is what a
    # decision may quote back so that it is refused (409) if the result changed meanwhile.
    current = records.run_by_id(db, run_id)["current"]
    return jsonify({"run_id": run_id, "result_version": current["id"], "result": current["result"]}), 201


@bp.post("/runs/<int:run_id>/decision")
@api_require("run.decide")
def decide_run(run_id: int) -> Any:
    """Accept (releasing a certifying run) or reject a run: {decision, reason, released_on, result_version}."""
    from stockroom import workflow
    from stockroom.web.forms import date as form_date
    from stockroom.web.inputs import Parser

    db = get_db()
    data = _json_body()
    p = Parser()
    p.known_keys(data, ("decision", "reason", "released_on", "result_version"))
    decision = p.choice(data.get("decision"), "decision", ("accept", "reject"))
    reason = p.text(data.get("reason"), "reason", required=decision == "reject", max_length=500) or ""
    run = records.run_by_id(db, run_id)
    released_on = form_date(
        p,
        data.get("released_on"),
        "released_on",
        required=False,
        not_after=lab_today(),
        not_before=dt.date.fromisoformat(run["performed_on"]),
    )
    # Optional: the result_version the client was given when recording; checked when given.
    shown_version = p.integer(data.get("result_version"), "result_version", ge=1, required=False)
    p.raise_if_errors()
    user = current_user()
    actor = user.username if user else "?"
    if decision == "accept":
        release_id = workflow.accept(db, run_id, actor, released_on=released_on, reason=reason, shown_version=shown_version)
        return jsonify({"run_id": run_id, "decision": "accept", "release_id": release_id}), 200
    workflow.reject(db, run_id, reason, actor)
    return jsonify({"run_id": run_id, "decision": "reject"}), 200


@bp.get("/catalogue")
def catalogue() -> Any:
    """Every titrant, primary standard and titrating pair, with classes, ratios and rules (stockroom.chemistry)."""
    from stockroom import chemistry

    return jsonify(chemistry.catalogue())
