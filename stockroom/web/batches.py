"""The batch register: a filterable list and one page per batch with its whole history."""

from __future__ import annotations

from flask import Blueprint, render_template, request

from stockroom import chemistry, records
from stockroom.db import get_db
from stockroom.policy import URGENCY, release_in_force
from stockroom.web import lab_today, parse_date_arg

bp = Blueprint("batches", __name__, url_prefix="/batches")

PAGE_SIZE = 50


@bp.get("/")
def list_batches() -> str:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    reagent = request.args.get("reagent") or None
    status = request.args.get("status") or None
    search = (request.args.get("q") or "").strip() or None
    views = records.batch_views(get_db(), on, reagent=reagent, status=status, search=search)
    try:
        page = max(1, int(request.args.get("page", "1")))
    except ValueError:
        page = 1
    pages = max(1, -(-len(views) // PAGE_SIZE))
    page = min(page, pages)
    shown = views[(page - 1) * PAGE_SIZE: page * PAGE_SIZE]
    return render_template(
        "batches/list.html", views=shown, on=on, reagent=reagent, status=status, q=search or "",
        statuses=URGENCY, reagents=[t.key for t in chemistry.list_titrants()], page=page, pages=pages,
        total=len(views),
    )


@bp.get("/<code>")
def show(code: str) -> str:
    db = get_db()
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    batch = records.batch_by_code(db, code)
    facts = records.batch_facts(db, batch["id"])
    from stockroom.policy import status_on

    report = status_on(facts, on)
    history = records.batch_history(db, batch["id"])
    return render_template(
        "batches/show.html", batch=batch, report=report, history=history, on=on,
        in_force=release_in_force(facts, on),
        titrant=chemistry.titrant(batch["reagent"]),
    )
