"""The audit trail: every write, who made it and why, filterable; and whether the hash chain is whole."""

from __future__ import annotations

import datetime as dt
import json
from typing import Any
from zoneinfo import ZoneInfo

from flask import Blueprint, current_app, render_template, request

from stockroom import records
from stockroom.db import get_db, query
from stockroom.web import int_arg, parse_date_arg
from stockroom.web.access import login_required

bp = Blueprint("audit", __name__)

PAGE_SIZE = 100


def _actions(db: Any) -> list[str]:
    """The action codes present in the trail, in order: one index look-up per code, not a scan of the trail."""
    out: list[str] = []
    row = db.execute("SELECT min(action) FROM events").fetchone()
    while row is not None and row[0] is not None:
        out.append(str(row[0]))
        row = db.execute("SELECT min(action) FROM events WHERE action > ?", [out[-1]]).fetchone()
    return out


def _local(utc_text: str, zone: ZoneInfo) -> str:
    try:
        moment = dt.datetime.fromisoformat(utc_text)
    except ValueError:
        return utc_text
    return moment.astimezone(zone).strftime("%Y-%m-%d %H:%M")


@bp.get("/audit/")
@bp.get("/audit")
@login_required
def trail() -> Any:
    db = get_db()
    zone = ZoneInfo(current_app.config["LAB_TIMEZONE"])
    actor = (request.args.get("actor") or "").strip()
    action = (request.args.get("action") or "").strip()
    code = (request.args.get("batch") or "").strip()
    since = parse_date_arg(request.args.get("from"), "from")
    until = parse_date_arg(request.args.get("to"), "to")
    page = int_arg("page", 1, ge=1, le=1_000_000)
    where, params = ["1 = 1"], []
    if actor:
        where.append("e.actor = ?")
        params.append(actor)
    if action:
        # A prefix of the (lower-case ASCII) action codes, as an index range rather than a LIKE scan.
        where.append("{+}e.action >= ? AND {+}e.action < ?")
        params += [action.lower(), action.lower() + "\U0010ffff"]
    if code:
        where.append("e.batch_id = (SELECT id FROM batches WHERE code = ?)")
        params.append(code)
    if since:
        where.append("{+}e.occurred_at >= ?")
        params.append(since.isoformat())
    if until:
        where.append("{+}e.occurred_at < ?")
        params.append((until + dt.timedelta(days=1)).isoformat())
    # The count reads the range filters' indexes; the page walks the trail newest first and stops at
    # its last row (a unary + keeps SQLite from sorting every match of a range by id instead).
    count_where = " AND ".join(where).replace("{+}", "")
    page_where = " AND ".join(where).replace("{+}", "+")
    total = db.execute(f"SELECT count(*) FROM events e WHERE {count_where}", params).fetchone()[0]
    rows = query(
        db,
        f"SELECT e.*, b.code AS batch_code FROM events e LEFT JOIN batches b ON b.id = e.batch_id "
        f"WHERE {page_where} ORDER BY e.id DESC LIMIT ? OFFSET ?",
        [*params, PAGE_SIZE, (page - 1) * PAGE_SIZE],
    )
    for r in rows:
        r["local_time"] = _local(r["occurred_at"], zone)
        try:
            r["detail_items"] = sorted(json.loads(r["detail"] or "{}").items())
        except ValueError:
            r["detail_items"] = [("detail", r["detail"])]
    actions = _actions(db)
    broken, full_at = records.verify_chain_since_last_check(db) if page == 1 else (None, None)
    full_check_at = full_at.astimezone(zone).strftime("%Y-%m-%d %H:%M") if full_at else None
    return render_template(
        "audit/trail.html",
        rows=rows,
        total=total,
        page=page,
        pages=max(1, -(-total // PAGE_SIZE)),
        actions=actions,
        broken=broken,
        full_check_at=full_check_at,
        checked=(page == 1),
        zone=current_app.config["LAB_TIMEZONE"],
        args={
            "actor": actor,
            "action": action,
            "batch": code,
            "from": since.isoformat() if since else "",
            "to": until.isoformat() if until else "",
        },
    )
