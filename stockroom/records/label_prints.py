"""The label print register: each print takes a fresh range of serials, unique across the database."""

from __future__ import annotations

from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.records.audit import record_row


def next_serial(db: sqlite_utils.Database) -> int:
    """The next free print serial (one more than the highest ever issued)."""
    row = db.execute("SELECT coalesce(max(serial_last), 0) FROM label_prints").fetchone()
    return int(row[0]) + 1


def record_print(
    db: sqlite_utils.Database, batch_id: int, release_id: int | None, layout: str, copies: int, value_printed: str, actor: str
) -> dict[str, Any]:
    """Take the next `copies` serials and record the print with its audit event; return the new row."""
    with dbmod.write(db):
        first = next_serial(db)
        row: dict[str, Any] = {
            "batch_id": batch_id,
            "release_id": release_id,
            "layout": layout,
            "copies": copies,
            "serial_first": first,
            "serial_last": first + copies - 1,
            "value_printed": value_printed,
            "recorded_at": dbmod.utc_now(),
            "recorded_by": actor,
        }
        row["id"] = record_row(
            db,
            "label_prints",
            row,
            actor=actor,
            action_code="label.print",
            batch_id=batch_id,
            detail={
                "layout": layout,
                "copies": copies,
                "serials": [first, row["serial_last"]],
                "value_printed": value_printed,
                "release_id": release_id,
            },
        )
    return row
