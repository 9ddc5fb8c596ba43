"""Withdrawals: a batch taken out of use from a date, with the reason; a batch is withdrawn once."""

from __future__ import annotations

import datetime as dt
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import Conflict, FieldError, InvalidInput
from stockroom.records.audit import record_row


def withdrawal_of(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any] | None:
    """The withdrawal row of a batch, or None while it is not withdrawn."""
    rows = dbmod.query(db, "SELECT * FROM withdrawals WHERE batch_id = ? ORDER BY id LIMIT 1", [batch_id])
    return rows[0] if rows else None


def withdraw_batch(db: sqlite_utils.Database, batch_id: int, withdrawn_on: dt.date, reason: str, actor: str) -> int:
    """Withdraw a batch from use from a date, with the reason; a batch is withdrawn once."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for withdrawing this batch")])
    with dbmod.write(db):
        if withdrawal_of(db, batch_id) is not None:
            raise Conflict("this batch is already withdrawn")
        if dbmod.query(db, "SELECT 1 FROM registrations_in_error WHERE batch_id = ? LIMIT 1", [batch_id]):
            raise Conflict("this batch is marked registered in error: it was never in service, so there is nothing to withdraw")
        return record_row(
            db,
            "withdrawals",
            {
                "batch_id": batch_id,
                "withdrawn_on": withdrawn_on.isoformat(),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="batch.withdraw",
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"withdrawn_on": withdrawn_on.isoformat()},
        )
