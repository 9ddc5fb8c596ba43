"""The read model: batches as people see them, derived from the records and the recalls on a date.

Status is never stored: each view here is policy.status_on over the facts the record layer reads
(records.recorded_facts) with the review facts the open recalls add (recall.review_facts).
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import records
from stockroom.errors import NotFound
from stockroom.policy import BatchFacts, StatusReport, status_on
from stockroom.recall import review_facts

__all__ = [
    "BatchView",
    "batch_facts",
    "batch_history",
    "batch_page",
    "batch_views",
    "coarse_statuses",
    "facts_of",
    "review_facts",
    "views_of",
]


@dataclass(frozen=True)
class BatchView:
    """A batch row with its derived status on a date."""

    batch: dict[str, Any]
    report: StatusReport


def like_literal(text: str) -> str:
    """text for a LIKE pattern with ESCAPE '\\': its %, _ and \\ match themselves, not any characters."""
    return text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")


def facts_of(db: sqlite_utils.Database, batch_ids: Iterable[int] | None = None) -> dict[int, BatchFacts]:
    """BatchFacts of many batches (all when None): the recorded facts plus the recalls' review facts.

    A few queries in all, never one per batch; the review facts cost one query while no recall is on record.
    """
    facts = records.recorded_facts(db, batch_ids)
    reviews = review_facts(db)
    if not reviews:
        return facts
    return {bid: replace(f, reviews=reviews.get(bid, ())) for bid, f in facts.items()}


def batch_facts(db: sqlite_utils.Database, batch_id: int) -> BatchFacts:
    """The BatchFacts of one batch (with review facts); NotFound if there is no such batch."""
    facts = facts_of(db, [batch_id]).get(batch_id)
    if facts is None:
        raise NotFound(f"no batch with id {batch_id}")
    return facts


def coarse_statuses(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    search: str | None = None,
) -> list[tuple[int, str, str | None]]:
    """(batch id, coarse status, since) of every batch that existed on `on`, newest first, from SQL alone.

    The coarse status is "registered_in_error", "withdrawn", "expired" or "awaiting" exactly as
    policy.status_on would say, or
    "live" for a batch whose finer status (in service, re-check due, drifting) needs its history; `since`
    is the ISO date withdrawn or the expiry date, else None. Lists
    that show thousands of batches use this so that only the rows they display pay for the rest.
    """
    day = on.isoformat()
    sql = (
        "SELECT b.id, "
        "(SELECT min(w.withdrawn_on) FROM withdrawals w WHERE w.batch_id = b.id) AS withdrawn_on, "
        "(SELECT r.expires_on FROM releases r WHERE r.batch_id = b.id AND r.released_on <= ? "
        " ORDER BY r.released_on DESC, r.id DESC LIMIT 1) AS expires_on, "
        "EXISTS (SELECT 1 FROM releases r WHERE r.batch_id = b.id AND r.released_on <= ?) AS released, "
        "(SELECT e.marked_on FROM registrations_in_error e WHERE e.batch_id = b.id) AS in_error_on "
        "FROM batches b WHERE b.prepared_on <= ?"
    )
    params: list[Any] = [day, day, day]
    if reagent:
        sql += " AND b.reagent = ?"
        params.append(reagent)
    if search:
        sql += " AND (b.code LIKE ? ESCAPE '\\' OR b.prepared_by LIKE ? ESCAPE '\\' OR b.notes LIKE ? ESCAPE '\\')"
        params += [f"%{like_literal(search)}%"] * 3
    sql += " ORDER BY b.prepared_on DESC, b.id DESC"
    out = []
    for r in db.execute(sql, params):
        since = None
        if r["in_error_on"] is not None:  # policy.status_on: registered in error whatever the date asked
            coarse, since = "registered_in_error", r["in_error_on"]
        elif r["withdrawn_on"] is not None and r["withdrawn_on"] <= day:
            coarse, since = "withdrawn", r["withdrawn_on"]
        elif not r["released"]:
            coarse = "awaiting"
        elif r["expires_on"] < day:
            coarse, since = "expired", r["expires_on"]
        else:
            coarse = "live"
        out.append((int(r["id"]), coarse, since))
    return out


COARSE = ("registered_in_error", "expired", "withdrawn", "awaiting")  # the statuses SQL alone tells


def views_of(db: sqlite_utils.Database, ids: list[int], on: dt.date) -> list[BatchView]:
    """BatchViews (row as it now reads, full status on `on`) of the given batches, in the order given."""
    if not ids:
        return []
    rows: dict[int, dict[str, Any]] = {}
    for i in range(0, len(ids), 500):
        chunk = ids[i : i + 500]
        for r in dbmod.query(db, f"SELECT * FROM batches WHERE id IN ({','.join('?' * len(chunk))})", chunk):
            rows[r["id"]] = r
    records.with_amendments(list(rows.values()), db)
    facts = facts_of(db, ids) if len(ids) <= 500 else facts_of(db)
    return [BatchView(rows[i], status_on(facts[i], on)) for i in ids if i in rows]


def batch_page(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    status: str | None = None,
    search: str | None = None,
    limit: int | None = None,
    offset: int = 0,
) -> tuple[list[BatchView], int]:
    """One page of the batches that existed on `on` (optionally filtered), newest first, and how many match.

    Only the page's batches are computed in full, except for the finer statuses (in service, re-check
    due, drifting), which need every live batch's history to filter on.
    """
    coarse = coarse_statuses(db, on, reagent=reagent, search=search)
    end = None if limit is None else offset + limit
    if status is not None and status not in COARSE:
        live = views_of(db, [i for i, c, _ in coarse if c == "live"], on)
        matching = [v for v in live if v.report.status.value == status]
        return matching[offset:end], len(matching)
    ids = [i for i, c, _ in coarse if status is None or c == status]
    return views_of(db, ids[offset:end], on), len(ids)


def batch_views(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    status: str | None = None,
    search: str | None = None,
) -> list[BatchView]:
    """Every batch that existed on `on` (optionally filtered) with its status then, newest first."""
    return batch_page(db, on, reagent=reagent, status=status, search=search)[0]


def batch_history(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any]:
    """Everything recorded about one batch: runs with replicates, decisions, releases, withdrawals, events."""
    runs = dbmod.query(db, "SELECT * FROM runs WHERE batch_id = ? ORDER BY performed_on, id", [batch_id])
    run_ids = [r["id"] for r in runs]
    marks = ",".join("?" * len(run_ids))
    reps: dict[int, list[dict[str, Any]]] = defaultdict(list)
    excl: dict[int, list[dict[str, Any]]] = defaultdict(list)
    decs: dict[int, list[dict[str, Any]]] = defaultdict(list)
    if run_ids:
        for r in dbmod.query(db, f"SELECT * FROM replicates WHERE run_id IN ({marks}) ORDER BY position", run_ids):
            reps[r["run_id"]].append(r)
        for r in dbmod.query(db, f"SELECT * FROM exclusions WHERE run_id IN ({marks}) ORDER BY id", run_ids):
            excl[r["run_id"]].append(r)
        for r in dbmod.query(db, f"SELECT * FROM decisions WHERE run_id IN ({marks}) ORDER BY id", run_ids):
            decs[r["run_id"]].append(r)
    lot_ids = {r["standard_lot_id"] for r in runs if r["standard_lot_id"]}
    lots = {}
    if lot_ids:
        lots = {
            r["id"]: r
            for r in dbmod.query(db, f"SELECT * FROM standard_lots WHERE id IN ({','.join('?' * len(lot_ids))})", list(lot_ids))
        }
    ref_ids = {r["reference_batch_id"] for r in runs if r["reference_batch_id"]}
    refs = {}
    if ref_ids:
        refs = {
            r["id"]: r
            for r in dbmod.query(db, f"SELECT id, code FROM batches WHERE id IN ({','.join('?' * len(ref_ids))})", list(ref_ids))
        }
    current = records.latest_results(db, run_ids)
    for r in runs:
        r["current"] = current.get(r["id"])
        r["replicates"] = reps[r["id"]]
        r["exclusions"] = excl[r["id"]]
        r["decisions"] = decs[r["id"]]
        r["decision"] = decs[r["id"]][-1] if decs[r["id"]] else None
        r["lot"] = lots.get(r["standard_lot_id"])
        r["reference"] = refs.get(r["reference_batch_id"])
    releases = dbmod.query(db, "SELECT * FROM releases WHERE batch_id = ? ORDER BY released_on, id", [batch_id])
    superseded = {r["supersedes_id"] for r in releases if r["supersedes_id"]}
    # Each release's number within the batch (records.release_numbers: by the order recorded).
    numbers = {rid: n for n, rid in enumerate(sorted(r["id"] for r in releases), start=1)}
    for r in releases:
        r["superseded"] = r["id"] in superseded
        r["number"] = numbers[r["id"]]
    return {
        "runs": runs,
        "releases": releases,
        "withdrawals": dbmod.query(db, "SELECT * FROM withdrawals WHERE batch_id = ? ORDER BY id", [batch_id]),
        "registrations_in_error": dbmod.query(
            db, "SELECT * FROM registrations_in_error WHERE batch_id = ? ORDER BY id", [batch_id]
        ),
        "prints": dbmod.query(db, "SELECT * FROM label_prints WHERE batch_id = ? ORDER BY id", [batch_id]),
        "events": dbmod.query(db, "SELECT * FROM events WHERE batch_id = ? ORDER BY id", [batch_id]),
        "amendments": dbmod.query(
            db, "SELECT * FROM amendments WHERE entity = 'batches' AND entity_id = ? ORDER BY id", [batch_id]
        ),
    }
