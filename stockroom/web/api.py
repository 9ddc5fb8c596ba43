"""The read-only JSON API under /api/v1 (the preview endpoint lives in preview.py)."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, jsonify, request

from stockroom import records
from stockroom.db import get_db
from stockroom.policy import StatusReport
from stockroom.web import lab_today, parse_date_arg

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
    views = records.batch_views(get_db(), on, reagent=request.args.get("titrant") or None,
                                status=request.args.get("status") or None)
    return jsonify({"on": on.isoformat(), "batches": [_summary(v.batch, v.report) for v in views]})


@bp.get("/batches/<code>")
def batch(code: str) -> Any:
    db = get_db()
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    b = records.batch_by_code(db, code)
    from stockroom.policy import status_on

    report = status_on(records.batch_facts(db, b["id"]), on)
    history = records.batch_history(db, b["id"])
    body = _summary(b, report)
    body.update({
        "volume_l": b["volume_l"],
        "prepared_by": b["prepared_by"],
        "concentrate_lot": b["concentrate_lot"],
        "water_grade": b["water_grade"],
        "container": b["container"],
        "releases": [
            {"molarity": r["molarity"], "u": r["u"], "U": r["expanded_u"], "k": r["k"],
             "reference_temperature_c": r["reference_temperature_c"], "released_on": r["released_on"],
             "expires_on": r["expires_on"], "released_by": r["recorded_by"], "superseded": r["superseded"]}
            for r in history["releases"]
        ],
        "rechecks": [
            {"performed_on": r["performed_on"], "molarity": r["current"]["molarity"], "u": r["current"]["u"],
             "U": r["current"]["expanded_u"], "k": r["current"]["k"], "n": r["current"]["n"],
             "analyst": r["analyst"],
             "decision": r["decision"]["decision"] if r["decision"] else None}
            for r in history["runs"] if r["purpose"] == "recheck"
        ],
        "withdrawn_on": history["withdrawals"][0]["withdrawn_on"] if history["withdrawals"] else None,
    })
    return jsonify(body)
