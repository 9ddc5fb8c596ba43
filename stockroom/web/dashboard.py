"""The front page: which batches need attention today, and which are in service."""

from __future__ import annotations

import datetime as dt

from flask import Blueprint, render_template, request

from stockroom import records
from stockroom.db import get_db
from stockroom.policy import URGENCY, Status
from stockroom.web import lab_today, parse_date_arg

bp = Blueprint("dashboard", __name__)


@bp.get("/")
def index() -> str:
    on = parse_date_arg(request.args.get("on"), "on") or lab_today()
    views = records.batch_views(get_db(), on)
    groups: dict[Status, list[records.BatchView]] = {s: [] for s in URGENCY}
    for v in views:
        groups[v.report.status].append(v)
    return render_template(
        "dashboard/index.html", on=on, groups=groups, urgency=URGENCY, Status=Status,
        is_today=(on == lab_today()), total=len(views), one_day=dt.timedelta(days=1),
    )
