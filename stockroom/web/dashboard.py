"""The front page: which batches need attention today, and which are in service."""

from __future__ import annotations

import datetime as dt
from typing import Any

from flask import Blueprint, current_app, render_template, request
from markupsafe import Markup

from stockroom import planning, prep_plan, readmodel, records
from stockroom.db import get_db
from stockroom.policy import URGENCY, Status
from stockroom.web import lab_today, parse_date_arg, viewcache

bp = Blueprint("dashboard", __name__)

# Batches out of use (expired or withdrawn) are listed for this many days; older ones are only counted.
RECENT_DAYS = 30


@bp.get("/")
def index() -> str:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    db = get_db()
    # Markup() marks the cached fragment as already escaped (it was rendered by Jinja with autoescape).
    board = viewcache.cached(db, ("dashboard", on), lambda: Markup(_render_board(db, on)))
    cfg = current_app.config
    # The settings are part of the key: the answer depends on the lead time and the notice days.
    key = ("low-stock", on, planning.lead_days(cfg), cfg.get("LOW_STOCK_NOTICE_DAYS"))
    low = viewcache.cached(db, key, lambda: low_stock(db, on, cfg))
    return render_template(
        "dashboard/index.html", on=on, is_today=(on == lab_today()), board=board, first_steps=first_steps(db), low_stock=low
    )


def low_stock(db: Any, on: dt.date, config: Any) -> tuple[prep_plan.TitrantPlan, ...]:
    """Titrants whose first shortfall, as the schedule stands, falls within the lead time (plus the notice days) of `on`."""
    lead = planning.lead_days(config)
    notice = max(0, int(config.get("LOW_STOCK_NOTICE_DAYS") or 0))
    plan = planning.build_plan(db, today=on, start=on, end=on + dt.timedelta(days=lead + notice), lead=lead)
    return plan.low_stock(notice)


def first_steps(db: Any) -> list[dict[str, Any]] | None:
    """What to do first in a new prep room, each step with whether it is done; None once a batch exists.

    The steps: look over the reagent policies (the starting ones are defaults to check against the
    lab's own practice; done when someone has recorded a policy), register a primary-standard lot,
    register a batch. The last step done hides the list.
    """
    if db.execute("SELECT 1 FROM batches LIMIT 1").fetchone():
        return None
    policy_set = db.execute("SELECT 1 FROM events WHERE action = 'policy.change' LIMIT 1").fetchone() is not None
    lot_made = db.execute("SELECT 1 FROM standard_lots LIMIT 1").fetchone() is not None
    return [
        {"key": "policy", "done": policy_set, "permission": "policy.edit"},
        {"key": "lot", "done": lot_made, "permission": "lot.register"},
        {"key": "batch", "done": False, "permission": "batch.register"},
    ]


def _render_board(db: Any, on: dt.date) -> str:
    groups, counts, total = _board(db, on)
    return render_template(
        "dashboard/_board.html",
        on=on,
        groups=groups,
        counts=counts,
        urgency=URGENCY,
        Status=Status,
        total=total,
        recent_days=RECENT_DAYS,
        undecided=records.undecided_runs(db),
    )


def _board(db: Any, on: dt.date) -> tuple[dict[Status, list[readmodel.BatchView]], dict[Status, int], int]:
    """Batches shown on the board by status, the count of each status, and how many batches existed."""
    # Only the batches shown are read in full; the rest are counted in SQL.
    recent_from = on - dt.timedelta(days=RECENT_DAYS)
    shown = readmodel.coarse_statuses(db, on, only=("live", "awaiting"), out_since=recent_from)
    groups: dict[Status, list[readmodel.BatchView]] = {s: [] for s in URGENCY}
    for v in readmodel.views_of(db, [i for i, _, _ in shown], on):
        groups[v.report.status].append(v)
    counts = {s: len(groups[s]) for s in URGENCY}
    coarse = readmodel.coarse_counts(db, on)
    for s in (Status.EXPIRED, Status.WITHDRAWN):
        counts[s] = coarse[s.value]
    return groups, counts, sum(coarse.values())
