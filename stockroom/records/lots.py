"""Primary-standard lots: registration and look-up."""

from __future__ import annotations

import re
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import NotFound
from stockroom.records.audit import record_row

_CODE_SAFE = re.compile(r"[^A-Z0-9]")

LOT_FIELDS = (
    "substance",
    "supplier",
    "supplier_lot",
    "assay",
    "assay_expanded_u",
    "assay_k",
    "expires_on",
    "dried_on",
    "dried_at_c",
    "storage_note",
    "received_on",
)


def create_lot(db: sqlite_utils.Database, values: dict[str, Any], actor: str) -> dict[str, Any]:
    """Register a primary-standard lot (values already validated); return its row."""
    with dbmod.write(db):
        row = {k: values.get(k) for k in LOT_FIELDS}
        for k in ("supplier", "supplier_lot", "storage_note"):
            row[k] = row[k] or ""
        if not values.get("code"):
            n = db.execute("SELECT count(*) FROM standard_lots").fetchone()[0]
            row["code"] = f"STD-{_CODE_SAFE.sub('', str(values['substance']).upper())[:6]}-{n + 1:03d}"
        else:
            row["code"] = values["code"]
        row["recorded_at"] = dbmod.utc_now()
        row["recorded_by"] = actor
        row["id"] = record_row(
            db,
            "standard_lots",
            row,
            actor=actor,
            action_code="lot.register",
            detail={"code": row["code"], "substance": row["substance"], "assay": row["assay"]},
        )
    return row


def lot_by_id(db: sqlite_utils.Database, lot_id: int) -> dict[str, Any]:
    """One standard lot by its row id; NotFound if none."""
    rows = dbmod.query(db, "SELECT * FROM standard_lots WHERE id = ?", [lot_id])
    if not rows:
        raise NotFound(f"no standard lot with id {lot_id}")
    return rows[0]


def lot_by_code(db: sqlite_utils.Database, code: str) -> dict[str, Any]:
    """One standard lot by its code (e.g. STD-KHP-002, the way people name it); NotFound if none."""
    rows = dbmod.query(db, "SELECT * FROM standard_lots WHERE code = ?", [code])
    if not rows:
        raise NotFound(f"no standard lot {code}")
    return rows[0]


def list_lots(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """Every standard lot, newest first."""
    return dbmod.query(db, "SELECT * FROM standard_lots ORDER BY id DESC")
