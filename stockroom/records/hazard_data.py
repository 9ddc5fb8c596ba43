"""Hazard classifications as an administrator records them (one row per change, newest in force wins)."""

from __future__ import annotations

import datetime as dt
import json
from collections.abc import Mapping
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import FieldError, InvalidInput
from stockroom.hazards import Classification
from stockroom.records.audit import record_row


def classification_from_row(r: Mapping[str, Any]) -> Classification:
    """A hazard_classifications row as a hazards.Classification."""
    return Classification(
        reagent=r["reagent"],
        min_molarity=r["min_molarity"],
        max_molarity=r["max_molarity"],
        signal_word=r["signal_word"],
        pictograms=tuple(json.loads(r["pictograms"])),
        hazard_statements=tuple(json.loads(r["hazard_statements"])),
        precautionary_statements=tuple(json.loads(r["precautionary_statements"])),
        source_note=r["source_note"],
        effective_from=dt.date.fromisoformat(r["effective_from"]),
        id=r["id"],
    )


def classifications(db: sqlite_utils.Database) -> list[Classification]:
    """Every hazard classification row ever recorded, oldest first."""
    return [classification_from_row(r) for r in dbmod.query(db, "SELECT * FROM hazard_classifications ORDER BY id")]


def classification_rows(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """The raw rows (with reason, recorded_at, recorded_by), newest first, for the admin page's history."""
    rows = dbmod.query(db, "SELECT * FROM hazard_classifications ORDER BY id DESC")
    for r in rows:
        for key in ("pictograms", "hazard_statements", "precautionary_statements"):
            r[key] = json.loads(r[key])
    return rows


def record_classification(db: sqlite_utils.Database, c: Classification, reason: str, actor: str) -> int:
    """Append a classification row (already checked with hazards.check) and its audit event; return its id."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for this classification")])
    return record_row(
        db,
        "hazard_classifications",
        {
            "reagent": c.reagent,
            "min_molarity": c.min_molarity,
            "max_molarity": c.max_molarity,
            "signal_word": c.signal_word,
            "pictograms": json.dumps(list(c.pictograms)),
            "hazard_statements": json.dumps(list(c.hazard_statements)),
            "precautionary_statements": json.dumps(list(c.precautionary_statements)),
            "source_note": c.source_note,
            "reason": reason.strip(),
            "effective_from": c.effective_from.isoformat(),
            "recorded_at": dbmod.utc_now(),
            "recorded_by": actor,
        },
        actor=actor,
        action_code="hazard.classify",
        reason=reason.strip(),
        detail={
            "reagent": c.reagent,
            "band": c.band_text,
            "signal_word": c.signal_word,
            "pictograms": list(c.pictograms),
            "H": list(c.hazard_statements),
            "P": list(c.precautionary_statements),
            "effective_from": c.effective_from.isoformat(),
        },
    )
