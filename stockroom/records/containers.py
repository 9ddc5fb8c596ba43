"""Containers filled from batches, and the batches' recorded losses: reads shared by tracking and planning.

A container row is one dispensing (see schema 0012_tracking). Writes (dispensing, losses, disposals)
live here too, each through `record_row` with its audit entry. Volumes are in litres; dates are the
lab's dates as ISO text.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Iterable, Mapping
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import stock
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.policy import BatchFacts, release_in_force, status_on
from stockroom.records.audit import record_row
from stockroom.records.facts import recorded_facts
from stockroom.records.policies import policies

# A containers row with its disposal, if any (each container is taken out of use once at most).
_WITH_DISPOSAL = (
    "SELECT c.*, d.disposed_on AS disposed_on, d.reason AS disposal_reason, d.recorded_by AS disposed_by "
    "FROM containers c LEFT JOIN container_disposals d ON d.container_id = c.id "
)


def containers_of(db: sqlite_utils.Database, batch_id: int) -> list[dict[str, Any]]:
    """The containers filled from a batch, oldest fill first, each with `disposed_on` (None while in use)."""
    return containers_of_batches(db, [batch_id])


def containers_of_batches(db: sqlite_utils.Database, batch_ids: Iterable[int]) -> list[dict[str, Any]]:
    """The containers filled from any of the batches, in one query: oldest fill first, each with `disposed_on`."""
    ids = sorted({int(b) for b in batch_ids})
    if not ids:
        return []
    return dbmod.query(
        db,
        _WITH_DISPOSAL + f"WHERE c.batch_id IN ({','.join('?' * len(ids))}) ORDER BY c.filled_on, c.id",
        ids,
    )


def volume_out_l(db: sqlite_utils.Database, batch_ids: Iterable[int], on: dt.date | None = None) -> dict[int, float]:
    """Litres gone from each batch (dispensed into containers, lost or disposed of), up to a date if given.

    Batches with nothing gone map to 0.0.
    """
    ids = sorted(set(int(b) for b in batch_ids))
    out = {b: 0.0 for b in ids}
    if not ids:
        return out
    marks = ",".join("?" * len(ids))
    until = on.isoformat() if on is not None else "9999-12-31"
    rows = db.execute(
        f"SELECT batch_id, sum(volume_l) FROM containers WHERE batch_id IN ({marks}) AND filled_on <= ? "
        f"GROUP BY batch_id UNION ALL "
        f"SELECT batch_id, sum(volume_l) FROM batch_volume_losses WHERE batch_id IN ({marks}) AND occurred_on <= ? "
        f"GROUP BY batch_id",
        [*ids, until, *ids, until],
    ).fetchall()
    for batch_id, litres in rows:
        out[int(batch_id)] += float(litres or 0.0)
    return out


def volume_remaining_l(db: sqlite_utils.Database, batch_id: int, on: dt.date | None = None) -> float:
    """Registered volume of a batch less what has gone from it (up to a date if given), L; never below 0."""
    row = db.execute("SELECT volume_l FROM batches WHERE id = ?", [batch_id]).fetchone()
    if row is None:
        return 0.0
    return max(0.0, float(row[0]) - volume_out_l(db, [batch_id], on)[batch_id])


def received_by(db: sqlite_utils.Database, course: str, section: str, on: dt.date) -> list[dict[str, Any]]:
    """Containers a course and section had in use on a date: filled on or before it, not yet expired or
    disposed of; newest fill first. Course and section compare without regard to case; an empty section
    matches every section of the course."""
    day = on.isoformat()
    sql = (
        _WITH_DISPOSAL + "WHERE c.course = ? COLLATE NOCASE AND c.filled_on <= ? AND c.expires_on >= ? "
        "AND (d.disposed_on IS NULL OR d.disposed_on > ?)"
    )
    params: list[Any] = [course.strip(), day, day, day]
    if section.strip():
        sql += " AND c.section = ? COLLATE NOCASE"
        params.append(section.strip())
    sql += " ORDER BY c.filled_on DESC, c.id DESC"
    return dbmod.query(db, sql, params)


# ---------------------------------------------------------------------------------------------- writes


def container_by_code(db: sqlite_utils.Database, code: str) -> dict[str, Any]:
    """One container row by its code, with `disposed_on` and `disposal_reason`; NotFound when there is none."""
    rows = dbmod.query(
        db,
        _WITH_DISPOSAL + "WHERE c.code = ?",
        [code],
    )
    if not rows:
        raise NotFound(f"no container with code {code!r}")
    return rows[0]


def losses_of(db: sqlite_utils.Database, batch_id: int) -> list[dict[str, Any]]:
    """The recorded losses and disposals of a batch's own volume, oldest first."""
    return dbmod.query(db, "SELECT * FROM batch_volume_losses WHERE batch_id = ? ORDER BY occurred_on, id", [batch_id])


FactsReader = Callable[[sqlite_utils.Database, int], BatchFacts]


def _recorded(db: sqlite_utils.Database, batch_id: int) -> BatchFacts:
    found = recorded_facts(db, [batch_id]).get(batch_id)
    if found is None:
        raise NotFound(f"no batch with id {batch_id}")
    return found


def dispense(
    db: sqlite_utils.Database,
    batch: Mapping[str, Any],
    d: stock.Dispensing,
    actor: str,
    facts_of: FactsReader = _recorded,
) -> dict[str, Any]:
    """Fill one container from a batch: check and record in one write; the new containers row.

    batch: the batches row; d: the dispensing as stock.read_dispensing read it; facts_of: how the batch's
    facts are read inside the write (the read model passes its own, which adds the recalls' reviews).
    Conflict when the batch has no value in force on the fill date or is on hold; InvalidInput when the
    volume (L) is more than remains. Two dispensings at once cannot both take the last litre: the
    remaining volume is read under the write lock that the insert holds.
    """
    with dbmod.write(db):
        facts = facts_of(db, int(batch["id"]))
        report = status_on(facts, d.filled_on)
        in_force = release_in_force(facts, d.filled_on)
        stock.check_dispensing(report, in_force, d.volume_l, volume_remaining_l(db, int(batch["id"])))
        assert in_force is not None
        policy = policies(db, d.filled_on).get(batch["reagent"])
        expires = stock.container_expiry(in_force.expires_on, d.filled_on, policy.container_shelf_life_days if policy else None)
        codes = [r[0] for r in db.execute("SELECT code FROM containers WHERE batch_id = ?", [batch["id"]])]
        code = stock.container_code(batch["code"], stock.next_sequence(batch["code"], codes))
        row = {
            "code": code,
            "batch_id": int(batch["id"]),
            "kind": d.kind,
            "volume_l": d.volume_l,
            "filled_on": d.filled_on.isoformat(),
            "expires_on": expires.isoformat(),
            "room": d.destination.room,
            "course": d.destination.course,
            "section": d.destination.section,
            "notes": d.notes,
            "recorded_at": dbmod.utc_now(),
            "recorded_by": actor,
        }
        row_id = record_row(
            db,
            "containers",
            row,
            actor=actor,
            action_code="container.fill",
            batch_id=int(batch["id"]),
            detail={
                "code": code,
                "kind": d.kind,
                "volume_l": d.volume_l,
                "filled_on": row["filled_on"],
                "expires_on": row["expires_on"],
                "destination": d.destination.words(),
                "release_id": in_force.id,
            },
        )
    return {"id": row_id, **row}


def record_volume_change(db: sqlite_utils.Database, batch: Mapping[str, Any], change: stock.VolumeChange, actor: str) -> int:
    """Record a loss (spill, evaporation) or disposal of a batch's own remaining volume, with its reason.

    InvalidInput when the volume (L) is more than remains, or the date is before the batch was prepared.
    """
    if not change.reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for the loss or disposal")])
    if change.occurred_on < dt.date.fromisoformat(batch["prepared_on"]):
        raise InvalidInput([FieldError("occurred_on", f"cannot be before the batch was prepared ({batch['prepared_on']})")])
    with dbmod.write(db):
        stock.check_volume("volume_l", change.volume_l, volume_remaining_l(db, int(batch["id"])))
        return record_row(
            db,
            "batch_volume_losses",
            {
                "batch_id": int(batch["id"]),
                "kind": change.kind,
                "volume_l": change.volume_l,
                "occurred_on": change.occurred_on.isoformat(),
                "reason": change.reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="batch.volume_loss",
            batch_id=int(batch["id"]),
            reason=change.reason.strip(),
            detail={"kind": change.kind, "volume_l": change.volume_l, "occurred_on": change.occurred_on.isoformat()},
        )


def dispose_container(
    db: sqlite_utils.Database, container: Mapping[str, Any], disposed_on: dt.date, reason: str, actor: str
) -> int:
    """Take a container out of use from a date, with the reason; a container is taken out of use once."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for taking the container out of use")])
    stock.check_disposal_date(dt.date.fromisoformat(container["filled_on"]), disposed_on)
    with dbmod.write(db):
        if dbmod.query(db, "SELECT 1 FROM container_disposals WHERE container_id = ?", [container["id"]]):
            raise Conflict(f"container {container['code']} is already out of use")
        return record_row(
            db,
            "container_disposals",
            {
                "container_id": int(container["id"]),
                "disposed_on": disposed_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="container.dispose",
            batch_id=int(container["batch_id"]),
            reason=reason.strip(),
            detail={"code": container["code"], "disposed_on": disposed_on.isoformat()},
        )
