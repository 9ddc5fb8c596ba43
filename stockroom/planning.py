"""The prep plan read from the records: the schedule, the batches of its titrants, their volume remaining.

Loads in a fixed number of queries (sessions, batches, facts, volumes gone) and hands plain values to
stockroom.prep_plan, which does the arithmetic.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import prep_plan
from stockroom.readmodel import facts_of
from stockroom.records import lab_sessions
from stockroom.records.containers import volume_out_l

# The window a plan covers when none is asked for, days from today.
DEFAULT_WEEKS = 8


def lead_days(config: Mapping[str, Any]) -> int:
    """Preparation plus standardization days, from the settings (PREP_LEAD_*_DAYS)."""
    return int(config.get("PREP_LEAD_PREPARATION_DAYS", 0) or 0) + int(config.get("PREP_LEAD_STANDARDIZATION_DAYS", 0) or 0)


def demands(db: sqlite_utils.Database, start: dt.date, end: dt.date, reagent: str | None = None) -> list[prep_plan.Demand]:
    """The scheduled (not cancelled) sessions dated start..end as the plan's demands."""
    return [
        prep_plan.Demand(
            session_id=int(s["id"]),
            on=dt.date.fromisoformat(s["session_on"]),
            course=s["course"],
            section=s["section"],
            room=s["room"],
            reagent=s["reagent"],
            nominal_molarity=float(s["nominal_molarity"]),
            volume_l=float(s["volume_needed_l"]),
        )
        for s in lab_sessions.sessions_between(db, start, end, reagent=reagent, include_cancelled=False)
    ]


def supplies(db: sqlite_utils.Database, reagents: set[str], today: dt.date) -> list[prep_plan.Supply]:
    """The batches of the given titrants (catalogue keys) that may still serve from `today` on, with their
    litres remaining and their facts.

    A batch marked registered in error, withdrawn by today, or whose newest release expired before
    today, can serve no later session (policy.status_on): the per-batch status summary (schema 0015) leaves it out in SQL,
    so a plan reads the batches that may serve, not the titrant's whole history.
    """
    if not reagents:
        return []
    marks = ",".join("?" * len(reagents))
    day = today.isoformat()
    rows = dbmod.query(
        db,
        "SELECT b.id, b.code, b.reagent, b.nominal_molarity, b.volume_l FROM batches b "
        "JOIN batch_status_summary s ON s.batch_id = b.id "
        f"WHERE b.reagent IN ({marks}) "
        "AND (s.withdrawn_on IS NULL OR s.withdrawn_on > ?) AND s.in_error_on IS NULL "
        "AND (s.last_expires_on IS NULL OR s.last_expires_on >= ?) ORDER BY b.code",
        [*sorted(reagents), day, day],
    )
    ids = [r["id"] for r in rows]
    facts = facts_of(db, ids)
    gone = volume_out_l(db, ids)
    return [
        prep_plan.Supply(
            code=r["code"],
            reagent=r["reagent"],
            nominal_molarity=float(r["nominal_molarity"]),
            remaining_l=max(0.0, float(r["volume_l"]) - gone[r["id"]]),
            facts=facts[r["id"]],
        )
        for r in rows
    ]


def build_plan(
    db: sqlite_utils.Database, *, today: dt.date, start: dt.date, end: dt.date, lead: int, reagent: str | None = None
) -> prep_plan.Plan:
    """The prep plan for sessions dated start..end (sessions from today on draw; earlier ones already did)."""
    wanted = demands(db, today, end, reagent) if end >= today else []
    return prep_plan.plan(
        supplies(db, {d.reagent for d in wanted}, today), wanted, today=today, start=start, end=end, lead_days=lead
    )
