"""Standardization runs: the run, its replicates, exclusions, computed results, decisions and releases."""

from __future__ import annotations

import json
from collections.abc import Iterable
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import formatting
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.records.audit import record_row
from stockroom.records.withdrawals import withdrawal_of

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
    "titration_temperature_c",  # °C of the solution titrated, for pairs titrated hot (migration 0013)
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
# A replicate's curve (migration 0014): stored beside it, the points as JSON.
CURVE_FIELDS = ("reading", "method", "volume_ml", "u_ml", "u_step_ml", "u_noise_ml", "u_fit_ml")


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
        "recorded_at": dbmod.utc_now(),
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
    exclusions = list(exclusions)
    with dbmod.write(db):
        row = {k: run.get(k) for k in RUN_FIELDS}
        row["endpoint"] = row["endpoint"] or ""
        row["notes"] = row["notes"] or ""
        row["recorded_at"] = dbmod.utc_now()
        row["recorded_by"] = actor

        def write_parts(run_id: int) -> None:
            # The run's parts belong to its entry: written in the same transaction, before the entry
            # so that it names them (and their content) too.
            for rep in replicates:
                rep_row = {k: rep.get(k) for k in REPLICATE_FIELDS}
                rep_row["blank_ml"] = rep_row["blank_ml"] or 0.0
                rep_row["run_id"] = run_id
                dbmod.insert_row(db, "replicates", rep_row)
                curve = rep.get("curve")
                if curve:
                    curve_row = {k: curve.get(k) for k in CURVE_FIELDS}
                    curve_row.update(
                        run_id=run_id,
                        position=rep_row["position"],
                        points_json=json.dumps(curve["points"]),
                        point_count=len(curve["points"]),
                        recorded_at=row["recorded_at"],
                        recorded_by=actor,
                    )
                    dbmod.insert_row(db, "replicate_curves", curve_row)
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

        run_id = record_row(
            db,
            "runs",
            row,
            actor=actor,
            action_code=f"run.record.{row['purpose']}",
            batch_id=row["batch_id"],
            detail={
                "n": result.get("n"),
                "molarity": result.get("molarity"),
                "U": result.get("U"),
                "excluded": [p for p, _ in exclusions],
                # Checks that fired and the reasons given for going ahead despite them.
                "checks": [c.get("code") for c in result.get("checks") or []],
                "overrides": dict(result.get("overrides") or {}),
                # The curves the titres rest on: where each end point was located, and how surely.
                "curves": [
                    {
                        "position": i,
                        "method": rep["curve"]["method"],
                        "points": len(rep["curve"]["points"]),
                        "volume_ml": rep["curve"]["volume_ml"],
                        "u_ml": rep["curve"]["u_ml"],
                    }
                    for i, rep in enumerate(replicates, start=1)
                    if rep.get("curve")
                ],
            },
            parts=write_parts,
        )
    return run_id


def latest_results(db: sqlite_utils.Database, run_ids: list[int]) -> dict[int, dict[str, Any]]:
    """run id -> its current (newest) result row, with the stored result decoded under "result"."""
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
    run["current"] = latest_results(db, [run_id]).get(run_id)
    run["replicates"] = dbmod.query(db, "SELECT * FROM replicates WHERE run_id = ? ORDER BY position", [run_id])
    attach_curves(db, run_id, run["replicates"])
    run["exclusions"] = dbmod.query(db, "SELECT * FROM exclusions WHERE run_id = ? ORDER BY id", [run_id])
    run["decisions"] = dbmod.query(db, "SELECT * FROM decisions WHERE run_id = ? ORDER BY id", [run_id])
    return run


def attach_curves(db: sqlite_utils.Database, run_id: int, replicates: list[dict[str, Any]]) -> None:
    """Give each replicate of the run its stored curve (under "curve", points decoded) and located u.

    endpoint_u_ml and endpoint_method are what standardization reads, so a recomputation of the run
    (an exclusion) carries the same end-point term as when it was recorded.
    """
    rows = dbmod.query(db, "SELECT * FROM replicate_curves WHERE run_id = ? ORDER BY position", [run_id])
    by_position = {r["position"]: r for r in rows}
    for rep in replicates:
        row = by_position.get(rep["position"])
        if row is None:
            continue
        row = dict(row)
        row["points"] = [tuple(pt) for pt in json.loads(row.pop("points_json"))]
        rep["curve"] = row
        rep["endpoint_u_ml"] = row["u_ml"]
        rep["endpoint_method"] = row["method"]


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
        # The new result first, so the exclusion's entry names it too.
        dbmod.insert_row(db, "run_results", _result_row(run_id, result, f"exclusion of replicate {position}", actor))
        record_row(
            db,
            "exclusions",
            {
                "run_id": run_id,
                "position": position,
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="replicate.exclude",
            about=("runs", run_id),
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
        record_row(
            db,
            "decisions",
            {
                "run_id": run_id,
                "decision": decision,
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code=f"run.{decision}",
            about=("runs", run_id),
            batch_id=run["batch_id"],
            reason=reason.strip(),
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
    number = db.execute("SELECT count(*) FROM releases WHERE batch_id = ?", [batch_id]).fetchone()[0] + 1
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
        "recorded_at": dbmod.utc_now(),
        "recorded_by": actor,
    }
    return record_row(
        db,
        "releases",
        row,
        actor=actor,
        action_code="batch.release",
        batch_id=batch_id,
        detail={
            "molarity": row["molarity"],
            "U": row["expanded_u"],
            "k": row["k"],
            "released_on": row["released_on"],
            "expires_on": row["expires_on"],
            # Releases in words, by their number within the batch (the trail shows these to people).
            "release": formatting.release_name(number),
            "supersedes": formatting.release_name(release_number(db, previous[0])) if previous else "none (first release)",
        },
    )


def release_numbers(db: sqlite_utils.Database, release_ids: Iterable[int | None]) -> dict[int, int]:
    """Each release's number within its batch: 1 for a batch's first release, 2 for its second...

    Derived, not stored: releases are append-only, so a release's place among its batch's releases
    (by the order they were recorded) never changes. Unknown ids are left out.
    """
    wanted = sorted({int(i) for i in release_ids if i is not None})
    if not wanted:
        return {}
    marks = ",".join("?" * len(wanted))
    rows = db.execute(
        "SELECT r.id, (SELECT count(*) FROM releases o WHERE o.batch_id = r.batch_id AND o.id <= r.id) "
        f"FROM releases r WHERE r.id IN ({marks})",
        wanted,
    ).fetchall()
    return {int(r[0]): int(r[1]) for r in rows}


def release_number(db: sqlite_utils.Database, release_id: int) -> int:
    """The number of release `release_id` within its batch (see release_numbers); NotFound if unknown."""
    found = release_numbers(db, [release_id]).get(int(release_id))
    if found is None:
        raise NotFound("no such release")
    return found


def release_labels(db: sqlite_utils.Database, release_ids: Iterable[int | None]) -> dict[int, str]:
    """Each release as people read it: 'release 2 of HCL-2606-01' (formatting.release_name)."""
    numbers = release_numbers(db, release_ids)
    if not numbers:
        return {}
    marks = ",".join("?" * len(numbers))
    codes = {
        int(r[0]): str(r[1])
        for r in db.execute(
            f"SELECT r.id, b.code FROM releases r JOIN batches b ON b.id = r.batch_id WHERE r.id IN ({marks})", list(numbers)
        )
    }
    return {rid: formatting.release_name(n, codes.get(rid)) for rid, n in numbers.items()}


def undecided_runs(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """Runs awaiting a decision (neither accepted nor rejected) on batches not withdrawn, oldest first.

    Each row: id, purpose, performed_on, analyst, recorded_by, the batch's code and reagent, and
    "current" (its newest result row, the stored result decoded under "result").
    """
    rows = dbmod.query(
        db,
        "SELECT r.id, r.purpose, r.method, r.performed_on, r.analyst, r.recorded_by, r.batch_id, b.code AS batch_code,"
        " b.reagent, b.nominal_molarity FROM runs r JOIN batches b ON b.id = r.batch_id"
        " WHERE NOT EXISTS (SELECT 1 FROM decisions d WHERE d.run_id = r.id)"
        " AND NOT EXISTS (SELECT 1 FROM withdrawals w WHERE w.batch_id = r.batch_id)"
        " ORDER BY r.performed_on, r.id",
    )
    current = latest_results(db, [r["id"] for r in rows])
    for r in rows:
        r["current"] = current.get(r["id"])
    return rows
