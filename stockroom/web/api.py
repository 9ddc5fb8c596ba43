"""The read-only JSON API under /api/v1 (the preview endpoint lives in preview.py)."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, jsonify, request

from stockroom import readmodel, records
from stockroom.db import get_db
from stockroom.policy import StatusReport
from stockroom.web import lab_today, parse_date_arg
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
    from stockroom.errors import FieldError, InvalidInput

    db = get_db()
    titrant, status = request.args.get("titrant") or None, request.args.get("status") or None
    try:
        limit = int(request.args.get("limit", "200"))
        offset = int(request.args.get("offset", "0"))
    except ValueError:
        raise InvalidInput([FieldError("limit", "limit and offset must be whole numbers")]) from None
    if not 1 <= limit <= 1000 or offset < 0:
        raise InvalidInput([FieldError("limit", "limit must be between 1 and 1000 and offset at least 0")])
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

    report = status_on(readmodel.batch_facts(db, b["id"]), on)
    history = readmodel.batch_history(db, b["id"])
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
                    "released_by": r["recorded_by"],
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
        }
    )
    return jsonify(body)


# ---------------------------------------------------------------- writes (API token only)


def _json_body() -> dict[str, Any]:
    from stockroom.errors import FieldError, InvalidInput

    data = request.get_json(silent=True)
    if not isinstance(data, dict):
        raise InvalidInput([FieldError("_body", "the request body must be a JSON object")])
    return data


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


_REP_KEYS = ("gross_g", "tare_g", "mass_g", "aliquot_ml", "initial_ml", "final_ml", "blank_ml", "temperature_c")


@bp.post("/batches/<code>/runs")
@api_require("run.record")
def create_run(code: str) -> Any:
    """Record a run from JSON (`replicates` as a list); answers the computed result; nothing is decided."""
    from stockroom import workflow
    from stockroom.errors import FieldError, InvalidInput
    from stockroom.web import runs

    db = get_db()
    batch = records.batch_by_code(db, code)
    data = _json_body()
    method = data.get("method", "primary")
    if method not in ("primary", "secondary"):
        raise InvalidInput([FieldError("method", "must be 'primary' or 'secondary'")])
    reps = data.get("replicates")
    if not isinstance(reps, list) or not reps or len(reps) > runs.MAX_ROWS:
        raise InvalidInput([FieldError("replicates", f"must be a list of 1 to {runs.MAX_ROWS} replicates")])
    form: dict[str, Any] = {k: _as_text(v) for k, v in data.items() if k not in ("replicates", "method")}
    for i, rep in enumerate(reps, start=1):
        if not isinstance(rep, dict):
            raise InvalidInput([FieldError(f"replicates[{i - 1}]", "must be an object")])
        for key, value in rep.items():
            if key == "exclude_reason":
                form[f"r{i}_exclude"] = "on"
                form[f"r{i}_exclude_reason"] = value
            elif key in _REP_KEYS:
                form[f"r{i}_{key}"] = _as_text(value)
            else:
                raise InvalidInput([FieldError(f"replicates[{i - 1}].{key}", "is not a field of a replicate")])
    meta, partner, rep_rows, excluded, p = runs.parse_run(batch, method, form)
    if not p.ok:
        raise InvalidInput([_json_field(e) for e in p.errors])
    user = current_user()
    actor = user.username if user else "?"
    config = current_app.config
    if method == "primary":
        run_id, result = workflow.record_primary_run(db, config, batch, partner, meta, rep_rows, actor, excluded)
    else:
        run_id, result = workflow.record_secondary_run(db, config, batch, partner, meta, rep_rows, actor, excluded)
    return jsonify({"run_id": run_id, "result": workflow.snapshot(result)}), 201


def _json_field(error: Any) -> Any:
    """r3_final_ml -> replicates[2].final_ml, so JSON clients see their own paths."""
    import re

    from stockroom.errors import FieldError

    m = re.fullmatch(r"r(\d+)_(\w+)", error.field)
    if m:
        return FieldError(f"replicates[{int(m.group(1)) - 1}].{m.group(2)}", error.message)
    return error


@bp.post("/runs/<int:run_id>/decision")
@api_require("run.decide")
def decide_run(run_id: int) -> Any:
    """Accept (releasing a certifying run) or reject a run: {decision, reason, released_on}."""
    import datetime as dt

    from stockroom import workflow
    from stockroom.web.forms import date as form_date
    from stockroom.web.inputs import Parser

    db = get_db()
    data = _json_body()
    p = Parser()
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
    p.raise_if_errors()
    user = current_user()
    actor = user.username if user else "?"
    if decision == "accept":
        release_id = workflow.accept(db, run_id, actor, released_on=released_on, reason=reason)
        return jsonify({"run_id": run_id, "decision": "accept", "release_id": release_id}), 200
    workflow.reject(db, run_id, reason, actor)
    return jsonify({"run_id": run_id, "decision": "reject"}), 200
