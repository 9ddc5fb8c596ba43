"""The lab schedule: lab sessions (date, destination, titrant, volume needed) and their cancellations.

A session is never edited: a wrong one is cancelled with a reason and entered again. Each write is
one row plus its audit entry (record_row); an imported schedule is stored in one write, all or none.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound
from stockroom.records.audit import record_row
from stockroom.schedule_input import SessionInput

MAX_REASON = 500


def _detail(s: SessionInput, source: str) -> dict[str, Any]:
    return {
        "session_on": s.session_on.isoformat(),
        "course": s.course,
        "section": s.section,
        "titrant": s.reagent,
        "nominal_molarity": s.nominal_molarity,
        "volume_needed_l": s.volume_needed_l,
        "source": source,
    }


def add_session(db: sqlite_utils.Database, session: SessionInput, actor: str, *, source: str = "form") -> int:
    """Enter one lab session with its audit entry; return its id. source: "form", "csv" or "api" (kept in the entry)."""
    row = {**session.row(), "recorded_at": dbmod.utc_now(), "recorded_by": actor}
    return record_row(db, "lab_sessions", row, actor=actor, action_code="schedule.add", detail=_detail(session, source))


def add_sessions(db: sqlite_utils.Database, sessions: Sequence[SessionInput], actor: str, *, source: str = "csv") -> list[int]:
    """Enter several sessions in one write (all or none), each with its audit entry; return their ids."""
    with dbmod.write(db):
        return [add_session(db, s, actor, source=source) for s in sessions]


def session_by_id(db: sqlite_utils.Database, session_id: int) -> dict[str, Any]:
    """One session with `cancelled_reason` (None while it stands); NotFound if there is none."""
    rows = dbmod.query(
        db,
        "SELECT s.*, c.reason AS cancelled_reason, c.recorded_by AS cancelled_by, c.recorded_at AS cancelled_at "
        "FROM lab_sessions s LEFT JOIN lab_session_cancellations c ON c.session_id = s.id WHERE s.id = ?",
        [session_id],
    )
    if not rows:
        raise NotFound(f"no lab session number {session_id}")
    return rows[0]


def cancel_session(db: sqlite_utils.Database, session_id: int, reason: str, actor: str) -> int:
    """Cancel a session with the reason; a session is cancelled once. Returns the cancellation's id."""
    text = (reason or "").strip()
    if not text:
        raise InvalidInput([FieldError("reason", "give the reason for cancelling this session")])
    if len(text) > MAX_REASON:
        raise InvalidInput([FieldError("reason", f"must be at most {MAX_REASON} characters")])
    with dbmod.write(db):
        session = session_by_id(db, session_id)
        if session["cancelled_reason"] is not None:
            raise Conflict("this lab session is already cancelled")
        return record_row(
            db,
            "lab_session_cancellations",
            {"session_id": session_id, "reason": text, "recorded_at": dbmod.utc_now(), "recorded_by": actor},
            actor=actor,
            action_code="schedule.cancel",
            reason=text,
            detail={"session_on": session["session_on"], "course": session["course"], "section": session["section"]},
        )


def sessions_between(
    db: sqlite_utils.Database,
    start: dt.date,
    end: dt.date,
    *,
    reagent: str | None = None,
    course: str | None = None,
    include_cancelled: bool = True,
) -> list[dict[str, Any]]:
    """Sessions dated start..end (inclusive), by date then course and section, each with `cancelled_reason`.

    reagent: a catalogue key to keep only its sessions; course: compared without regard to case.
    """
    sql = (
        "SELECT s.*, c.reason AS cancelled_reason, c.recorded_by AS cancelled_by FROM lab_sessions s "
        "LEFT JOIN lab_session_cancellations c ON c.session_id = s.id WHERE s.session_on BETWEEN ? AND ?"
    )
    params: list[Any] = [start.isoformat(), end.isoformat()]
    if reagent:
        sql += " AND s.reagent = ?"
        params.append(reagent)
    if course:
        sql += " AND s.course = ? COLLATE NOCASE"
        params.append(course.strip())
    if not include_cancelled:
        sql += " AND c.id IS NULL"
    sql += " ORDER BY s.session_on, s.course COLLATE NOCASE, s.section COLLATE NOCASE, s.id"
    return dbmod.query(db, sql, params)
