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
    "coarse_count",
    "coarse_counts",
    "coarse_statuses",
    "facts_of",
    "review_facts",
    "search_index_problems",
    "status_summary_problems",
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


# The coarse status in SQL, from the per-batch summary the schema keeps (batch_status_summary): exactly
# policy.status_on's first three tests. The expiry is that of the newest release made by the date; the
# summary holds it for every date on or after the batch's last release, so the releases themselves are
# only read for a date before it (a look back in time).
_EXPIRES = (
    "CASE WHEN s.last_released_on <= :day THEN s.last_expires_on ELSE "
    "(SELECT r.expires_on FROM releases r WHERE r.batch_id = b.id AND r.released_on <= :day "
    "ORDER BY r.released_on DESC, r.id DESC LIMIT 1) END"
)
_COARSE = (
    "CASE WHEN s.in_error_on IS NOT NULL THEN 'registered_in_error' "  # policy.status_on: whatever the date asked
    "WHEN s.withdrawn_on IS NOT NULL AND s.withdrawn_on <= :day THEN 'withdrawn' "
    "WHEN s.first_released_on IS NULL OR s.first_released_on > :day THEN 'awaiting' "
    f"WHEN ({_EXPIRES}) < :day THEN 'expired' ELSE 'live' END"
)
COARSE = ("awaiting", "live", "expired", "withdrawn", "registered_in_error")
# The statuses SQL alone tells; "live" stands for the finer ones (in service, re-check due, drifting).
COARSE_WITHOUT_HISTORY = tuple(c for c in COARSE if c != "live")


# The register's text search: a literal, ASCII-case-blind substring of the code, the preparer or the notes
# of a batch as it now reads (corrections applied), exactly SQLite's LIKE. It reads the trigram index the
# schema keeps (0016_search_index, table batch_search): a search of 3 characters or more asks the index
# for the batches holding the text (trigrams fold case a little more widely than LIKE, so the index's
# answer is a superset) and LIKE decides among those few. A trigram index cannot answer a search of 1
# or 2 characters; such a search reads the index's copy of the three fields of every batch with LIKE:
# it finds most of the register anyway (every code holds digits and hyphens), so it costs what it shows.
SEARCH_INDEX_MIN_CHARS = 3
_SEARCH_LIKE = "(code LIKE :like ESCAPE '\\' OR prepared_by LIKE :like ESCAPE '\\' OR notes LIKE :like ESCAPE '\\')"


def _search_condition(search: str, params: dict[str, Any]) -> str:
    """The WHERE term on batches b that keeps the batches whose code, preparer or notes hold `search`."""
    params["like"] = f"%{like_literal(search)}%"
    if len(search) >= SEARCH_INDEX_MIN_CHARS:
        # One FTS5 phrase (double quotes doubled): the text's trigrams in order, nothing of the query syntax.
        params["match"] = '"' + search.replace('"', '""') + '"'
        return f"b.id IN (SELECT rowid FROM batch_search WHERE batch_search MATCH :match AND {_SEARCH_LIKE})"
    return f"b.id IN (SELECT rowid FROM batch_search WHERE {_SEARCH_LIKE})"


def _coarse_sql(
    on: dt.date, reagent: str | None, search: str | None, only: Iterable[str] | None, out_since: dt.date | None
) -> tuple[str, dict[str, Any]]:
    """The rows (id, coarse, since, prepared_on) of the batches that existed on `on`, filtered; SQL and parameters."""
    params: dict[str, Any] = {"day": on.isoformat()}
    inner = (
        f"SELECT b.id, b.prepared_on, {_COARSE} AS coarse, s.withdrawn_on, s.in_error_on, {_EXPIRES} AS expires_on "
        "FROM batches b JOIN batch_status_summary s ON s.batch_id = b.id WHERE b.prepared_on <= :day"
    )
    if reagent:
        inner += " AND b.reagent = :reagent"
        params["reagent"] = reagent
    if search:
        inner += " AND " + _search_condition(search, params)
    outer, conditions = "", []
    if only is not None:
        wanted = [c for c in only if c in COARSE]
        conditions.append(f"coarse IN ({','.join(repr(c) for c in wanted) or 'NULL'})")
    if out_since is not None:
        conditions.append("since >= :out_since")
        params["out_since"] = out_since.isoformat()
    if conditions:
        outer = " WHERE " + " OR ".join(conditions)
    sql = (
        "SELECT id, coarse, since FROM (SELECT id, prepared_on, coarse, "
        "CASE coarse WHEN 'withdrawn' THEN withdrawn_on WHEN 'expired' THEN expires_on "
        "WHEN 'registered_in_error' THEN in_error_on END AS since "
        f"FROM ({inner})){outer}"
    )
    return sql, params


def coarse_statuses(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    search: str | None = None,
    only: Iterable[str] | None = None,
    out_since: dt.date | None = None,
    limit: int | None = None,
    offset: int = 0,
) -> list[tuple[int, str, str | None]]:
    """(batch id, coarse status, since) of the batches that existed on `on`, newest first, from SQL alone.

    The coarse status is "registered_in_error", "withdrawn", "expired" or "awaiting" exactly as
    policy.status_on would say, or
    "live" for a batch whose finer status (in service, re-check due, drifting) needs its history; `since`
    is the ISO date marked in error or withdrawn, or the expiry date, else None. only: keep these coarse statuses;
    out_since: keep also (or only, without `only`) the batches out of use since that date or later;
    limit/offset: one page of the rows. Lists that show thousands of batches use this so that only
    the rows they display pay for the rest.
    """
    sql, params = _coarse_sql(on, reagent, search, only, out_since)
    sql += " ORDER BY prepared_on DESC, id DESC"
    if limit is not None:
        sql += " LIMIT :limit OFFSET :offset"
        params.update(limit=limit, offset=offset)
    return [(int(r[0]), str(r[1]), r[2]) for r in db.execute(sql, params)]


def coarse_count(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    search: str | None = None,
    only: Iterable[str] | None = None,
) -> int:
    """How many batches coarse_statuses would list (without a page), counted in SQL."""
    if only is None and not search:
        # Every batch that existed: counted from the date index alone, no status needed.
        sql, params = "SELECT count(*) FROM batches WHERE prepared_on <= :day", {"day": on.isoformat()}
        if reagent:
            sql, params = sql + " AND reagent = :reagent", {**params, "reagent": reagent}
        return int(db.execute(sql, params).fetchone()[0])
    sql, params = _coarse_sql(on, reagent, search, only, None)
    return int(db.execute(f"SELECT count(*) FROM ({sql})", params).fetchone()[0])


def coarse_counts(db: sqlite_utils.Database, on: dt.date) -> dict[str, int]:
    """How many batches that existed on `on` are in each coarse status (every key of COARSE present)."""
    sql, params = _coarse_sql(on, None, None, None, None)
    out = dict.fromkeys(COARSE, 0)
    for coarse, n in db.execute(f"SELECT coarse, count(*) FROM ({sql}) GROUP BY coarse", params):
        out[str(coarse)] = int(n)
    return out


def status_summary_problems(db: sqlite_utils.Database) -> list[int]:
    """Ids of the batches whose kept status summary differs from the one computed from their records now.

    The summary (batch_status_summary) is derived: this recomputes it from the releases and withdrawals
    and compares, so that a test (or an operator) can prove the kept copy equal to the records.
    """
    rows = db.execute(
        "SELECT b.id FROM batches b LEFT JOIN batch_status_summary s ON s.batch_id = b.id WHERE s.batch_id IS NULL "
        "OR s.first_released_on IS NOT (SELECT min(r.released_on) FROM releases r WHERE r.batch_id = b.id) "
        "OR s.last_released_on IS NOT (SELECT r.released_on FROM releases r WHERE r.batch_id = b.id "
        " ORDER BY r.released_on DESC, r.id DESC LIMIT 1) "
        "OR s.last_expires_on IS NOT (SELECT r.expires_on FROM releases r WHERE r.batch_id = b.id "
        " ORDER BY r.released_on DESC, r.id DESC LIMIT 1) "
        "OR s.withdrawn_on IS NOT (SELECT min(w.withdrawn_on) FROM withdrawals w WHERE w.batch_id = b.id) "
        "OR s.in_error_on IS NOT (SELECT e.marked_on FROM registrations_in_error e WHERE e.batch_id = b.id) "
        "ORDER BY b.id"
    )
    extra = db.execute(
        "SELECT s.batch_id FROM batch_status_summary s LEFT JOIN batches b ON b.id = s.batch_id WHERE b.id IS NULL"
    )
    return [int(r[0]) for r in rows] + [int(r[0]) for r in extra]


def search_index_problems(db: sqlite_utils.Database) -> list[int]:
    """Ids of the batches whose entry in the search index differs from the batch as it now reads.

    The index (batch_search) is derived: this rebuilds what it should hold from the batches and their
    corrections (records.with_amendments) and compares, so that a test (or an operator) can prove it equal.
    """
    rows = records.with_amendments(dbmod.query(db, "SELECT id, code, prepared_by, notes FROM batches"), db)
    want = {int(r["id"]): (r["code"], r["prepared_by"], r["notes"]) for r in rows}
    have = {int(r[0]): (r[1], r[2], r[3]) for r in db.execute("SELECT rowid, code, prepared_by, notes FROM batch_search")}
    return sorted(i for i in want.keys() | have.keys() if want.get(i) != have.get(i))


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

    Only the page's batches are read and computed in full (the coarse status filters and counts in SQL),
    except for the finer statuses (in service, re-check due, drifting), which need every live batch's
    history to filter on (the live batches are those within their shelf life: a number that does not
    grow with the years on record).
    """
    if status is not None and status not in COARSE_WITHOUT_HISTORY:
        live = coarse_statuses(db, on, reagent=reagent, search=search, only=("live",))
        matching = [v for v in views_of(db, [i for i, _, _ in live], on) if v.report.status.value == status]
        end = None if limit is None else offset + limit
        return matching[offset:end], len(matching)
    only = None if status is None else (status,)
    rows = coarse_statuses(db, on, reagent=reagent, search=search, only=only, limit=limit, offset=offset)
    total = coarse_count(db, on, reagent=reagent, search=search, only=only)
    return views_of(db, [i for i, _, _ in rows], on), total


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
