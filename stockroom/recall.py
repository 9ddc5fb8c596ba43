"""Recalls and the traceability graph read from the records.

A recall marks a primary-standard lot, an instrument or a batch as suspect from a date, with the reason.
What it reaches is never stored: it is stockroom.traceability.downstream over the graph as the records
stand, so a release made later on the suspect item is reached too, and a batch re-standardized on a
clean chain leaves the review by itself. A recall is cleared, with a reason, for one batch or as a whole.
Opening and clearing are each one write with its audit entry (records.append_event).

The impact report lists, as of a date: every release reached (transitively through secondary
standardizations), every batch resting on them and where it stands (under review while the value in
force is reached and not cleared), the days each reached value was in force from the day it became
suspect (policy.release_in_force, day by day), and every class-data correction made with one of them.
"""

from __future__ import annotations

import datetime as dt
import sqlite3
import weakref
from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

import sqlite_utils

from stockroom import csvsafe, formatting, records, stock, traceability
from stockroom import db as dbmod
from stockroom import instruments as inst_mod
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.policy import ReviewFact, Status, release_in_force, status_on
from stockroom.records.containers import containers_of_batches
from stockroom.traceability import BATCH, INSTRUMENT, LOT, PRIMARY, REFERENCE, RELEASE, Graph, node_key

SUBJECT_LABELS = {LOT: "primary-standard lot", INSTRUMENT: "instrument", BATCH: "batch"}
ONE_DAY = dt.timedelta(days=1)


def _d(text: str) -> dt.date:
    return dt.date.fromisoformat(text)


def molarity_text(value: float, U: float, k: float) -> str:
    """'0.10214 ± 0.00020 mol/L (k = 2)': the value to U's second significant figure (as every page shows it)."""
    return formatting.molarity(value, U, k)


# ---------------------------------------------------------------------------------------------------------
# The graph


_RELEASES_SQL = (
    "SELECT rl.id, rl.batch_id, rl.molarity, rl.u, rl.expanded_u, rl.k, rl.released_on, rl.expires_on, "
    "rl.run_id, b.code, b.reagent, r.method, r.standard_lot_id, r.reference_release_id, r.performed_on "
    "FROM releases rl JOIN runs r ON r.id = rl.run_id JOIN batches b ON b.id = rl.batch_id"
)


def _in(column: str, ids: Sequence[int]) -> str:
    return f"{column} IN ({','.join('?' * len(ids))})"


def _graph_of(db: sqlite_utils.Database, rows: list[dict[str, Any]], whole: bool) -> Graph:
    """The graph of these release rows (_RELEASES_SQL), their lots and their instruments.

    whole: the rows are every release on record, so the related tables are read without a filter.
    """
    batch_ids = sorted({r["batch_id"] for r in rows})
    run_ids = sorted({r["run_id"] for r in rows})
    lot_ids = sorted({r["standard_lot_id"] for r in rows if r["standard_lot_id"] is not None})
    if not rows:
        return Graph((), ())
    # Each release's last day in force: its expiry, the day before the next release of its batch, or the
    # day before a withdrawal (policy.release_in_force's rules, as dates).
    siblings: dict[int, list[tuple[str, int]]] = defaultdict(list)
    for r in dbmod.query(
        db,
        "SELECT id, batch_id, released_on FROM releases" + ("" if whole else " WHERE " + _in("batch_id", batch_ids)),
        [] if whole else batch_ids,
    ):
        siblings[r["batch_id"]].append((r["released_on"], r["id"]))
    withdrawn = {
        r["batch_id"]: _d(r["withdrawn_on"])
        for r in dbmod.query(
            db,
            "SELECT batch_id, min(withdrawn_on) AS withdrawn_on FROM withdrawals"
            + ("" if whole else " WHERE " + _in("batch_id", batch_ids))
            + " GROUP BY batch_id",
            [] if whole else batch_ids,
        )
    }
    nodes: list[traceability.Node] = []
    edges: list[traceability.Edge] = []
    for r in rows:
        ends = _d(r["expires_on"])
        later = [d for d, i in siblings[r["batch_id"]] if (d, i) > (r["released_on"], r["id"])]
        if later:
            ends = min(ends, _d(min(later)) - ONE_DAY)
        if r["batch_id"] in withdrawn:
            ends = min(ends, withdrawn[r["batch_id"]] - ONE_DAY)
        nodes.append(
            traceability.Node(
                RELEASE,
                r["id"],
                r["code"],
                detail=f"{molarity_text(r['molarity'], r['expanded_u'], r['k'])}, released {r['released_on']}",
                value=r["molarity"],
                u=r["u"],
                batch_id=r["batch_id"],
                released_on=_d(r["released_on"]),
                ends_on=ends,
            )
        )
    if lot_ids:
        for lot in dbmod.query(db, "SELECT * FROM standard_lots WHERE " + _in("id", lot_ids), lot_ids):
            nodes.append(
                traceability.Node(
                    LOT,
                    lot["id"],
                    lot["code"],
                    detail=f"{lot['substance']}, supplier's lot {lot['supplier_lot'] or '—'}\n"
                    f"certificate: assay {formatting.percent_u(lot['assay'], lot['assay_expanded_u'], lot['assay_k'])}",
                    value=lot["assay"],
                    u=lot["assay_expanded_u"] / lot["assay_k"],
                )
            )
    known = {r["id"] for r in rows}
    for r in rows:
        key = node_key(RELEASE, r["id"])
        used = _d(r["performed_on"])
        if r["method"] == "primary" and r["standard_lot_id"] is not None:
            edges.append(traceability.Edge(key, node_key(LOT, r["standard_lot_id"]), PRIMARY, used, r["run_id"]))
        elif r["reference_release_id"] is not None and r["reference_release_id"] in known:
            edges.append(traceability.Edge(key, node_key(RELEASE, r["reference_release_id"]), REFERENCE, used, r["run_id"]))
    release_of_run = {r["run_id"]: r for r in rows}
    kit = dbmod.query(
        db,
        "SELECT ri.run_id, ri.role, ri.instrument_id, c.certificate_ref, c.next_due_on FROM "
        "run_instruments ri LEFT JOIN calibrations c ON c.id = ri.calibration_id WHERE "
        + ("ri.run_id IN (SELECT run_id FROM releases)" if whole else _in("ri.run_id", run_ids)),
        [] if whole else run_ids,
    )
    for iid, inst in inst_mod.instruments_by_id(db, [k["instrument_id"] for k in kit]).items():
        nodes.append(traceability.Node(INSTRUMENT, iid, inst.code, detail=inst.summary()))
    for k in kit:
        r = release_of_run[k["run_id"]]
        note = (
            f"calibration {k['certificate_ref']}\ndue {k['next_due_on']}" if k["certificate_ref"] else "no calibration on record"
        )
        edges.append(
            traceability.Edge(
                node_key(RELEASE, r["id"]),
                node_key(INSTRUMENT, k["instrument_id"]),
                k["role"],
                _d(r["performed_on"]),
                r["run_id"],
                note,
            )
        )
    return Graph(tuple(nodes), tuple(edges))


def read_graph(db: sqlite_utils.Database) -> Graph:
    """The traceability graph of every release on record, with the lots and instruments they rest on."""
    return _graph_of(db, dbmod.query(db, _RELEASES_SQL + " ORDER BY rl.batch_id, rl.released_on, rl.id"), whole=True)


def read_reach_graph(db: sqlite_utils.Database, suspects: Iterable[traceability.Suspect]) -> Graph:
    """The part of the graph that suspect items can reach: what traceability.downstream needs, no more.

    The releases resting on each item directly (a lot's primary runs, an instrument's runs, a batch's
    own releases), then those standardized against them, level by level: a few queries per level,
    so a recall costs what it reaches rather than the whole record. downstream() over this graph
    gives what it gives over read_graph (tests/test_scale.py).
    """
    rows: dict[int, dict[str, Any]] = {}
    wanted: list[dict[str, Any]] = []
    for suspect in suspects:
        if suspect.kind == LOT:
            wanted += dbmod.query(db, _RELEASES_SQL + " WHERE r.standard_lot_id = ?", [suspect.id])
        elif suspect.kind == INSTRUMENT:
            wanted += dbmod.query(
                db,
                _RELEASES_SQL + " WHERE rl.run_id IN (SELECT run_id FROM run_instruments WHERE instrument_id = ?)",
                [suspect.id],
            )
        elif suspect.kind == BATCH:
            wanted += dbmod.query(db, _RELEASES_SQL + " WHERE rl.batch_id = ?", [suspect.id])
    while wanted:
        fresh = [r for r in wanted if r["id"] not in rows]
        rows.update((r["id"], r) for r in fresh)
        ids = sorted({r["id"] for r in fresh})
        wanted = []
        for i in range(0, len(ids), 500):
            chunk = ids[i : i + 500]
            wanted += dbmod.query(db, _RELEASES_SQL + " WHERE " + _in("r.reference_release_id", chunk), chunk)
    ordered = sorted(rows.values(), key=lambda r: (r["batch_id"], r["released_on"], r["id"]))
    return _graph_of(db, ordered, whole=False)


def read_chain_graph(db: sqlite_utils.Database, release_id: int) -> Graph:
    """The graph of one release and what it rests on, up to its primary lot: a few queries per link, not the
    whole record (what a batch page needs)."""
    rows: list[dict[str, Any]] = []
    seen: set[int] = set()
    wanted = [release_id]
    while wanted:
        found = dbmod.query(db, _RELEASES_SQL + " WHERE " + _in("rl.id", wanted), wanted)
        seen.update(wanted)
        rows += found
        wanted = sorted(
            {
                r["reference_release_id"]
                for r in found
                if r["reference_release_id"] is not None and r["reference_release_id"] not in seen
            }
        )
    return _graph_of(db, rows, whole=False)


# ---------------------------------------------------------------------------------------------------------
# Recalls as values


@dataclass(frozen=True)
class Clearance:
    """A recall cleared, with the reason: for one batch (batch_id, batch_code) or as a whole (None)."""

    id: int
    recall_id: int
    batch_id: int | None
    batch_code: str | None
    cleared_on: dt.date
    reason: str
    recorded_at: str
    recorded_by: str


@dataclass(frozen=True)
class Recall:
    """A suspect item: subject (kind lot, instrument or batch; record id; code; label in words; detail),
    the date from which it is suspect, the lab date it was recorded, the reason, and its clearances."""

    id: int
    subject_kind: str
    subject_id: int
    subject_code: str
    subject_label: str
    subject_detail: str
    suspect_from: dt.date
    opened_on: dt.date
    reason: str
    recorded_at: str
    recorded_by: str
    clearances: tuple[Clearance, ...] = ()

    @property
    def suspect(self) -> traceability.Suspect:
        """The suspect item as stockroom.traceability takes it."""
        return traceability.Suspect(self.subject_kind, self.subject_id, self.suspect_from)

    @property
    def cleared(self) -> Clearance | None:
        """The clearance of the whole recall, or None while it is open."""
        return next((c for c in self.clearances if c.batch_id is None), None)

    def cleared_for(self, batch_id: int) -> Clearance | None:
        """The clearance that ends the recall for one batch (its own, else the whole recall's), or None."""
        return next((c for c in self.clearances if c.batch_id == batch_id), None) or self.cleared

    def open_on(self, on: dt.date) -> bool:
        """Whether the recall stood on `on` (recorded by then and not cleared as a whole by then)."""
        whole = self.cleared
        return self.opened_on <= on and (whole is None or on < whole.cleared_on)


def _subjects(db: sqlite_utils.Database, wanted: Iterable[tuple[str, int]]) -> dict[tuple[str, int], tuple[str, str]]:
    """(kind, id) -> (code, detail) for recall subjects, one query per kind."""
    by_kind: dict[str, set[int]] = defaultdict(set)
    for kind, sid in wanted:
        by_kind[kind].add(int(sid))
    out: dict[tuple[str, int], tuple[str, str]] = {}
    if by_kind.get(LOT):
        ids = sorted(by_kind[LOT])
        for r in dbmod.query(db, f"SELECT * FROM standard_lots WHERE id IN ({','.join('?' * len(ids))})", ids):
            out[(LOT, r["id"])] = (
                r["code"],
                f"{r['substance']}, supplier's lot {r['supplier_lot'] or '—'}, assay "
                f"{formatting.percent_u(r['assay'], r['assay_expanded_u'], r['assay_k'])}, expires {r['expires_on']}",
            )
    if by_kind.get(INSTRUMENT):
        for iid, inst in inst_mod.instruments_by_id(db, by_kind[INSTRUMENT]).items():
            out[(INSTRUMENT, iid)] = (inst.code, f"{inst.kind}, {inst.summary()}")
    if by_kind.get(BATCH):
        ids = sorted(by_kind[BATCH])
        for r in dbmod.query(db, f"SELECT * FROM batches WHERE id IN ({','.join('?' * len(ids))})", ids):
            out[(BATCH, r["id"])] = (
                r["code"],
                f"{r['reagent']} {r['nominal_molarity']:g} mol/L nominal, prepared {r['prepared_on']}",
            )
    return out


def subject_label(kind: str, code: str, detail: str = "") -> str:
    """A subject in words: "primary-standard lot STD-KHP-001", "burette BUR-07", "batch NAOH-2611-01"."""
    if kind == INSTRUMENT and detail:
        return f"{detail.split(',', 1)[0]} {code}"
    return f"{SUBJECT_LABELS.get(kind, kind)} {code}"


def list_recalls(db: sqlite_utils.Database, ids: Sequence[int] | None = None) -> list[Recall]:
    """Every recall (or those with the given ids), newest first, with subjects and clearances; four queries."""
    sql, params = "SELECT * FROM recalls", []
    if ids is not None:
        if not ids:
            return []
        sql += f" WHERE id IN ({','.join('?' * len(ids))})"
        params = list(ids)
    rows = dbmod.query(db, sql + " ORDER BY id DESC", params)
    if not rows:
        return []
    rids = [r["id"] for r in rows]
    clears: dict[int, list[Clearance]] = defaultdict(list)
    for c in dbmod.query(
        db,
        "SELECT c.*, b.code AS batch_code FROM recall_clearances c LEFT JOIN batches b ON "
        f"b.id = c.batch_id WHERE c.recall_id IN ({','.join('?' * len(rids))}) ORDER BY c.id",
        rids,
    ):
        clears[c["recall_id"]].append(
            Clearance(
                c["id"],
                c["recall_id"],
                c["batch_id"],
                c["batch_code"],
                _d(c["cleared_on"]),
                c["reason"],
                c["recorded_at"],
                c["recorded_by"],
            )
        )
    subjects = _subjects(db, [(r["subject_kind"], r["subject_id"]) for r in rows])
    out = []
    for r in rows:
        code, detail = subjects.get((r["subject_kind"], r["subject_id"]), (f"#{r['subject_id']}", "not on record"))
        out.append(
            Recall(
                id=r["id"],
                subject_kind=r["subject_kind"],
                subject_id=r["subject_id"],
                subject_code=code,
                subject_label=subject_label(r["subject_kind"], code, detail),
                subject_detail=detail,
                suspect_from=_d(r["suspect_from"]),
                opened_on=_d(r["opened_on"]),
                reason=r["reason"],
                recorded_at=r["recorded_at"],
                recorded_by=r["recorded_by"],
                clearances=tuple(clears.get(r["id"], ())),
            )
        )
    return out


def recall_by_id(db: sqlite_utils.Database, recall_id: int) -> Recall:
    """One recall; NotFound if none."""
    found = list_recalls(db, [recall_id])
    if not found:
        raise NotFound(f"no recall with id {recall_id}")
    return found[0]


# ---------------------------------------------------------------------------------------------------------
# Appends


def subject_exists(db: sqlite_utils.Database, kind: str, subject_id: int) -> bool:
    """Whether a lot, instrument or batch with this id is on record."""
    table = {LOT: "standard_lots", INSTRUMENT: "instruments", BATCH: "batches"}.get(kind)
    if table is None:
        return False
    return bool(dbmod.query(db, f"SELECT 1 AS found FROM {table} WHERE id = ?", [subject_id]))


def open_recall(
    db: sqlite_utils.Database, kind: str, subject_id: int, suspect_from: dt.date, reason: str, opened_on: dt.date, actor: str
) -> int:
    """Mark a lot, instrument or batch suspect from a date, with the reason; one write and its audit entry.

    kind: lot, instrument or batch; suspect_from and opened_on (the lab's date today) as dates. Returns the
    recall id. Raises InvalidInput naming the field (subject, suspect_from, reason).
    """
    errors = []
    if kind not in SUBJECT_LABELS or not subject_exists(db, kind, subject_id):
        errors.append(FieldError("subject", "choose a primary-standard lot, an instrument or a batch on record"))
    if suspect_from > opened_on:
        errors.append(
            FieldError(
                "suspect_from",
                f"cannot be later than today ({opened_on.isoformat()}): a recall is about what has already been used",
            )
        )
    if not reason.strip():
        errors.append(FieldError("reason", "say why it is suspect"))
    if errors:
        raise InvalidInput(errors)
    with dbmod.write(db):
        rid = dbmod.insert_row(
            db,
            "recalls",
            {
                "subject_kind": kind,
                "subject_id": subject_id,
                "suspect_from": suspect_from.isoformat(),
                "opened_on": opened_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
        )
        recall = recall_by_id(db, rid)
        reached = traceability.downstream(read_reach_graph(db, [recall.suspect]), recall.suspect)
        records.append_event(
            db,
            actor,
            "recall.open",
            entity="recalls",
            entity_id=rid,
            batch_id=subject_id if kind == BATCH else None,
            reason=reason.strip(),
            detail={
                "subject": recall.subject_label,
                "suspect_from": suspect_from.isoformat(),
                "releases_reached": sorted(int(k.split(":")[1]) for k in reached),
            },
        )
    return rid


def clear_recall(
    db: sqlite_utils.Database, recall_id: int, batch_id: int | None, cleared_on: dt.date, reason: str, actor: str
) -> int:
    """Clear a recall, with the reason: for one batch it reaches, or as a whole (batch_id None); return its id.

    Raises InvalidInput (reason, batch), NotFound, or Conflict when it is already cleared.
    """
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "say why the recall is cleared")])
    with dbmod.write(db):
        recall = recall_by_id(db, recall_id)
        if recall.cleared is not None:
            raise Conflict(f"recall {recall_id} was already cleared on {recall.cleared.cleared_on.isoformat()}")
        if cleared_on < recall.opened_on:
            raise InvalidInput([FieldError("cleared_on", f"cannot be earlier than the recall ({recall.opened_on})")])
        if batch_id is not None:
            graph = read_reach_graph(db, [recall.suspect])
            batches = {graph.node(k).batch_id for k in traceability.downstream(graph, recall.suspect)}
            if batch_id not in batches:
                raise InvalidInput([FieldError("batch", "this recall does not reach that batch")])
            if any(c.batch_id == batch_id for c in recall.clearances):
                raise Conflict(f"recall {recall_id} is already cleared for that batch")
        cid = dbmod.insert_row(
            db,
            "recall_clearances",
            {
                "recall_id": recall_id,
                "batch_id": batch_id,
                "cleared_on": cleared_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
        )
        records.append_event(
            db,
            actor,
            "recall.clear",
            entity="recall_clearances",
            entity_id=cid,
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"recall": recall_id, "subject": recall.subject_label, "scope": "batch" if batch_id else "whole recall"},
        )
    return cid


# ---------------------------------------------------------------------------------------------------------
# Reviews: what status_on needs

_REVIEW_CACHE: weakref.WeakKeyDictionary[sqlite_utils.Database, tuple[int, dict[int, tuple[ReviewFact, ...]]]] = (
    weakref.WeakKeyDictionary()
)


def review_facts(db: sqlite_utils.Database) -> dict[int, tuple[ReviewFact, ...]]:
    """batch id -> the recalls reaching any of its releases, as policy.ReviewFact (readmodel.facts_of adds them).

    One query when no recall is on record. Otherwise the answer is kept per connection until the next
    audit entry (every write makes one), so the many status look-ups of a page read the graph once.
    """
    try:
        if db.execute("SELECT 1 FROM recalls LIMIT 1").fetchone() is None:
            return {}
    except sqlite3.OperationalError:  # a database not yet migrated this far has no recalls
        return {}
    mark = int(db.execute("SELECT coalesce(max(id), 0) FROM events").fetchone()[0])
    cached = _REVIEW_CACHE.get(db)
    if cached is not None and cached[0] == mark:
        return cached[1]
    recalls = sorted(list_recalls(db), key=lambda r: r.id)
    graph = read_reach_graph(db, [r.suspect for r in recalls])
    out: dict[int, list[ReviewFact]] = defaultdict(list)
    for recall in recalls:
        for key in traceability.downstream(graph, recall.suspect):
            node = graph.node(key)
            assert node.batch_id is not None
            cleared = recall.cleared_for(node.batch_id)
            out[node.batch_id].append(
                ReviewFact(
                    recall.id,
                    node.id,
                    recall.subject_label,
                    recall.suspect_from,
                    recall.opened_on,
                    cleared.cleared_on if cleared else None,
                )
            )
    facts = {k: tuple(v) for k, v in out.items()}
    _REVIEW_CACHE[db] = (mark, facts)
    return facts


# ---------------------------------------------------------------------------------------------------------
# The impact report


@dataclass(frozen=True)
class Period:
    """Days a reached value was in force while suspect: first and last day (inclusive)."""

    start: dt.date
    end: dt.date

    @property
    def days(self) -> int:
        """Number of days, counting both ends."""
        return (self.end - self.start).days + 1


@dataclass(frozen=True)
class ReachedRelease:
    """A release the recall reaches, with where it came from and when it was in force while suspect.

    molarity, U in mol/L (k as released); depth: links from the suspect item (0: the suspect batch's own
    release); via: what it rests on that brought it in, in words; suspect_from: None for its whole life,
    else the date from which; periods: days in force while suspect, up to the report's date;
    corrections: the class-data corrections made with it (dict rows of class_corrections, with batch_code).
    """

    release_id: int
    batch_id: int
    batch_code: str
    reagent: str
    released_on: dt.date
    molarity: float
    U: float
    k: float
    depth: int
    via: str
    suspect_from: dt.date | None
    periods: tuple[Period, ...]
    corrections: tuple[dict[str, Any], ...]
    number: int | None = None  # the release's number within its batch (release 2 of HCL-2606-01)

    @property
    def days_in_force(self) -> int:
        """Total days in force while suspect."""
        return sum(p.days for p in self.periods)


@dataclass(frozen=True)
class ReachedBatch:
    """A batch resting on the suspect item and where it stands on the report's date.

    state: "under review" (its value in force is reached and not cleared), "cleared", "re-standardized",
    "expired" or "withdrawn"; status: the batch's status label that day; note: the state in a sentence.
    """

    batch_id: int
    code: str
    reagent: str
    nominal_molarity: float
    state: str
    status: str
    note: str

    @property
    def in_service_under_review(self) -> bool:
        """Whether it is in use (in service, re-check due or drifting) with a reached value not cleared:
        the batches to act on first."""
        return self.state == "under review"


@dataclass(frozen=True)
class ReachedContainer:
    """A container filled from a reached batch that was in use while a reached value was in force and suspect.

    volume_l in L; filled_on and expires_on as recorded; disposed_on: taken out of use, or None; from_day
    and to_day: the days (inclusive) it was in use while suspect, up to the report's date; destination:
    where it went, in words ("CHM 110 · section B · room 214"), with its parts.
    """

    container_id: int
    code: str
    batch_code: str
    release_id: int
    kind: str
    volume_l: float
    filled_on: dt.date
    expires_on: dt.date
    disposed_on: dt.date | None
    room: str
    course: str
    section: str
    destination: str
    from_day: dt.date
    to_day: dt.date


@dataclass(frozen=True)
class ReachedDestination:
    """A destination that received suspect solution: its words, the containers, first and last day in use."""

    destination: str
    containers: tuple[str, ...]
    first_day: dt.date
    last_day: dt.date
    volume_l: float


@dataclass(frozen=True)
class Impact:
    """The impact report of one recall as of a date (`on`)."""

    recall: Recall
    on: dt.date
    releases: tuple[ReachedRelease, ...]
    batches: tuple[ReachedBatch, ...]
    # Containers and destinations that received suspect solution (stockroom.records.containers).
    containers: tuple[ReachedContainer, ...] = ()

    @property
    def destinations(self) -> tuple[ReachedDestination, ...]:
        """Each destination that had a reached container in use while suspect, first day first."""
        grouped: dict[str, list[ReachedContainer]] = defaultdict(list)
        for c in self.containers:
            grouped[c.destination].append(c)
        out = [
            ReachedDestination(
                words,
                tuple(c.code for c in cs),
                min(c.from_day for c in cs),
                max(c.to_day for c in cs),
                sum(c.volume_l for c in cs),
            )
            for words, cs in grouped.items()
        ]
        return tuple(sorted(out, key=lambda d: (d.first_day, d.destination)))

    @property
    def corrections(self) -> tuple[dict[str, Any], ...]:
        """Every class-data correction made with a reached release, by lab day."""
        rows = [c for r in self.releases for c in r.corrections]
        return tuple(sorted(rows, key=lambda c: (c["lab_day"], c["id"])))

    @property
    def lab_days(self) -> int:
        """Calendar days on which some reached value was in force while suspect (each day once); stockroom
        keeps no teaching timetable, so each is a day a class may have used the value on."""
        days: set[dt.date] = set()
        for r in self.releases:
            for p in r.periods:
                days.update(p.start + dt.timedelta(days=i) for i in range(p.days))
        return len(days)

    @property
    def under_review(self) -> tuple[ReachedBatch, ...]:
        """The batches in service whose value in force is under review."""
        return tuple(b for b in self.batches if b.in_service_under_review)


def _facts(db: sqlite_utils.Database, batch_ids: Sequence[int]) -> dict[int, Any]:
    """The batches' recorded facts with their review facts (what readmodel.facts_of gives, read here
    because the read model sits above this module)."""
    facts = records.recorded_facts(db, batch_ids)
    reviews = review_facts(db)
    return {bid: replace(f, reviews=reviews.get(bid, ())) for bid, f in facts.items()}


def _periods(facts: Any, release_id: int, start: dt.date, end: dt.date) -> tuple[Period, ...]:
    """Stretches of days in [start, end] on which release_in_force(facts, day) is this release."""
    out: list[Period] = []
    first: dt.date | None = None
    day = start
    while day <= end:
        r = release_in_force(facts, day)
        mine = r is not None and r.id == release_id
        if mine and first is None:
            first = day
        if not mine and first is not None:
            out.append(Period(first, day - ONE_DAY))
            first = None
        day += ONE_DAY
    if first is not None:
        out.append(Period(first, end))
    return tuple(out)


def _via(graph: Graph, key: str, numbers: dict[int, int] | None = None) -> str:
    if key.startswith(BATCH + ":"):
        return "its own value (the batch is the suspect item)"
    node = graph.get(key)
    if node is None:
        return key
    if node.kind == RELEASE:
        number = (numbers or {}).get(node.id)
        return (
            f"reference {node.label}, {formatting.release_name(number)} of "
            f"{node.released_on.isoformat() if node.released_on else '?'}"
        )
    if node.kind == LOT:
        return f"primary-standard lot {node.label}"
    return f"instrument {node.label}"


def impact(db: sqlite_utils.Database, recall_id: int, on: dt.date) -> Impact:
    """The impact report of a recall as the records stand, with states and days counted up to `on`."""
    recall = recall_by_id(db, recall_id)
    graph = read_reach_graph(db, [recall.suspect])
    reached = traceability.downstream(graph, recall.suspect)
    nodes = {k: graph.node(k) for k in reached}
    batch_ids = sorted({n.batch_id for n in nodes.values() if n.batch_id is not None})
    facts = _facts(db, batch_ids)
    batches = (
        {
            b["id"]: b
            for b in dbmod.query(
                db,
                f"SELECT id, code, reagent, nominal_molarity FROM batches WHERE id IN ({','.join('?' * len(batch_ids))})",
                batch_ids,
            )
        }
        if batch_ids
        else {}
    )
    release_ids = [n.id for n in nodes.values()]
    corrections: dict[int, list[dict[str, Any]]] = defaultdict(list)
    if release_ids:
        for c in dbmod.query(
            db,
            "SELECT c.id, c.lab_day, c.titrant, c.batch_id, c.release_id, c.molarity_used, "
            "c.certified_molarity, c.bench_temperature_c, c.row_count, c.recorded_at, "
            "c.recorded_by, b.code AS batch_code FROM class_corrections c JOIN batches b ON "
            f"b.id = c.batch_id WHERE c.release_id IN ({','.join('?' * len(release_ids))}) "
            "ORDER BY c.lab_day, c.id",
            release_ids,
        ):
            corrections[c["release_id"]].append(c)
    via_ids = [graph.node(r.via).id for r in reached.values() if r.via.startswith(RELEASE + ":") and graph.get(r.via)]
    numbers = records.release_numbers(db, [*release_ids, *via_ids])
    for rows in corrections.values():
        for c in rows:
            c["release_number"] = numbers.get(c["release_id"])
    out: list[ReachedRelease] = []
    for key, r in reached.items():
        n = nodes[key]
        assert n.batch_id is not None and n.released_on is not None
        b = batches[n.batch_id]
        rel = next(x for x in facts[n.batch_id].releases if x.id == n.id)
        start = max(n.released_on, r.suspect_from) if r.suspect_from else n.released_on
        end = min(n.ends_on or on, on)
        made_with = tuple(c for c in corrections.get(n.id, ()) if r.suspect_from is None or _d(c["lab_day"]) >= r.suspect_from)
        out.append(
            ReachedRelease(
                release_id=n.id,
                batch_id=n.batch_id,
                batch_code=b["code"],
                reagent=b["reagent"],
                released_on=n.released_on,
                molarity=rel.molarity,
                U=rel.U,
                k=rel.k,
                depth=r.depth,
                via=_via(graph, r.via, numbers),
                suspect_from=r.suspect_from,
                periods=_periods(facts[n.batch_id], n.id, start, end) if start <= end else (),
                corrections=made_with,
                number=numbers.get(n.id),
            )
        )
    out.sort(key=lambda x: (x.depth, x.batch_code, x.released_on, x.release_id))
    reached_by_batch: dict[int, set[int]] = defaultdict(set)
    for x in out:
        reached_by_batch[x.batch_id].add(x.release_id)
    states: list[ReachedBatch] = []
    for bid in batch_ids:
        b = batches[bid]
        report = status_on(facts[bid], on)
        current = report.release
        cleared = recall.cleared_for(bid)
        if cleared is not None and cleared.cleared_on > on:
            cleared = None
        if report.status is Status.WITHDRAWN:
            state, note = "withdrawn", (report.reasons[0] if report.reasons else "withdrawn")
        elif current is not None and current.id in reached_by_batch[bid]:
            if cleared is not None:
                state, note = "cleared", f"cleared on {cleared.cleared_on.isoformat()}: {cleared.reason}"
            elif report.status is Status.EXPIRED:
                state, note = "expired", f"expired on {current.expires_on.isoformat()}; its value rested on the suspect item"
            else:
                state, note = (
                    "under review",
                    (
                        f"the value in use, {molarity_text(current.molarity, current.U, current.k)}"
                        f" released {current.released_on.isoformat()}, rests on "
                        f"{recall.subject_label}"
                    ),
                )
        elif current is not None:
            state, note = (
                "re-standardized",
                (
                    f"a new value, released {current.released_on.isoformat()} "
                    f"({formatting.release_name(records.release_number(db, current.id))}), "
                    "does not rest on the suspect item"
                ),
            )
        else:
            state, note = "withdrawn", "no value in force"
        states.append(ReachedBatch(bid, b["code"], b["reagent"], float(b["nominal_molarity"]), state, report.status.label, note))
    order = {"under review": 0, "cleared": 1, "re-standardized": 2, "expired": 3, "withdrawn": 4}
    states.sort(key=lambda s: (order.get(s.state, 9), s.code))
    return Impact(
        recall=recall, on=on, releases=tuple(out), batches=tuple(states), containers=_reached_containers(db, out, batches, on)
    )


def _reached_containers(
    db: sqlite_utils.Database, reached: Sequence[ReachedRelease], batches: dict[int, dict[str, Any]], on: dt.date
) -> tuple[ReachedContainer, ...]:
    """The containers of reached batches in use on some day a reached value of their batch was in force while suspect.

    A container is in use from its fill date to the day before it is taken out of use, or to its expiry;
    the days counted stop at `on`. One query for every reached batch.
    """
    periods: dict[int, list[tuple[int, Period]]] = defaultdict(list)
    for r in reached:
        for p in r.periods:
            periods[r.batch_id].append((r.release_id, p))
    if not periods:
        return ()
    rows = containers_of_batches(db, periods)
    out: list[ReachedContainer] = []
    for c in rows:
        filled, expires = _d(c["filled_on"]), _d(c["expires_on"])
        disposed = _d(c["disposed_on"]) if c["disposed_on"] else None
        last_in_use = min(expires, disposed - ONE_DAY if disposed else expires, on)
        for release_id, p in periods[c["batch_id"]]:
            start, end = max(filled, p.start), min(last_in_use, p.end)
            if start > end:
                continue
            dest = stock.Destination.of(c).words()
            out.append(
                ReachedContainer(
                    container_id=c["id"],
                    code=c["code"],
                    batch_code=batches[c["batch_id"]]["code"],
                    release_id=release_id,
                    kind=c["kind"],
                    volume_l=float(c["volume_l"]),
                    filled_on=filled,
                    expires_on=expires,
                    disposed_on=disposed,
                    room=c["room"],
                    course=c["course"],
                    section=c["section"],
                    destination=dest,
                    from_day=start,
                    to_day=end,
                )
            )
            break  # one row per container: its first suspect stretch names it
    return tuple(out)


# ---------------------------------------------------------------------------------------------------------
# The report as CSV

CSV_COLUMNS = (
    "section",
    "batch",
    "titrant",
    "release_id",
    "released_on",
    "molarity_mol_per_l",
    "U_mol_per_l",
    "k",
    "links_from_suspect",
    "rests_on",
    "suspect_from",
    "from",
    "to",
    "days",
    "lab_day",
    "correction_id",
    "molarity_used_mol_per_l",
    "rows",
    "state",
    "note",
)


def impact_csv(report: Impact) -> str:
    """The impact report as CSV text: `# key: value` lines about the recall, then one row per finding.

    section is "release" (a reached release), "in_force" (a stretch of days it was in force while
    suspect), "batch" (a batch resting on the suspect item, with its state), "container" (a container
    in use while suspect, its destination in the note) or "correction" (a class-data correction made
    with a reached release). Molarities in mol/L.
    """
    rc = report.recall
    out = csvsafe.SafeCsv()
    about = {
        "stockroom recall": str(rc.id),
        "suspect": f"{rc.subject_label} ({rc.subject_detail})",
        "suspect from": rc.suspect_from.isoformat(),
        "reason": rc.reason,
        "opened": f"{rc.opened_on.isoformat()} by {rc.recorded_by}",
        "state": (f"cleared on {rc.cleared.cleared_on.isoformat()}: {rc.cleared.reason}" if rc.cleared else "open"),
        "report as of": report.on.isoformat(),
        "releases reached": str(len(report.releases)),
        "batches under review": str(len(report.under_review)),
        "days a suspect value was in force (calendar days; any may have been a lab day)": str(report.lab_days),
        "class-data corrections made with them": str(len(report.corrections)),
    }
    for k, v in about.items():
        out.comment(f"{k}: {v}")
    out.row(CSV_COLUMNS)
    blank = dict.fromkeys(CSV_COLUMNS, "")

    def row(**values: Any) -> None:
        line = {**blank, **values}
        out.row([line[c] for c in CSV_COLUMNS])

    for r in report.releases:
        row(
            section="release",
            batch=r.batch_code,
            titrant=r.reagent,
            release_id=r.release_id,
            released_on=r.released_on.isoformat(),
            molarity_mol_per_l=f"{r.molarity:.6f}",
            U_mol_per_l=f"{r.U:.6f}",
            k=f"{r.k:g}",
            links_from_suspect=r.depth,
            rests_on=r.via,
            suspect_from=r.suspect_from.isoformat() if r.suspect_from else "whole life",
            days=r.days_in_force,
        )
        for p in r.periods:
            row(
                section="in_force",
                batch=r.batch_code,
                titrant=r.reagent,
                release_id=r.release_id,
                **{"from": p.start.isoformat(), "to": p.end.isoformat()},
                days=p.days,
            )
    for b in report.batches:
        row(section="batch", batch=b.code, titrant=b.reagent, state=b.state, note=b.note)
    for box in report.containers:
        row(
            section="container",
            batch=box.batch_code,
            release_id=box.release_id,
            **{"from": box.from_day.isoformat(), "to": box.to_day.isoformat()},
            days=(box.to_day - box.from_day).days + 1,
            note=f"{box.code}, {box.kind}, {box.volume_l:g} L filled {box.filled_on.isoformat()} for {box.destination}",
        )
    for c in report.corrections:
        row(
            section="correction",
            batch=c["batch_code"],
            titrant=c["titrant"],
            release_id=c["release_id"],
            lab_day=c["lab_day"],
            correction_id=c["id"],
            molarity_used_mol_per_l=f"{c['molarity_used']:.6f}",
            rows=c["row_count"],
            note=f"recorded {c['recorded_at']} by {c['recorded_by']}",
        )
    return out.text()


# ---------------------------------------------------------------------------------------------------------
# The batch page's chain


@dataclass(frozen=True)
class BatchTrace:
    """The chain behind a batch's value: the release shown (in force on the date, else the newest made by
    then), its chain, the node keys under an open recall, and the open reviews of that release."""

    release_id: int
    in_force: bool
    chain: traceability.Chain
    suspect: frozenset[str]
    reviews: tuple[ReviewFact, ...]


def batch_trace(db: sqlite_utils.Database, batch_id: int, on: dt.date) -> BatchTrace | None:
    """The chain of the batch's value as of `on`, or None when nothing was released by then."""
    facts = _facts(db, [batch_id])[batch_id]
    in_force_now = release_in_force(facts, on)
    in_force = in_force_now is not None
    made = [r for r in facts.releases if r.released_on <= on]
    if in_force_now is None and not made:
        return None
    release = in_force_now or max(made, key=lambda r: (r.released_on, r.id))
    chain = traceability.chain_of(read_chain_graph(db, release.id), node_key(RELEASE, release.id))
    reviews = tuple(rv for rv in facts.reviews if rv.release_id == release.id and rv.open_on(on))
    return BatchTrace(release.id, in_force, chain, _suspect_on_chain(db, chain, on), reviews)


def _suspect_on_chain(db: sqlite_utils.Database, chain: traceability.Chain, on: dt.date) -> frozenset[str]:
    """The chain's node keys under a recall open on `on`: suspect lots and instruments, and releases under
    review (from the review facts every status uses, so the drawing and the flags agree)."""
    reviews = review_facts(db)
    if not reviews:
        return frozenset()
    out: set[str] = set()
    for recall in list_recalls(db):
        if recall.open_on(on) and recall.subject_kind in (LOT, INSTRUMENT):
            out.add(node_key(recall.subject_kind, recall.subject_id))
    for step in chain.steps:
        rel = step.release
        if any(rv.release_id == rel.id and rv.open_on(on) for rv in reviews.get(rel.batch_id or 0, ())):
            out.add(rel.key)
    return frozenset(out & chain.keys)


def reached_release_ids(graph: Graph, recalls: Iterable[Recall]) -> dict[int, set[int]]:
    """recall id -> the ids of the releases it reaches (for lists that count them)."""
    return {rc.id: {graph.node(k).id for k in traceability.downstream(graph, rc.suspect)} for rc in recalls}


def reached_batch_ids(graph: Graph, recalls: Iterable[Recall]) -> dict[int, set[int]]:
    """recall id -> the ids of the batches whose releases it reaches."""
    out: dict[int, set[int]] = {}
    for rc in recalls:
        out[rc.id] = {b for k in traceability.downstream(graph, rc.suspect) if (b := graph.node(k).batch_id) is not None}
    return out


def subject_options(db: sqlite_utils.Database) -> dict[str, list[tuple[str, str]]]:
    """What can be recalled, for a form: kind -> [(value "kind:id", text)]."""
    lots = [
        (f"{LOT}:{r['id']}", f"{r['code']} · {r['substance']} · {r['supplier_lot'] or '—'}")
        for r in dbmod.query(db, "SELECT id, code, substance, supplier_lot FROM standard_lots ORDER BY code")
    ]
    insts = [(f"{INSTRUMENT}:{i.id}", f"{i.code} · {i.kind} · {i.summary()}") for i in inst_mod.list_instruments(db)]
    batches = [
        (f"{BATCH}:{r['id']}", f"{r['code']} · {r['reagent']} {r['nominal_molarity']:g} mol/L")
        for r in dbmod.query(db, "SELECT id, code, reagent, nominal_molarity FROM batches ORDER BY code")
    ]
    return {LOT: lots, INSTRUMENT: insts, BATCH: batches}
