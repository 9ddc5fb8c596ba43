"""The recorded facts of batches (releases, re-checks, withdrawal, registration in error, date prepared), read in bulk.

These are the plain values policy.status_on needs, as the record tables hold them. Recalls add review
facts on top (stockroom.readmodel.facts_of joins the two); this layer does not know about recalls.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable

import sqlite_utils

from stockroom.policy import BatchFacts, CheckFact, ReleaseFact


def recorded_facts(db: sqlite_utils.Database, batch_ids: Iterable[int] | None = None) -> dict[int, BatchFacts]:
    """BatchFacts (without review facts) of many batches, or all when None, from five queries in all."""
    where, params = "", []
    ids = list(batch_ids) if batch_ids is not None else None
    if ids is not None:
        if not ids:
            return {}
        where = f" WHERE batch_id IN ({','.join('?' * len(ids))})"
        params = ids
    releases: dict[int, list[ReleaseFact]] = defaultdict(list)
    for r in db.execute(
        "SELECT id, batch_id, released_on, expires_on, molarity, u, expanded_u, k, recheck_interval_days, "
        "tolerance_rel FROM releases" + where,
        params,
    ):
        releases[r["batch_id"]].append(
            ReleaseFact(
                id=r["id"],
                released_on=dt.date.fromisoformat(r["released_on"]),
                expires_on=dt.date.fromisoformat(r["expires_on"]),
                molarity=r["molarity"],
                u=r["u"],
                U=r["expanded_u"],
                k=r["k"],
                recheck_interval_days=r["recheck_interval_days"],
                tolerance_rel=r["tolerance_rel"],
            )
        )
    checks: dict[int, list[CheckFact]] = defaultdict(list)
    check_where = where.replace("batch_id", "r.batch_id")
    for r in db.execute(
        "SELECT r.batch_id, r.performed_on, res.molarity, res.u FROM runs r "
        "JOIN run_results res ON res.id = (SELECT max(id) FROM run_results WHERE run_id = r.id) "
        "LEFT JOIN decisions d ON d.run_id = r.id"
        + (check_where + " AND" if check_where else " WHERE")
        + " r.purpose = 'recheck' AND coalesce(d.decision, 'accept') = 'accept'",
        params,
    ):
        checks[r["batch_id"]].append(CheckFact(dt.date.fromisoformat(r["performed_on"]), r["molarity"], r["u"]))
    withdrawn = {
        r["batch_id"]: dt.date.fromisoformat(r["withdrawn_on"])
        for r in db.execute(
            "SELECT batch_id, min(withdrawn_on) AS withdrawn_on FROM withdrawals" + where + " GROUP BY batch_id", params
        )
    }
    in_error = {
        r["batch_id"]: dt.date.fromisoformat(r["marked_on"])
        for r in db.execute("SELECT batch_id, marked_on FROM registrations_in_error" + where, params)
    }
    prepared = {
        r["id"]: dt.date.fromisoformat(r["prepared_on"])
        for r in db.execute("SELECT id, prepared_on FROM batches" + (where.replace("batch_id", "id") if where else ""), params)
    }
    return {
        bid: BatchFacts(
            prepared_on=p,
            releases=tuple(releases.get(bid, ())),
            rechecks=tuple(checks.get(bid, ())),
            withdrawn_on=withdrawn.get(bid),
            registered_in_error_on=in_error.get(bid),
        )
        for bid, p in prepared.items()
    }
