"""The hash-chained audit trail, the registry of its actions, and the one insert path for record rows.

Every write appends one entry whose hash covers the entry before it. The actions an entry may carry are
registered here once, each with its code, its label in plain words (the audit page shows it) and the
table whose row it records, if any; append_event refuses an action that is not registered.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from stockroom import db as dbmod

GENESIS_HASH = "0" * 64


@dataclass(frozen=True)
class Action:
    """One kind of audit entry: its code, what it means in plain words, the table whose row it records."""

    code: str
    label: str
    records: str = ""  # the table one of whose rows every entry of this action writes; "" if none
    every_row: bool = False  # every row of `records` must have an entry of this action (unaudited_records)


_ACTIONS = (
    Action("batch.register", "registered a batch", "batches", every_row=True),
    Action("batch.release", "released a batch", "releases", every_row=True),
    Action("batch.withdraw", "withdrew a batch", "withdrawals", every_row=True),
    Action("batch.amend", "corrected a batch detail", "amendments", every_row=True),
    Action("lot.register", "registered a standard lot", "standard_lots", every_row=True),
    # A run is recorded as a certifying run or a re-check: its row has one entry of either.
    Action("run.record.certify", "recorded a standardization", "runs", every_row=True),
    Action("run.record.recheck", "recorded a re-check", "runs", every_row=True),
    Action("run.accept", "accepted a run", "decisions"),
    Action("run.reject", "rejected a run", "decisions"),
    Action("replicate.exclude", "left out a replicate", "exclusions"),
    Action("run.instruments", "named the instruments of a run", "run_instruments"),
    Action("label.print", "printed labels", "label_prints", every_row=True),
    # The starting classifications and policies are written by a migration without an entry.
    Action("hazard.classify", "added a hazard classification", "hazard_classifications"),
    Action("policy.change", "changed a reagent policy", "reagent_policies"),
    Action("classdata.correct", "corrected class data", "class_corrections", every_row=True),
    Action("token.create", "made an API token", "api_tokens", every_row=True),
    Action("token.revoke", "revoked an API token", "api_token_revocations"),
    Action("account.create", "created an account", "users"),
    Action("account.disable", "disabled an account"),
    Action("account.password_change", "changed their password"),
    Action("account.password_reset", "reset a password"),
    Action("account.signin", "signed in"),
    Action("account.signin_failed", "failed to sign in"),
    Action("account.signin_paused", "sign-in paused after failures"),
    Action("account.signout", "signed out"),
    Action("access.refused", "was refused an action"),
    Action("instrument.register", "registered an instrument", "instruments", every_row=True),
    Action("instrument.calibrate", "recorded a calibration", "calibrations", every_row=True),
    Action("recall.open", "opened a recall", "recalls", every_row=True),
    Action("recall.clear", "cleared a recall", "recall_clearances", every_row=True),
)

ACTIONS: Mapping[str, Action] = {a.code: a for a in _ACTIONS}


class UnregisteredAction(ValueError):
    """An audit entry was asked for with an action code the registry does not hold."""


def action(code: str) -> Action:
    """The registered action of a code; UnregisteredAction if there is none."""
    found = ACTIONS.get(code)
    if found is None:
        raise UnregisteredAction(f"audit action {code!r} is not registered in stockroom.records.audit")
    return found


def action_label(code: str) -> str:
    """The plain words of an action code; an unknown code (an old entry, say) reads as it is."""
    found = ACTIONS.get(code)
    return found.label if found else code


def _event_hash(prev_hash: str, row: Mapping[str, Any]) -> str:
    body = json.dumps(
        {k: row[k] for k in ("occurred_at", "actor", "action", "entity", "entity_id", "batch_id", "reason", "detail")},
        sort_keys=True,
        separators=(",", ":"),
    )
    return hashlib.sha256((prev_hash + body).encode("utf-8")).hexdigest()


def append_event(
    db: sqlite_utils.Database,
    actor: str,
    action_code: str,
    *,
    entity: str = "",
    entity_id: int | None = None,
    batch_id: int | None = None,
    reason: str = "",
    detail: Mapping[str, Any] | None = None,
) -> int:
    """Append one audit entry chained to the previous one by SHA-256; call inside a write; return its id."""
    action(action_code)  # refuses an unregistered code before anything is written
    with dbmod.write(db):
        last = db.execute("SELECT hash FROM events ORDER BY id DESC LIMIT 1").fetchone()
        prev_hash = last[0] if last else GENESIS_HASH
        row: dict[str, Any] = {
            "occurred_at": dbmod.utc_now(),
            "actor": actor,
            "action": action_code,
            "entity": entity,
            "entity_id": entity_id,
            "batch_id": batch_id,
            "reason": reason,
            "detail": json.dumps(dict(detail or {}), sort_keys=True, separators=(",", ":"), default=str),
        }
        row["prev_hash"] = prev_hash
        row["hash"] = _event_hash(prev_hash, row)
        return dbmod.insert_row(db, "events", row)


def record_row(
    db: sqlite_utils.Database,
    table: str,
    row: Mapping[str, Any],
    *,
    actor: str,
    action_code: str,
    about: tuple[str, int] | None = None,
    batch_id: int | None = None,
    row_is_batch: bool = False,
    reason: str = "",
    detail: Mapping[str, Any] | None = None,
) -> int:
    """Insert one record row and append its audit entry in the same write; return the row's id.

    The entry is about the new row unless `about` (table, id) names the record it belongs to (an
    exclusion or a decision is entered against its run); `row_is_batch` files the entry under the new
    row's own id as its batch (a batch's registration). The action must be registered as recording
    rows of `table`.
    """
    registered = action(action_code)
    if registered.records != table:
        raise UnregisteredAction(f"audit action {action_code!r} is not registered as recording rows of {table!r}")
    with dbmod.write(db):
        row_id = dbmod.insert_row(db, table, dict(row))
        entity, entity_id = about if about is not None else (table, row_id)
        if row_is_batch:
            batch_id = row_id
        append_event(db, actor, action_code, entity=entity, entity_id=entity_id, batch_id=batch_id, reason=reason, detail=detail)
    return row_id


def unaudited_records(db: sqlite_utils.Database) -> list[tuple[str, int]]:
    """(table, id) of every record row that has no audit entry of its own.

    A record without its entry means the entry (perhaps the newest, which the chain alone cannot miss)
    was removed behind our back.
    """
    checked: dict[str, list[str]] = {}
    for a in _ACTIONS:
        if a.every_row:
            checked.setdefault(a.records, []).append(a.code)
    out: list[tuple[str, int]] = []
    for table, codes in checked.items():
        marks = ",".join("?" * len(codes))
        for row in db.execute(
            f"SELECT t.id FROM {table} t WHERE NOT EXISTS (SELECT 1 FROM events e WHERE e.entity = ? "
            f"AND e.entity_id = t.id AND e.action IN ({marks})) ORDER BY t.id",
            [table, *codes],
        ):
            out.append((table, int(row[0])))
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
