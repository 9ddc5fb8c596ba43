"""Registrations in error: a batch entered by mistake, marked so with the reason (a new row, once per batch).

A withdrawal takes a batch that was in service out of use from a date; a registration in error says
the batch should never have been registered (a second entry of the same carboy, the wrong reagent).
Both leave the batch's own rows as written.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import Conflict, FieldError, InvalidInput
from stockroom.records.audit import record_row


def registration_in_error_of(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any] | None:
    """The registration-in-error row of a batch, or None when it stands as registered."""
    rows = dbmod.query(db, "SELECT * FROM registrations_in_error WHERE batch_id = ? ORDER BY id LIMIT 1", [batch_id])
    return rows[0] if rows else None


def mark_registered_in_error(db: sqlite_utils.Database, batch_id: int, marked_on: dt.date, reason: str, actor: str) -> int:
    """Mark a batch registered in error on the lab's date `marked_on`, with the reason; once per batch.

    A batch already withdrawn keeps its withdrawal (Conflict): it was in service, and that is its record.
    """
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "is required: say what was registered by mistake")])
    with dbmod.write(db):
        if registration_in_error_of(db, batch_id) is not None:
            raise Conflict("this batch is already marked registered in error")
        if dbmod.query(db, "SELECT 1 FROM withdrawals WHERE batch_id = ? LIMIT 1", [batch_id]):
            raise Conflict("this batch is withdrawn: it was in service, so its withdrawal stands as its record")
        return record_row(
            db,
            "registrations_in_error",
            {
                "batch_id": batch_id,
                "marked_on": marked_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="batch.registered_in_error",
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"marked_on": marked_on.isoformat()},
        )
