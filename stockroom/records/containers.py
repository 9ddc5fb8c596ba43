"""Containers filled from batches, and the batches' recorded losses: reads shared by tracking and planning.

A container row is one dispensing (see schema 0012_tracking). Writes (dispensing, losses, disposals)
live here too, each through `record_row` with its audit entry. Volumes are in litres; dates are the
lab's dates as ISO text.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable
from typing import Any

import sqlite_utils

from stockroom import db as dbmod


def containers_of(db: sqlite_utils.Database, batch_id: int) -> list[dict[str, Any]]:
    """The containers filled from a batch, oldest fill first, each with `disposed_on` (None while in use)."""
    return dbmod.query(
        db,
        "SELECT c.*, d.disposed_on AS disposed_on, d.reason AS disposal_reason FROM containers c "
        "LEFT JOIN container_disposals d ON d.container_id = c.id "
        "WHERE c.batch_id = ? ORDER BY c.filled_on, c.id",
        [batch_id],
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
        "SELECT c.*, d.disposed_on AS disposed_on FROM containers c "
        "LEFT JOIN container_disposals d ON d.container_id = c.id "
        "WHERE c.course = ? COLLATE NOCASE AND c.filled_on <= ? AND c.expires_on >= ? "
        "AND (d.disposed_on IS NULL OR d.disposed_on > ?)"
    )
    params: list[Any] = [course.strip(), day, day, day]
    if section.strip():
        sql += " AND c.section = ? COLLATE NOCASE"
        params.append(section.strip())
    sql += " ORDER BY c.filled_on DESC, c.id DESC"
    return dbmod.query(db, sql, params)
