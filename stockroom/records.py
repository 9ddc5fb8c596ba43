"""Reads and appends of stockroom's records. Every write is one atomic, attributed entry plus its audit event."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import re
from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.policy import (
    DEFAULT_POLICIES,
    BatchFacts,
    CheckFact,
    ReagentPolicy,
    ReleaseFact,
    StatusReport,
    status_on,
)

GENESIS_HASH = "0" * 64


def utc_now() -> str:
    """Current UTC time as ISO 8601 with seconds and offset."""
    return dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat()


def _d(value: str | None) -> dt.date | None:
    return dt.date.fromisoformat(value) if value else None


# ---------------------------------------------------------------- audit trail


def _event_hash(prev_hash: str, row: dict[str, Any]) -> str:
    body = json.dumps(
        {k: row[k] for k in ("occurred_at", "actor", "action", "entity", "entity_id", "batch_id", "reason", "detail")},
        sort_keys=True,
        separators=(",", ":"),
    )
    return hashlib.sha256((prev_hash + body).encode("utf-8")).hexdigest()


def append_event(
    db: sqlite_utils.Database,
    actor: str,
    action: str,
    *,
    entity: str = "",
    entity_id: int | None = None,
    batch_id: int | None = None,
    reason: str = "",
    detail: dict[str, Any] | None = None,
) -> int:
    """Append one audit entry chained to the previous one by SHA-256; call inside a write."""
    last = db.execute("SELECT hash FROM events ORDER BY id DESC LIMIT 1").fetchone()
    prev_hash = last[0] if last else GENESIS_HASH
    row: dict[str, Any] = {
        "occurred_at": utc_now(),
        "actor": actor,
        "action": action,
        "entity": entity,
        "entity_id": entity_id,
        "batch_id": batch_id,
        "reason": reason,
        "detail": json.dumps(detail or {}, sort_keys=True, separators=(",", ":"), default=str),
    }
    row["prev_hash"] = prev_hash
    row["hash"] = _event_hash(prev_hash, row)
    return dbmod.insert_row(db, "events", row)


# Each record table and the audit action its rows are written with: a record without its entry means
# the entry (perhaps the newest, which the chain alone cannot miss) was removed behind our back.
RECORD_EVENTS = {
    "batches": "batch.register",
    "standard_lots": "lot.register",
    "releases": "batch.release",
    "withdrawals": "batch.withdraw",
    "amendments": "batch.amend",
    "label_prints": "label.print",
    "class_corrections": "classdata.correct",
    "instruments": "instrument.register",
    "calibrations": "instrument.calibrate",
    "recalls": "recall.open",
    "recall_clearances": "recall.clear",
    "api_tokens": "token.create",
}


def unaudited_records(db: sqlite_utils.Database) -> list[tuple[str, int]]:
    """(table, id) of every record row that has no audit entry of its own."""
    out: list[tuple[str, int]] = []
    for table, action in RECORD_EVENTS.items():
        for row in db.execute(
            f"SELECT t.id FROM {table} t WHERE NOT EXISTS (SELECT 1 FROM events e WHERE e.entity = ? "
            f"AND e.entity_id = t.id AND e.action = ?) ORDER BY t.id",
            [table, action],
        ):
            out.append((table, int(row[0])))
    for row in db.execute(
        "SELECT r.id FROM runs r WHERE NOT EXISTS (SELECT 1 FROM events e WHERE "
        "e.entity = 'runs' AND e.entity_id = r.id AND e.action LIKE 'run.record.%') ORDER BY r.id"
    ):
        out.append(("runs", int(row[0])))
    return out


def verify_chain(db: sqlite_utils.Database) -> int | None:
    """Recompute the audit hash chain; return the id of the first broken entry, or None if whole."""
    prev = GENESIS_HASH
    expected_id = None
    for row in db.execute("SELECT * FROM events ORDER BY id"):
        r = dict(row)
        if expected_id is not None and r["id"] != expected_id:
            return expected_id  # a row was deleted
        if r["prev_hash"] != prev or _event_hash(prev, r) != r["hash"]:
            return int(r["id"])
        prev = r["hash"]
        expected_id = r["id"] + 1
    return None


# ---------------------------------------------------------------- policy


def seed_default_policies(db: sqlite_utils.Database) -> None:
    """Write the starting reagent policies (used by a migration on a new database)."""
    now = utc_now()
    for p in DEFAULT_POLICIES:
        dbmod.insert_row(
            db,
            "reagent_policies",
            {
                "reagent": p.reagent,
                "nominal_molarities": json.dumps(list(p.nominal_molarities)),
                "shelf_life_days": p.shelf_life_days,
                "recheck_interval_days": p.recheck_interval_days,
                "tolerance_rel": p.tolerance_rel,
                "max_rsd": p.max_rsd,
                "min_replicates": p.min_replicates,
                "effective_from": "2000-01-01",
                "recorded_at": now,
                "recorded_by": "system",
                "reason": "starting policy",
            },
        )


def add_policy(db: sqlite_utils.Database, policy: ReagentPolicy, effective_from: dt.date, reason: str, actor: str) -> int:
    """Record a new policy for a reagent from a date; earlier policy rows stay as they were written."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for the change of policy")])
    with dbmod.write(db):
        pid = dbmod.insert_row(
            db,
            "reagent_policies",
            {
                "reagent": policy.reagent,
                "nominal_molarities": json.dumps(list(policy.nominal_molarities)),
                "shelf_life_days": policy.shelf_life_days,
                "recheck_interval_days": policy.recheck_interval_days,
                "tolerance_rel": policy.tolerance_rel,
                "max_rsd": policy.max_rsd,
                "min_replicates": policy.min_replicates,
                "effective_from": effective_from.isoformat(),
                "recorded_at": utc_now(),
                "recorded_by": actor,
                "reason": reason.strip(),
            },
        )
        append_event(
            db,
            actor,
            "policy.change",
            entity="reagent_policies",
            entity_id=pid,
            reason=reason.strip(),
            detail={
                "reagent": policy.reagent,
                "effective_from": effective_from.isoformat(),
                "shelf_life_days": policy.shelf_life_days,
                "recheck_interval_days": policy.recheck_interval_days,
                "tolerance_rel": policy.tolerance_rel,
                "max_rsd": policy.max_rsd,
                "min_replicates": policy.min_replicates,
            },
        )
    return pid


def policy_history(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """Every policy row ever recorded, newest first."""
    return dbmod.query(db, "SELECT * FROM reagent_policies ORDER BY id DESC")


def _policy_from_row(r: dict[str, Any]) -> ReagentPolicy:
    return ReagentPolicy(
        reagent=r["reagent"],
        nominal_molarities=tuple(json.loads(r["nominal_molarities"])),
        shelf_life_days=r["shelf_life_days"],
        recheck_interval_days=r["recheck_interval_days"],
        tolerance_rel=r["tolerance_rel"],
        max_rsd=r["max_rsd"],
        min_replicates=r["min_replicates"],
    )


def policies(db: sqlite_utils.Database, on: dt.date | None = None) -> dict[str, ReagentPolicy]:
    """The policy in force for every reagent on a date (today when None)."""
    day = (on or dt.date.today()).isoformat()
    rows = dbmod.query(db, "SELECT * FROM reagent_policies WHERE effective_from <= ? ORDER BY reagent, effective_from, id", [day])
    out: dict[str, ReagentPolicy] = {}
    for r in rows:
        out[r["reagent"]] = _policy_from_row(r)  # later rows overwrite earlier: newest wins
    return out


def policy_for(db: sqlite_utils.Database, reagent: str, on: dt.date | None = None) -> ReagentPolicy:
    """The policy in force for one reagent; NotFound when the reagent has none."""
    found = policies(db, on).get(reagent)
    if found is None:
        raise NotFound(f"no policy is recorded for reagent {reagent!r}")
    return found


# ---------------------------------------------------------------- batches

_CODE_SAFE = re.compile(r"[^A-Z0-9]")


def next_batch_code(db: sqlite_utils.Database, reagent: str, prepared_on: dt.date) -> str:
    """A readable batch ID: reagent, year and month prepared, then a sequence (e.g. NAOH-2611-02)."""
    stem = f"{_CODE_SAFE.sub('', reagent.upper())}-{prepared_on:%y%m}-"
    row = db.execute("SELECT count(*) FROM batches WHERE code LIKE ?", [stem + "%"]).fetchone()
    return f"{stem}{row[0] + 1:02d}"


BATCH_FIELDS = (
    "reagent",
    "nominal_molarity",
    "volume_l",
    "prepared_on",
    "prepared_by",
    "concentrate_lot",
    "concentrate_assay_w_w",
    "concentrate_density_g_ml",
    "water_grade",
    "container",
    "notes",
)


def create_batch(db: sqlite_utils.Database, values: dict[str, Any], actor: str) -> dict[str, Any]:
    """Register a batch (values already validated); return its row with the new code."""
    with dbmod.write(db):
        prepared_on = dt.date.fromisoformat(str(values["prepared_on"]))
        row = {k: values.get(k) for k in BATCH_FIELDS}
        for k in ("concentrate_lot", "water_grade", "container", "notes"):
            row[k] = row[k] or ""
        row["prepared_on"] = prepared_on.isoformat()
        row["code"] = values.get("code") or next_batch_code(db, values["reagent"], prepared_on)
        row["recorded_at"] = utc_now()
        row["recorded_by"] = actor
        batch_id = dbmod.insert_row(db, "batches", row)
        append_event(
            db,
            actor,
            "batch.register",
            entity="batches",
            entity_id=batch_id,
            batch_id=batch_id,
            detail={"code": row["code"], "reagent": row["reagent"], "nominal_molarity": row["nominal_molarity"]},
        )
        row["id"] = batch_id
    return row


# Fields of a batch that a correction may change; the reagent, nominal and dates are what the batch is,
# so a mistake there is a new batch, not a correction.
AMENDABLE_BATCH_FIELDS = (
    "volume_l",
    "prepared_by",
    "concentrate_lot",
    "concentrate_assay_w_w",
    "concentrate_density_g_ml",
    "water_grade",
    "container",
    "notes",
)


def _overlay(rows: list[dict[str, Any]], db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """Batches as they now read: each original row with its later corrections applied, field by field."""
    if not rows:
        return rows
    ids = [r["id"] for r in rows]
    found: dict[int, dict[str, Any]] = defaultdict(dict)
    for i in range(0, len(ids), 500):
        chunk = ids[i : i + 500]
        for a in db.execute(
            f"SELECT entity_id, field, new_value FROM amendments WHERE entity = 'batches' AND "
            f"entity_id IN ({','.join('?' * len(chunk))}) ORDER BY id",
            chunk,
        ):
            found[a["entity_id"]][a["field"]] = json.loads(a["new_value"])
    for r in rows:
        changes = found.get(r["id"])
        r["amended_fields"] = sorted(changes) if changes else []
        if changes:
            r.update(changes)
    return rows


def batch_by_code(db: sqlite_utils.Database, code: str) -> dict[str, Any]:
    """One batch by its readable ID, as it now reads (corrections applied); NotFound if none."""
    rows = dbmod.query(db, "SELECT * FROM batches WHERE code = ?", [code])
    if not rows:
        raise NotFound(f"no batch with ID {code!r}")
    return _overlay(rows, db)[0]


def batch_by_id(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any]:
    """One batch by its row id, as it now reads (corrections applied); NotFound if none."""
    rows = dbmod.query(db, "SELECT * FROM batches WHERE id = ?", [batch_id])
    if not rows:
        raise NotFound(f"no batch with id {batch_id}")
    return _overlay(rows, db)[0]


def amend_batch(db: sqlite_utils.Database, batch_id: int, field: str, new_value: Any, reason: str, actor: str) -> int:
    """Correct one descriptive field of a batch: a new attributed entry with the reason, before and after."""
    if field not in AMENDABLE_BATCH_FIELDS:
        raise InvalidInput([FieldError("field", "this detail cannot be corrected; register a new batch instead")])
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for the correction")])
    with dbmod.write(db):
        batch = batch_by_id(db, batch_id)
        old_value = batch.get(field)
        if old_value == new_value:
            raise InvalidInput([FieldError("new_value", "is the same as the current value")])
        aid = dbmod.insert_row(
            db,
            "amendments",
            {
                "entity": "batches",
                "entity_id": batch_id,
                "field": field,
                "old_value": json.dumps(old_value),
                "new_value": json.dumps(new_value),
                "reason": reason.strip(),
                "recorded_at": utc_now(),
                "recorded_by": actor,
            },
        )
        append_event(
            db,
            actor,
            "batch.amend",
            entity="amendments",
            entity_id=aid,
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"field": field, "before": old_value, "after": new_value},
        )
    return aid


# ---------------------------------------------------------------- standard lots

LOT_FIELDS = (
    "substance",
    "supplier",
    "supplier_lot",
    "assay",
    "assay_expanded_u",
    "assay_k",
    "expires_on",
    "dried_on",
    "dried_at_c",
    "storage_note",
    "received_on",
)


def create_lot(db: sqlite_utils.Database, values: dict[str, Any], actor: str) -> dict[str, Any]:
    """Register a primary-standard lot (values already validated); return its row."""
    with dbmod.write(db):
        row = {k: values.get(k) for k in LOT_FIELDS}
        for k in ("supplier", "supplier_lot", "storage_note"):
            row[k] = row[k] or ""
        if not values.get("code"):
            n = db.execute("SELECT count(*) FROM standard_lots").fetchone()[0]
            row["code"] = f"STD-{_CODE_SAFE.sub('', str(values['substance']).upper())[:6]}-{n + 1:03d}"
        else:
            row["code"] = values["code"]
        row["recorded_at"] = utc_now()
        row["recorded_by"] = actor
        lot_id = dbmod.insert_row(db, "standard_lots", row)
        append_event(
            db,
            actor,
            "lot.register",
            entity="standard_lots",
            entity_id=lot_id,
            detail={"code": row["code"], "substance": row["substance"], "assay": row["assay"]},
        )
        row["id"] = lot_id
    return row


def lot_by_id(db: sqlite_utils.Database, lot_id: int) -> dict[str, Any]:
    rows = dbmod.query(db, "SELECT * FROM standard_lots WHERE id = ?", [lot_id])
    if not rows:
        raise NotFound(f"no standard lot with id {lot_id}")
    return rows[0]


def list_lots(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    return dbmod.query(db, "SELECT * FROM standard_lots ORDER BY id DESC")


# ---------------------------------------------------------------- runs, decisions, releases

RUN_FIELDS = (
    "batch_id",
    "purpose",
    "method",
    "standard_lot_id",
    "reference_batch_id",
    "reference_release_id",
    "performed_on",
    "analyst",
    "temperature_c",
    "burette_capacity_ml",
    "endpoint",
    "notes",
)
REPLICATE_FIELDS = (
    "position",
    "mass_gross_g",
    "mass_tare_g",
    "mass_g",
    "aliquot_ml",
    "initial_ml",
    "final_ml",
    "volume_ml",
    "blank_ml",
    "temperature_c",
    "molarity",
)


def _result_row(run_id: int, result: dict[str, Any], cause: str, actor: str) -> dict[str, Any]:
    return {
        "run_id": run_id,
        "cause": cause,
        "molarity": result["molarity"],
        "u": result["u"],
        "expanded_u": result["U"],
        "k": result["k"],
        "n": result["n"],
        "sd": result.get("sd"),
        "rsd": result.get("rsd"),
        "accepted_by_rule": 1 if result.get("accepted") else 0,
        "result_json": json.dumps(result, default=str),
        "recorded_at": utc_now(),
        "recorded_by": actor,
    }


def record_run(
    db: sqlite_utils.Database,
    run: dict[str, Any],
    replicates: list[dict[str, Any]],
    result: dict[str, Any],
    actor: str,
    exclusions: Iterable[tuple[int, str]] = (),
) -> int:
    """Store a run, its replicates, exclusions and computed result in one write; return the run id.

    `result` is the science core's answer as a plain dict (molarity, u, U, k, n, sd, rsd, accepted...);
    `exclusions` are (position, reason) pairs chosen when the run was entered.
    """
    with dbmod.write(db):
        row = {k: run.get(k) for k in RUN_FIELDS}
        row["endpoint"] = row["endpoint"] or ""
        row["notes"] = row["notes"] or ""
        row["recorded_at"] = utc_now()
        row["recorded_by"] = actor
        run_id = dbmod.insert_row(db, "runs", row)
        for rep in replicates:
            rep_row = {k: rep.get(k) for k in REPLICATE_FIELDS}
            rep_row["blank_ml"] = rep_row["blank_ml"] or 0.0
            rep_row["run_id"] = run_id
            dbmod.insert_row(db, "replicates", rep_row)
        for position, reason in exclusions:
            dbmod.insert_row(
                db,
                "exclusions",
                {
                    "run_id": run_id,
                    "position": position,
                    "reason": reason.strip(),
                    "recorded_at": row["recorded_at"],
                    "recorded_by": actor,
                },
            )
        dbmod.insert_row(db, "run_results", _result_row(run_id, result, "recorded", actor))
        append_event(
            db,
            actor,
            f"run.record.{row['purpose']}",
            entity="runs",
            entity_id=run_id,
            batch_id=row["batch_id"],
            detail={
                "n": result.get("n"),
                "molarity": result.get("molarity"),
                "U": result.get("U"),
                "excluded": [p for p, _ in exclusions],
            },
        )
    return run_id


def _latest_results(db: sqlite_utils.Database, run_ids: list[int]) -> dict[int, dict[str, Any]]:
    if not run_ids:
        return {}
    marks = ",".join("?" * len(run_ids))
    rows = dbmod.query(
        db,
        f"SELECT * FROM run_results WHERE id IN (SELECT max(id) FROM run_results WHERE run_id IN ({marks}) GROUP BY run_id)",
        run_ids,
    )
    out = {}
    for r in rows:
        r["result"] = json.loads(r.pop("result_json"))
        out[r["run_id"]] = r
    return out


def run_by_id(db: sqlite_utils.Database, run_id: int) -> dict[str, Any]:
    """A run with its replicates, exclusions, decisions and current (newest) result."""
    rows = dbmod.query(db, "SELECT * FROM runs WHERE id = ?", [run_id])
    if not rows:
        raise NotFound(f"no run with id {run_id}")
    run = rows[0]
    run["current"] = _latest_results(db, [run_id]).get(run_id)
    run["replicates"] = dbmod.query(db, "SELECT * FROM replicates WHERE run_id = ? ORDER BY position", [run_id])
    run["exclusions"] = dbmod.query(db, "SELECT * FROM exclusions WHERE run_id = ? ORDER BY id", [run_id])
    run["decisions"] = dbmod.query(db, "SELECT * FROM decisions WHERE run_id = ? ORDER BY id", [run_id])
    return run


def exclude_replicate(
    db: sqlite_utils.Database, run_id: int, position: int, reason: str, result: dict[str, Any], actor: str
) -> None:
    """Record that one replicate is left out of an undecided run, with the reason and the new result."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for excluding this replicate")])
    with dbmod.write(db):
        run = run_by_id(db, run_id)
        if position not in {r["position"] for r in run["replicates"]}:
            raise NotFound(f"run {run_id} has no replicate {position}")
        if position in {e["position"] for e in run["exclusions"]}:
            raise Conflict(f"replicate {position} is already excluded")
        if run["decisions"]:
            raise Conflict("this run has already been decided; record a new run instead")
        dbmod.insert_row(
            db,
            "exclusions",
            {"run_id": run_id, "position": position, "reason": reason.strip(), "recorded_at": utc_now(), "recorded_by": actor},
        )
        dbmod.insert_row(db, "run_results", _result_row(run_id, result, f"exclusion of replicate {position}", actor))
        append_event(
            db,
            actor,
            "replicate.exclude",
            entity="runs",
            entity_id=run_id,
            batch_id=run["batch_id"],
            reason=reason.strip(),
            detail={"position": position, "molarity": result["molarity"]},
        )


def decide_run(
    db: sqlite_utils.Database,
    run_id: int,
    decision: str,
    reason: str,
    actor: str,
    release: dict[str, Any] | None = None,
) -> int | None:
    """Accept or reject a run; accepting a certifying run writes a release (given); return its id."""
    with dbmod.write(db):
        run = run_by_id(db, run_id)
        if run["decisions"]:
            raise Conflict("this run has already been decided")
        if decision == "reject" and not reason.strip():
            raise InvalidInput([FieldError("reason", "give the reason for rejecting this run")])
        dbmod.insert_row(
            db,
            "decisions",
            {"run_id": run_id, "decision": decision, "reason": reason.strip(), "recorded_at": utc_now(), "recorded_by": actor},
        )
        append_event(
            db, actor, f"run.{decision}", entity="runs", entity_id=run_id, batch_id=run["batch_id"], reason=reason.strip()
        )
        release_id = None
        if decision == "accept" and run["purpose"] == "certify":
            if release is None:
                raise InvalidInput("an accepted certifying run needs its release values", field="release")
            release_id = _write_release(db, run, release, actor)
    return release_id


def _write_release(db: sqlite_utils.Database, run: dict[str, Any], release: dict[str, Any], actor: str) -> int:
    batch_id = run["batch_id"]
    if withdrawal_of(db, batch_id) is not None:
        raise Conflict("this batch has been withdrawn; it cannot be released again")
    previous = db.execute(
        "SELECT id FROM releases WHERE batch_id = ? ORDER BY released_on DESC, id DESC LIMIT 1", [batch_id]
    ).fetchone()
    row = {
        "batch_id": batch_id,
        "run_id": run["id"],
        "molarity": release["molarity"],
        "u": release["u"],
        "expanded_u": release["U"],
        "k": release["k"],
        "reference_temperature_c": release.get("reference_temperature_c", 20.0),
        "released_on": release["released_on"],
        "expires_on": release["expires_on"],
        "recheck_interval_days": release["recheck_interval_days"],
        "tolerance_rel": release["tolerance_rel"],
        "supersedes_id": previous[0] if previous else None,
        "recorded_at": utc_now(),
        "recorded_by": actor,
    }
    release_id = dbmod.insert_row(db, "releases", row)
    append_event(
        db,
        actor,
        "batch.release",
        entity="releases",
        entity_id=release_id,
        batch_id=batch_id,
        detail={
            "molarity": row["molarity"],
            "U": row["expanded_u"],
            "k": row["k"],
            "released_on": row["released_on"],
            "expires_on": row["expires_on"],
            "supersedes": row["supersedes_id"],
        },
    )
    return release_id


def withdrawal_of(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any] | None:
    rows = dbmod.query(db, "SELECT * FROM withdrawals WHERE batch_id = ? ORDER BY id LIMIT 1", [batch_id])
    return rows[0] if rows else None


def withdraw_batch(db: sqlite_utils.Database, batch_id: int, withdrawn_on: dt.date, reason: str, actor: str) -> int:
    """Withdraw a batch from use from a date, with the reason; a batch is withdrawn once."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for withdrawing this batch")])
    with dbmod.write(db):
        if withdrawal_of(db, batch_id) is not None:
            raise Conflict("this batch is already withdrawn")
        wid = dbmod.insert_row(
            db,
            "withdrawals",
            {
                "batch_id": batch_id,
                "withdrawn_on": withdrawn_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": utc_now(),
                "recorded_by": actor,
            },
        )
        append_event(
            db,
            actor,
            "batch.withdraw",
            entity="withdrawals",
            entity_id=wid,
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"withdrawn_on": withdrawn_on.isoformat()},
        )
    return wid


# ---------------------------------------------------------------- derived views


@dataclass(frozen=True)
class BatchView:
    """A batch row with its derived status on a date."""

    batch: dict[str, Any]
    report: StatusReport


def facts_of(db: sqlite_utils.Database, batch_ids: Iterable[int] | None = None) -> dict[int, BatchFacts]:
    """BatchFacts of many batches from three queries in all (never one query per batch)."""
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
    prepared = {
        r["id"]: dt.date.fromisoformat(r["prepared_on"])
        for r in db.execute("SELECT id, prepared_on FROM batches" + (where.replace("batch_id", "id") if where else ""), params)
    }
    from stockroom.recall import review_facts  # recall reads these records: imported here to avoid a cycle

    reviews = review_facts(db)  # one query while no recall is on record
    return {
        bid: BatchFacts(
            prepared_on=p,
            releases=tuple(releases.get(bid, ())),
            rechecks=tuple(checks.get(bid, ())),
            withdrawn_on=withdrawn.get(bid),
            reviews=reviews.get(bid, ()),
        )
        for bid, p in prepared.items()
    }


def batch_facts(db: sqlite_utils.Database, batch_id: int) -> BatchFacts:
    facts = facts_of(db, [batch_id]).get(batch_id)
    if facts is None:
        raise NotFound(f"no batch with id {batch_id}")
    return facts


COARSE_FINAL = ("expired", "withdrawn")


def coarse_statuses(
    db: sqlite_utils.Database,
    on: dt.date,
    *,
    reagent: str | None = None,
    search: str | None = None,
) -> list[tuple[int, str, str | None]]:
    """(batch id, coarse status, since) of every batch that existed on `on`, newest first, from SQL alone.

    The coarse status is "withdrawn", "expired" or "awaiting" exactly as policy.status_on would say, or
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
        "EXISTS (SELECT 1 FROM releases r WHERE r.batch_id = b.id AND r.released_on <= ?) AS released "
        "FROM batches b WHERE b.prepared_on <= ?"
    )
    params: list[Any] = [day, day, day]
    if reagent:
        sql += " AND b.reagent = ?"
        params.append(reagent)
    if search:
        sql += " AND (b.code LIKE ? OR b.prepared_by LIKE ? OR b.notes LIKE ?)"
        params += [f"%{search}%"] * 3
    sql += " ORDER BY b.prepared_on DESC, b.id DESC"
    out = []
    for r in db.execute(sql, params):
        since = None
        if r["withdrawn_on"] is not None and r["withdrawn_on"] <= day:
            coarse, since = "withdrawn", r["withdrawn_on"]
        elif not r["released"]:
            coarse = "awaiting"
        elif r["expires_on"] < day:
            coarse, since = "expired", r["expires_on"]
        else:
            coarse = "live"
        out.append((int(r["id"]), coarse, since))
    return out


def views_of(db: sqlite_utils.Database, ids: list[int], on: dt.date) -> list[BatchView]:
    """BatchViews (row as it now reads, full status on `on`) of the given batches, in the order given."""
    if not ids:
        return []
    rows: dict[int, dict[str, Any]] = {}
    for i in range(0, len(ids), 500):
        chunk = ids[i : i + 500]
        for r in dbmod.query(db, f"SELECT * FROM batches WHERE id IN ({','.join('?' * len(chunk))})", chunk):
            rows[r["id"]] = r
    _overlay(list(rows.values()), db)
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
    if status is not None and status not in ("expired", "withdrawn", "awaiting"):
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
    current = _latest_results(db, run_ids)
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
    for r in releases:
        r["superseded"] = r["id"] in superseded
    return {
        "runs": runs,
        "releases": releases,
        "withdrawals": dbmod.query(db, "SELECT * FROM withdrawals WHERE batch_id = ? ORDER BY id", [batch_id]),
        "prints": dbmod.query(db, "SELECT * FROM label_prints WHERE batch_id = ? ORDER BY id", [batch_id]),
        "events": dbmod.query(db, "SELECT * FROM events WHERE batch_id = ? ORDER BY id", [batch_id]),
        "amendments": dbmod.query(
            db, "SELECT * FROM amendments WHERE entity = 'batches' AND entity_id = ? ORDER BY id", [batch_id]
        ),
    }
