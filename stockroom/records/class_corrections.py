"""Class-data corrections: a class's results recomputed with the molarity in force on a lab day."""

from __future__ import annotations

import datetime as dt
import hashlib
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import labday as ld
from stockroom.errors import NotFound
from stockroom.records.audit import record_row


def record_correction(
    db: sqlite_utils.Database,
    *,
    lab_day: dt.date,
    entry: ld.LabDayEntry,
    molarity_used: float,
    rows: tuple[ld.ClassRow, ...],
    upload: bytes,
    upload_name: str,
    actor: str,
    destination: str = "",
) -> int:
    """Store one class-data correction (molarity_used in mol/L) and its audit event in one write; return its id.

    destination: the destination whose received batch was used ("CHM 110 · section B"), kept in the audit
    entry's detail; "" when the batch was chosen from those in force.
    """
    row = {
        "lab_day": lab_day.isoformat(),
        "titrant": entry.batch.reagent,
        "batch_id": entry.batch.id,
        "release_id": entry.release.id,
        "certified_molarity": entry.release.molarity,
        "bench_temperature_c": entry.bench_temperature_c,
        "molarity_used": molarity_used,
        "nominal_molarity": entry.batch.nominal_molarity,
        "row_count": len(rows),
        "upload_name": upload_name[:200],
        "upload_sha256": hashlib.sha256(upload).hexdigest(),
        "rows_csv": ld.rows_to_csv(rows),
        "recorded_at": dbmod.utc_now(),
        "recorded_by": actor,
    }
    return record_row(
        db,
        "class_corrections",
        row,
        actor=actor,
        action_code="classdata.correct",
        batch_id=entry.batch.id,
        detail={
            "lab_day": row["lab_day"],
            "titrant": row["titrant"],
            "release_id": row["release_id"],
            "molarity_used": molarity_used,
            "rows": len(rows),
            "upload_sha256": row["upload_sha256"],
            **({"destination": destination} if destination else {}),
        },
    )


def correction_by_id(db: sqlite_utils.Database, cid: int) -> dict[str, Any]:
    """One stored class-data correction with its batch code; NotFound if none."""
    rows = dbmod.query(
        db, "SELECT c.*, b.code AS batch_code FROM class_corrections c JOIN batches b ON b.id = c.batch_id WHERE c.id = ?", [cid]
    )
    if not rows:
        raise NotFound(f"no class-data correction with id {cid}")
    return rows[0]


def corrections_with_release(db: sqlite_utils.Database, release_id: int) -> list[dict[str, Any]]:
    """Every class-data correction made with a release (for a recall), oldest first."""
    return dbmod.query(db, "SELECT * FROM class_corrections WHERE release_id = ? ORDER BY id", [release_id])
