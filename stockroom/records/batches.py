"""Batches: registration, look-up as the batch now reads, and corrections of descriptive fields."""

from __future__ import annotations

import datetime as dt
import json
import re
from collections import defaultdict
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import FieldError, InvalidInput, NotFound
from stockroom.records.audit import record_row

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


PREPARATION_FIELDS = ("source_form", "measured_amount", "measured_unit", "suggested_amount")


def preparation_of(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any] | None:
    """What was measured when the batch was made up (source form, amount and unit, the calculator's
    suggestion in the same unit), or None for a batch registered without it."""
    rows = dbmod.query(db, "SELECT * FROM batch_preparations WHERE batch_id = ? ORDER BY id LIMIT 1", [batch_id])
    return rows[0] if rows else None


def create_batch(db: sqlite_utils.Database, values: dict[str, Any], actor: str) -> dict[str, Any]:
    """Register a batch (values already validated); return its row with the new code.

    values["preparation"], if given, is what was measured (PREPARATION_FIELDS: source_form "liquid" or
    "solid", measured_amount in measured_unit "mL" or "g", suggested_amount in the same unit or None);
    it is written with the batch, in the same entry.
    """
    preparation = values.get("preparation")
    with dbmod.write(db):
        prepared_on = dt.date.fromisoformat(str(values["prepared_on"]))
        row = {k: values.get(k) for k in BATCH_FIELDS}
        for k in ("concentrate_lot", "water_grade", "container", "notes"):
            row[k] = row[k] or ""
        row["prepared_on"] = prepared_on.isoformat()
        row["code"] = values.get("code") or next_batch_code(db, values["reagent"], prepared_on)
        row["recorded_at"] = dbmod.utc_now()
        row["recorded_by"] = actor

        def write_preparation(batch_id: int) -> None:
            if preparation:
                part = {k: preparation.get(k) for k in PREPARATION_FIELDS}
                dbmod.insert_row(
                    db,
                    "batch_preparations",
                    {"batch_id": batch_id, **part, "recorded_at": row["recorded_at"], "recorded_by": actor},
                )

        detail: dict[str, Any] = {"code": row["code"], "reagent": row["reagent"], "nominal_molarity": row["nominal_molarity"]}
        if preparation and preparation.get("measured_amount") is not None:
            detail["measured"] = f"{preparation['measured_amount']:g} {preparation['measured_unit']}"
        row["id"] = record_row(
            db,
            "batches",
            row,
            actor=actor,
            action_code="batch.register",
            row_is_batch=True,
            detail=detail,
            parts=write_preparation,
        )
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


def with_amendments(rows: list[dict[str, Any]], db: sqlite_utils.Database) -> list[dict[str, Any]]:
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
    return with_amendments(rows, db)[0]


def batch_by_id(db: sqlite_utils.Database, batch_id: int) -> dict[str, Any]:
    """One batch by its row id, as it now reads (corrections applied); NotFound if none."""
    rows = dbmod.query(db, "SELECT * FROM batches WHERE id = ?", [batch_id])
    if not rows:
        raise NotFound(f"no batch with id {batch_id}")
    return with_amendments(rows, db)[0]


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
        return record_row(
            db,
            "amendments",
            {
                "entity": "batches",
                "entity_id": batch_id,
                "field": field,
                "old_value": json.dumps(old_value),
                "new_value": json.dumps(new_value),
                "reason": reason.strip(),
                "recorded_at": dbmod.utc_now(),
                "recorded_by": actor,
            },
            actor=actor,
            action_code="batch.amend",
            batch_id=batch_id,
            reason=reason.strip(),
            detail={"field": field, "before": old_value, "after": new_value},
        )
