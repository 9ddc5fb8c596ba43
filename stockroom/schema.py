"""Versioned schema migrations. A database is only ever created or upgraded by these, in order.

Data migrations insert literal rows and never call application code: changing a default in the
application later must not change what a new database starts with.

Every record table is append-only: triggers refuse UPDATE and DELETE, so a correction can only be a
new, attributed row (an amendment, a superseding release, a withdrawal) and the history stays whole.
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from sqlite_utils import Migrations

from stockroom import db as dbmod

MIGRATIONS = Migrations("stockroom")

# Tables whose rows may never change once written.
APPEND_ONLY = (
    "reagent_policies",
    "batches",
    "standard_lots",
    "runs",
    "run_results",
    "replicates",
    "exclusions",
    "decisions",
    "releases",
    "withdrawals",
    "label_prints",
    "amendments",
    "events",
)

_V1 = [
    """CREATE TABLE users (
        id INTEGER PRIMARY KEY,
        username TEXT NOT NULL UNIQUE COLLATE NOCASE,
        display_name TEXT NOT NULL,
        role TEXT NOT NULL CHECK (role IN ('staff', 'instructor', 'admin')),
        password_hash TEXT NOT NULL,
        created_at TEXT NOT NULL,
        disabled_at TEXT
    )""",
    # Policy of a titrant reagent; the newest row with effective_from <= a date is the one in force.
    """CREATE TABLE reagent_policies (
        id INTEGER PRIMARY KEY,
        reagent TEXT NOT NULL,
        nominal_molarities TEXT NOT NULL,          -- JSON list of mol/L offered
        shelf_life_days INTEGER NOT NULL CHECK (shelf_life_days > 0),
        recheck_interval_days INTEGER NOT NULL CHECK (recheck_interval_days > 0),
        tolerance_rel REAL NOT NULL CHECK (tolerance_rel > 0),
        max_rsd REAL NOT NULL CHECK (max_rsd > 0),
        min_replicates INTEGER NOT NULL CHECK (min_replicates >= 1),
        effective_from TEXT NOT NULL,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL,
        reason TEXT NOT NULL DEFAULT ''
    )""",
    "CREATE INDEX ix_policy_reagent ON reagent_policies (reagent, effective_from)",
    """CREATE TABLE batches (
        id INTEGER PRIMARY KEY,
        code TEXT NOT NULL UNIQUE,
        reagent TEXT NOT NULL,
        nominal_molarity REAL NOT NULL CHECK (nominal_molarity > 0),
        volume_l REAL NOT NULL CHECK (volume_l > 0),
        prepared_on TEXT NOT NULL,
        prepared_by TEXT NOT NULL,
        concentrate_lot TEXT NOT NULL DEFAULT '',
        concentrate_assay_w_w REAL,                 -- mass fraction, e.g. 0.37
        concentrate_density_g_ml REAL,
        water_grade TEXT NOT NULL DEFAULT '',
        container TEXT NOT NULL DEFAULT '',
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_batches_reagent ON batches (reagent, prepared_on)",
    """CREATE TABLE standard_lots (
        id INTEGER PRIMARY KEY,
        code TEXT NOT NULL UNIQUE,
        substance TEXT NOT NULL,                    -- chemistry catalogue key
        supplier TEXT NOT NULL DEFAULT '',
        supplier_lot TEXT NOT NULL DEFAULT '',
        assay REAL NOT NULL CHECK (assay > 0 AND assay <= 1.0001),   -- mass fraction
        assay_expanded_u REAL NOT NULL CHECK (assay_expanded_u >= 0),
        assay_k REAL NOT NULL CHECK (assay_k > 0),
        expires_on TEXT NOT NULL,
        dried_on TEXT,
        dried_at_c REAL,
        storage_note TEXT NOT NULL DEFAULT '',
        received_on TEXT,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    # One standardization: a certifying run or a re-check, primary (weighed standard lot) or
    # secondary (aliquots against a certified reference batch). The computed figures are a snapshot
    # of what the science core returned when the run was recorded; result_json keeps all of it.
    """CREATE TABLE runs (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        purpose TEXT NOT NULL CHECK (purpose IN ('certify', 'recheck')),
        method TEXT NOT NULL CHECK (method IN ('primary', 'secondary')),
        standard_lot_id INTEGER REFERENCES standard_lots (id),
        reference_batch_id INTEGER REFERENCES batches (id),
        reference_release_id INTEGER REFERENCES releases (id),
        performed_on TEXT NOT NULL,
        analyst TEXT NOT NULL,
        temperature_c REAL,
        burette_capacity_ml REAL,
        endpoint TEXT NOT NULL DEFAULT '',
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL,
        CHECK ((method = 'primary' AND standard_lot_id IS NOT NULL)
            OR (method = 'secondary' AND reference_batch_id IS NOT NULL))
    )""",
    "CREATE INDEX ix_runs_batch ON runs (batch_id, performed_on)",
    # What the science core computed for a run: one row when the run is recorded and one more each
    # time its set of excluded replicates changes. The newest row of a run is its current result.
    """CREATE TABLE run_results (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        cause TEXT NOT NULL,
        molarity REAL NOT NULL,
        u REAL NOT NULL,
        expanded_u REAL NOT NULL,
        k REAL NOT NULL,
        n INTEGER NOT NULL,
        sd REAL,
        rsd REAL,
        accepted_by_rule INTEGER NOT NULL,
        result_json TEXT NOT NULL,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_run_results_run ON run_results (run_id, id)",
    """CREATE TABLE replicates (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        position INTEGER NOT NULL,
        mass_gross_g REAL,
        mass_tare_g REAL,
        mass_g REAL,                               -- weighed mass in air (direct, or gross - tare)
        aliquot_ml REAL,                           -- secondary standardization
        initial_ml REAL,
        final_ml REAL,
        volume_ml REAL NOT NULL,
        blank_ml REAL NOT NULL DEFAULT 0,
        temperature_c REAL,
        molarity REAL,
        UNIQUE (run_id, position)
    )""",
    """CREATE TABLE exclusions (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        position INTEGER NOT NULL,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_exclusions_run ON exclusions (run_id)",
    """CREATE TABLE decisions (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        decision TEXT NOT NULL CHECK (decision IN ('accept', 'reject')),
        reason TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_decisions_run ON decisions (run_id)",
    """CREATE TABLE releases (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        run_id INTEGER NOT NULL REFERENCES runs (id),
        molarity REAL NOT NULL CHECK (molarity > 0),
        u REAL NOT NULL CHECK (u >= 0),
        expanded_u REAL NOT NULL CHECK (expanded_u >= 0),
        k REAL NOT NULL CHECK (k > 0),
        reference_temperature_c REAL NOT NULL DEFAULT 20,
        released_on TEXT NOT NULL,
        expires_on TEXT NOT NULL,
        recheck_interval_days INTEGER NOT NULL,
        tolerance_rel REAL NOT NULL,
        supersedes_id INTEGER REFERENCES releases (id),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_releases_batch ON releases (batch_id, released_on)",
    """CREATE TABLE withdrawals (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        withdrawn_on TEXT NOT NULL,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_withdrawals_batch ON withdrawals (batch_id)",
    """CREATE TABLE label_prints (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        release_id INTEGER REFERENCES releases (id),
        layout TEXT NOT NULL,
        copies INTEGER NOT NULL CHECK (copies > 0),
        serial_first INTEGER NOT NULL,
        serial_last INTEGER NOT NULL,
        value_printed TEXT NOT NULL,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_prints_batch ON label_prints (batch_id)",
    # A correction of one field of an earlier record; the original row stays as it was written.
    """CREATE TABLE amendments (
        id INTEGER PRIMARY KEY,
        entity TEXT NOT NULL,
        entity_id INTEGER NOT NULL,
        field TEXT NOT NULL,
        old_value TEXT,
        new_value TEXT,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_amendments_entity ON amendments (entity, entity_id)",
    # The audit trail: one row per write, each carrying the hash of the one before it.
    """CREATE TABLE events (
        id INTEGER PRIMARY KEY,
        occurred_at TEXT NOT NULL,
        actor TEXT NOT NULL,
        action TEXT NOT NULL,
        entity TEXT NOT NULL DEFAULT '',
        entity_id INTEGER,
        batch_id INTEGER,
        reason TEXT NOT NULL DEFAULT '',
        detail TEXT NOT NULL DEFAULT '{}',
        prev_hash TEXT NOT NULL,
        hash TEXT NOT NULL
    )""",
    "CREATE INDEX ix_events_batch ON events (batch_id)",
]


def _append_only_triggers(tables: tuple[str, ...] = APPEND_ONLY) -> list[str]:
    """Triggers that refuse UPDATE and DELETE on each table: its rows stay as they were written."""
    out = []
    for table in tables:
        for verb in ("UPDATE", "DELETE"):
            out.append(
                f"CREATE TRIGGER {table}_no_{verb.lower()} BEFORE {verb} ON {table} "
                f"BEGIN SELECT RAISE(ABORT, '{table} is append-only: record a correction instead'); END"
            )
    return out


@MIGRATIONS(name="0001_initial")
def _initial(db: sqlite_utils.Database) -> None:
    for statement in _V1 + _append_only_triggers():
        db.execute(statement)


# The starting reagent policies, as literal rows: a later change of policy.DEFAULT_POLICIES never
# changes what a new database starts with (tests/test_db.py compares the two).
_STARTING_POLICIES: tuple[dict[str, Any], ...] = (
    {
        "reagent": "HCl",
        "nominal_molarities": "[0.1, 0.5, 1.0]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "H2SO4",
        "nominal_molarities": "[0.05, 0.1, 0.5, 1.0]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "HNO3",
        "nominal_molarities": "[0.1, 1.0]",
        "shelf_life_days": 180,
        "recheck_interval_days": 60,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "HClO4",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "NaOH",
        "nominal_molarities": "[0.1, 0.5, 1.0]",
        "shelf_life_days": 90,
        "recheck_interval_days": 14,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "KOH",
        "nominal_molarities": "[0.1, 0.5, 1.0]",
        "shelf_life_days": 90,
        "recheck_interval_days": 14,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
)


@MIGRATIONS(name="0002_starting_policies")
def _starting_policies(db: sqlite_utils.Database) -> None:
    now = dbmod.utc_now()
    for row in _STARTING_POLICIES:
        db.table("reagent_policies").insert({**row, "recorded_at": now})


# Accounts: a session generation per user (bumped when the user is disabled or the password changes,
# which ends every session signed with the old value), one row per browser session so sign-out ends
# it on the server, and every sign-in attempt so repeated failures pause further attempts.
_ACCOUNTS = [
    "ALTER TABLE users ADD COLUMN session_generation INTEGER NOT NULL DEFAULT 0",
    """CREATE TABLE web_sessions (
        id INTEGER PRIMARY KEY,
        token_hash TEXT NOT NULL UNIQUE,            -- SHA-256 of the random token kept in the cookie
        user_id INTEGER NOT NULL REFERENCES users (id),
        generation INTEGER NOT NULL,
        started_at TEXT NOT NULL,
        ended_at TEXT
    )""",
    "CREATE INDEX ix_web_sessions_user ON web_sessions (user_id)",
    """CREATE TABLE signin_attempts (
        id INTEGER PRIMARY KEY,
        username TEXT NOT NULL COLLATE NOCASE,      -- as typed, matched like users.username
        occurred_at TEXT NOT NULL,
        succeeded INTEGER NOT NULL CHECK (succeeded IN (0, 1))
    )""",
    "CREATE INDEX ix_signin_attempts_user ON signin_attempts (username, id)",
]


@MIGRATIONS(name="0003_accounts")
def _accounts(db: sqlite_utils.Database) -> None:
    for statement in _ACCOUNTS:
        db.execute(statement)
    # The attempt log is evidence for the lock-out; like the record tables it is append-only.
    for statement in _append_only_triggers(("signin_attempts",)):
        db.execute(statement)


# Hazard classification of titrant solutions per reagent and concentration band, as an administrator
# edits it (stockroom.hazards explains the bands and which row wins). Codes are JSON lists. The
# starting rows are typical values from memory, marked as such in their source note.
_HAZARDS = [
    """CREATE TABLE hazard_classifications (
        id INTEGER PRIMARY KEY,
        reagent TEXT NOT NULL,
        min_molarity REAL NOT NULL CHECK (min_molarity >= 0),          -- mol/L, inclusive
        max_molarity REAL CHECK (max_molarity IS NULL OR max_molarity > min_molarity),  -- exclusive
        signal_word TEXT NOT NULL CHECK (signal_word IN ('Danger', 'Warning', '')),
        pictograms TEXT NOT NULL DEFAULT '[]',                         -- JSON list, e.g. ["GHS05"]
        hazard_statements TEXT NOT NULL DEFAULT '[]',                  -- JSON list, e.g. ["H290", "H314"]
        precautionary_statements TEXT NOT NULL DEFAULT '[]',
        source_note TEXT NOT NULL DEFAULT '',
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        effective_from TEXT NOT NULL,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_hazards_reagent ON hazard_classifications (reagent, effective_from)",
    # Print serials are unique across the database: each print takes a fresh range, one serial per copy.
    "CREATE UNIQUE INDEX ix_prints_serial ON label_prints (serial_first)",
    """CREATE TRIGGER label_prints_serials BEFORE INSERT ON label_prints
       WHEN NEW.serial_first < 1 OR NEW.serial_last - NEW.serial_first + 1 != NEW.copies
         OR EXISTS (SELECT 1 FROM label_prints
                    WHERE serial_first <= NEW.serial_last AND serial_last >= NEW.serial_first)
       BEGIN SELECT RAISE(ABORT, 'label serials must be a fresh range with one serial per copy'); END""",
]


# The starting hazard classifications (typical values from memory, as each source note says), as
# literal rows: editing hazards.DEFAULT_CLASSIFICATIONS later never changes a new database.
_FROM_MEMORY = (
    "Typical values from memory, not from one supplier: verify against the supplier's safety "
    "data sheet and CLP Annex VI before use."
)
_STARTING_HAZARDS: tuple[dict[str, Any], ...] = (
    {
        "reagent": "NaOH",
        "min_molarity": 0.0,
        "max_molarity": 0.125,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY + " Below 0.5 % w/w (about 0.125 mol/L): many suppliers give H290 only.",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "NaOH",
        "min_molarity": 0.125,
        "max_molarity": 0.5,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H315", "H319"]',
        "precautionary_statements": '["P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313"]',
        "source_note": _FROM_MEMORY
        + (
            " CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 0.5 % to under 2 % w/w "
            "(about 0.125 to 0.5 mol/L)."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "NaOH",
        "min_molarity": 0.5,
        "max_molarity": None,
        "signal_word": "Danger",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H314"]',
        "precautionary_statements": '["P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]',
        "source_note": _FROM_MEMORY + " CLP Annex VI: Skin Corr. 1B from 2 % w/w (about 0.5 mol/L), 1A from 5 %.",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "KOH",
        "min_molarity": 0.0,
        "max_molarity": 0.085,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY + " Below 0.5 % w/w (about 0.09 mol/L): H290 only.",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "KOH",
        "min_molarity": 0.085,
        "max_molarity": 0.36,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H315", "H319"]',
        "precautionary_statements": '["P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313"]',
        "source_note": _FROM_MEMORY
        + (
            " CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 0.5 % to under 2 % w/w "
            "(about 0.09 to 0.36 mol/L)."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "KOH",
        "min_molarity": 0.36,
        "max_molarity": 3.0,
        "signal_word": "Danger",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H314"]',
        "precautionary_statements": '["P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]',
        "source_note": _FROM_MEMORY
        + (
            " CLP Annex VI: Skin Corr. 1B from 2 % w/w (about 0.36 mol/L). Above about 3 mol/L acute "
            "oral toxicity (H302) may apply: not entered, so no label prints there until an "
            "administrator adds it."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HCl",
        "min_molarity": 0.0,
        "max_molarity": 2.85,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY
        + (
            " Below 10 % w/w (about 2.9 mol/L) no Annex VI health class; 0.1-1 mol/L solutions usually "
            "H290 only, though some suppliers add H315/H319/H335 at 1 mol/L."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HCl",
        "min_molarity": 2.85,
        "max_molarity": 7.7,
        "signal_word": "Warning",
        "pictograms": '["GHS05", "GHS07"]',
        "hazard_statements": '["H290", "H315", "H319", "H335"]',
        "precautionary_statements": '["P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313", "P261"]',
        "source_note": _FROM_MEMORY
        + (" CLP Annex VI: Skin Irrit. 2, Eye Irrit. 2, STOT SE 3 from 10 % to under 25 % w/w (about 2.9 to 7.7 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HCl",
        "min_molarity": 7.7,
        "max_molarity": None,
        "signal_word": "Danger",
        "pictograms": '["GHS05", "GHS07"]',
        "hazard_statements": '["H290", "H314", "H335"]',
        "precautionary_statements": '["P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310", "P261"]',
        "source_note": _FROM_MEMORY
        + (
            " CLP Annex VI: Skin Corr. 1B from 25 % w/w (about 7.7 mol/L); STOT SE 3 from 10 %. "
            "Concentrated acid about 37 % (12 mol/L)."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "H2SO4",
        "min_molarity": 0.0,
        "max_molarity": 0.5,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY + " Below 5 % w/w (about 0.5 mol/L) no Annex VI health class; H290 only.",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "H2SO4",
        "min_molarity": 0.5,
        "max_molarity": 1.65,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H315", "H319"]',
        "precautionary_statements": '["P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313"]',
        "source_note": _FROM_MEMORY
        + (" CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 5 % to under 15 % w/w (about 0.5 to 1.7 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "H2SO4",
        "min_molarity": 1.65,
        "max_molarity": None,
        "signal_word": "Danger",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H314"]',
        "precautionary_statements": '["P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]',
        "source_note": _FROM_MEMORY + " CLP Annex VI: Skin Corr. 1A from 15 % w/w (about 1.7 mol/L).",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HNO3",
        "min_molarity": 0.0,
        "max_molarity": 0.8,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY + " Below 5 % w/w (about 0.8 mol/L): H290 only.",
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HNO3",
        "min_molarity": 0.8,
        "max_molarity": 10.0,
        "signal_word": "Danger",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H314"]',
        "precautionary_statements": '["P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]',
        "source_note": _FROM_MEMORY
        + (
            " CLP Annex VI: Skin Corr. 1B from 5 % w/w (about 0.8 mol/L), 1A from 20 %. Stops at 10 "
            "mol/L: concentrated nitric acid is also an oxidiser (H272, flame over circle) and toxic by"
            " inhalation; enter that band from its SDS before labelling it."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
)


@MIGRATIONS(name="0005_hazards")
def _hazards(db: sqlite_utils.Database) -> None:
    now = dbmod.utc_now()
    for statement in _HAZARDS:
        db.execute(statement)
    for statement in _append_only_triggers(("hazard_classifications",)):
        db.execute(statement)
    for row in _STARTING_HAZARDS:
        db.table("hazard_classifications").insert({**row, "recorded_at": now})


# Class-data corrections: each time an instructor recomputes a class's titration results with the
# molarity in force on a lab day. One row per correction, with the release it used (so a recall of a
# release finds every correction made with it), the molarity applied, and a copy and hash of the rows.
_CLASS_CORRECTIONS = [
    """CREATE TABLE class_corrections (
        id INTEGER PRIMARY KEY,
        lab_day TEXT NOT NULL,                      -- ISO date of the lab day
        titrant TEXT NOT NULL,                      -- chemistry catalogue key
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        release_id INTEGER NOT NULL REFERENCES releases (id),
        certified_molarity REAL NOT NULL CHECK (certified_molarity > 0),   -- mol/L at 20 °C
        bench_temperature_c REAL,                   -- °C; NULL when the certified value was used as is
        molarity_used REAL NOT NULL CHECK (molarity_used > 0),             -- mol/L applied to the rows
        nominal_molarity REAL NOT NULL CHECK (nominal_molarity > 0),       -- mol/L on the bottle
        row_count INTEGER NOT NULL CHECK (row_count > 0),
        upload_name TEXT NOT NULL DEFAULT '',
        upload_sha256 TEXT NOT NULL,                -- of the uploaded file's bytes
        rows_csv TEXT NOT NULL,                     -- the rows as read (stockroom.labday.rows_to_csv)
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_class_corrections_release ON class_corrections (release_id)",
    "CREATE INDEX ix_class_corrections_day ON class_corrections (lab_day, titrant)",
]


@MIGRATIONS(name="0004_class_corrections")
def _class_corrections(db: sqlite_utils.Database) -> None:
    for statement in _CLASS_CORRECTIONS:
        db.execute(statement)
    for statement in _append_only_triggers(("class_corrections",)):
        db.execute(statement)


# Per-user API tokens for programs that write through the JSON API. Only a SHA-256 of the token is
# kept; revoking is a new row, so the history of who could write, and until when, stays whole.
_API_TOKENS = [
    """CREATE TABLE api_tokens (
        id INTEGER PRIMARY KEY,
        user_id INTEGER NOT NULL REFERENCES users (id),
        label TEXT NOT NULL CHECK (length(trim(label)) > 0),
        token_sha256 TEXT NOT NULL UNIQUE,
        shown_prefix TEXT NOT NULL,
        created_at TEXT NOT NULL
    )""",
    "CREATE INDEX ix_api_tokens_user ON api_tokens (user_id)",
    # `stockroom verify` and the audit page look entries up by what they are about.
    "CREATE INDEX ix_events_entity ON events (entity, entity_id)",
    "CREATE INDEX ix_events_actor ON events (actor, id)",
    """CREATE TABLE api_token_revocations (
        id INTEGER PRIMARY KEY,
        token_id INTEGER NOT NULL UNIQUE REFERENCES api_tokens (id),
        revoked_at TEXT NOT NULL,
        revoked_by TEXT NOT NULL
    )""",
]


@MIGRATIONS(name="0007_api_tokens")
def _api_tokens(db: sqlite_utils.Database) -> None:
    for statement in _API_TOKENS:
        db.execute(statement)
    for statement in _append_only_triggers(("api_tokens", "api_token_revocations")):
        db.execute(statement)


# Instruments and recalls. The register of balances, burettes and pipettes with their calibrations (a
# recalibration is one more row: the history stays); which instruments each run used, with the
# calibration in force that day; and recalls: a lot, an instrument or a batch marked suspect from a
# date, with the reason, and the clearances that end a recall for one batch or for all of them.
_INSTRUMENTS_RECALLS = [
    """CREATE TABLE instruments (
        id INTEGER PRIMARY KEY,
        code TEXT NOT NULL UNIQUE COLLATE NOCASE,        -- the lab's own ID on the instrument, e.g. BAL-02
        kind TEXT NOT NULL CHECK (kind IN ('balance', 'burette', 'pipette')),
        description TEXT NOT NULL DEFAULT '',             -- make, model, serial number
        capacity REAL NOT NULL CHECK (capacity > 0),      -- g for a balance, mL for glassware
        accuracy_class TEXT NOT NULL DEFAULT '',          -- 'A' or 'B' for glassware; as marked for a balance
        tolerance REAL CHECK (tolerance IS NULL OR tolerance > 0),          -- ± half-width, mL (glassware) or g
        readability REAL CHECK (readability IS NULL OR readability > 0),    -- g (balance), mL (scale division)
        linearity_g REAL CHECK (linearity_g IS NULL OR linearity_g >= 0),   -- ± half-width, balances only
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL,
        CHECK (kind != 'balance' OR (readability IS NOT NULL AND linearity_g IS NOT NULL)),
        CHECK (kind = 'balance' OR tolerance IS NOT NULL)
    )""",
    """CREATE TABLE calibrations (
        id INTEGER PRIMARY KEY,
        instrument_id INTEGER NOT NULL REFERENCES instruments (id),
        calibrated_on TEXT NOT NULL,
        next_due_on TEXT NOT NULL,
        outcome TEXT NOT NULL CHECK (outcome IN ('pass', 'fail')),
        certificate_ref TEXT NOT NULL CHECK (length(trim(certificate_ref)) > 0),
        calibrated_by TEXT NOT NULL DEFAULT '',           -- the lab or service that calibrated it
        tolerance REAL CHECK (tolerance IS NULL OR tolerance > 0),          -- as the certificate states; NULL
        linearity_g REAL CHECK (linearity_g IS NULL OR linearity_g >= 0),   -- keeps the register's figure
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL,
        CHECK (next_due_on > calibrated_on)
    )""",
    "CREATE INDEX ix_calibrations_instrument ON calibrations (instrument_id, calibrated_on)",
    """CREATE TABLE run_instruments (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        instrument_id INTEGER NOT NULL REFERENCES instruments (id),
        role TEXT NOT NULL CHECK (role IN ('balance', 'burette', 'pipette')),
        calibration_id INTEGER REFERENCES calibrations (id),   -- in force on the run's date; NULL: none was
        UNIQUE (run_id, role)
    )""",
    "CREATE INDEX ix_run_instruments_instrument ON run_instruments (instrument_id)",
    """CREATE TABLE recalls (
        id INTEGER PRIMARY KEY,
        subject_kind TEXT NOT NULL CHECK (subject_kind IN ('lot', 'instrument', 'batch')),
        subject_id INTEGER NOT NULL,                      -- standard_lots, instruments or batches id
        suspect_from TEXT NOT NULL,                       -- ISO date from which the subject is suspect
        opened_on TEXT NOT NULL,                          -- lab date the recall was recorded
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    """CREATE TABLE recall_clearances (
        id INTEGER PRIMARY KEY,
        recall_id INTEGER NOT NULL REFERENCES recalls (id),
        batch_id INTEGER REFERENCES batches (id),         -- NULL: the whole recall is cleared
        cleared_on TEXT NOT NULL,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_recall_clearances_recall ON recall_clearances (recall_id)",
]


@MIGRATIONS(name="0006_instruments_recalls")
def _instruments_recalls(db: sqlite_utils.Database) -> None:
    for statement in _INSTRUMENTS_RECALLS:
        db.execute(statement)
    for statement in _append_only_triggers(("instruments", "calibrations", "run_instruments", "recalls", "recall_clearances")):
        db.execute(statement)


# Every table that has the append-only triggers, in the order the migrations made them: those that
# existed when 0008 gave each its no-replace trigger, then the tables later migrations made.
APPEND_ONLY_TABLES_AT_0008: tuple[str, ...] = APPEND_ONLY + (
    "signin_attempts",
    "class_corrections",
    "hazard_classifications",
    "instruments",
    "calibrations",
    "run_instruments",
    "recalls",
    "recall_clearances",
    "api_tokens",
    "api_token_revocations",
    "trail_keying",
)


def _no_replace_triggers(tables: tuple[str, ...]) -> list[str]:
    """Triggers that refuse an insert reusing an existing id (INSERT OR REPLACE), recursive triggers on or off."""
    return [
        f"CREATE TRIGGER {table}_no_replace BEFORE INSERT ON {table} "
        f"WHEN EXISTS (SELECT 1 FROM {table} WHERE id = NEW.id) "
        f"BEGIN SELECT RAISE(ABORT, '{table} is append-only: a row cannot be replaced'); END"
        for table in tables
    ]


def expected_triggers() -> dict[str, str]:
    """Name -> CREATE TRIGGER text of every trigger the migrations make (the audit verifier compares them)."""
    out: dict[str, str] = {}
    for statement in _append_only_triggers(APPEND_ONLY_TABLES) + _no_replace_triggers(APPEND_ONLY_TABLES):
        out[statement.split()[2]] = statement
    return out


# The keyed audit trail. Each entry now names the record rows it wrote, with a hash of their content
# (events.records, JSON), and entries from trail_keying.first_keyed_entry on carry an HMAC-SHA-256
# under a key kept outside the database file (stockroom.records.audit). The entries before it keep
# the plain SHA-256 chain they were made with. The one row is literal SQL: no application code.
_KEYED_TRAIL = [
    "ALTER TABLE events ADD COLUMN records TEXT NOT NULL DEFAULT '[]'",
    """CREATE TABLE trail_keying (
        id INTEGER PRIMARY KEY,
        first_keyed_entry INTEGER NOT NULL,          -- events.id of the first keyed entry
        recorded_at TEXT NOT NULL
    )""",
    "INSERT INTO trail_keying (first_keyed_entry, recorded_at) "
    "SELECT coalesce(max(id), 0) + 1, strftime('%Y-%m-%dT%H:%M:%S+00:00', 'now') FROM events",
]


@MIGRATIONS(name="0008_keyed_trail")
def _keyed_trail(db: sqlite_utils.Database) -> None:
    for statement in _KEYED_TRAIL:
        db.execute(statement)
    for statement in _append_only_triggers(("trail_keying",)) + _no_replace_triggers(APPEND_ONLY_TABLES_AT_0008):
        db.execute(statement)


# Sign-in throttling state (stockroom.accounts.throttle_until): failures per key since its last success.
# Operational, not a record: rows are updated and deleted; the attempts themselves stay in signin_attempts.
@MIGRATIONS(name="0009_signin_throttle")
def _signin_throttle(db: sqlite_utils.Database) -> None:
    db.execute(
        """CREATE TABLE signin_throttle (
        id INTEGER PRIMARY KEY,
        key TEXT NOT NULL UNIQUE,                   -- address:<ip>, account:<username>, device:<id>
        failures INTEGER NOT NULL,
        last_failure TEXT NOT NULL
    )"""
    )


@MIGRATIONS(name="0010_form_submissions")
def _form_submissions(db: sqlite_utils.Database) -> None:
    # Operational, not a record (no audit entry, no append-only trigger): which one-time form ids
    # were used, by whom, and the page showing what each made (stockroom.web.once).
    db.execute(
        """CREATE TABLE form_submissions (
        id INTEGER PRIMARY KEY,
        form_id TEXT NOT NULL UNIQUE,
        username TEXT,
        location TEXT NOT NULL,
        submitted_at TEXT NOT NULL
    )"""
    )


# Titrants beyond acids and bases (issue 18): their starting policies and hazard classifications, as
# literal rows (policy.DEFAULT_POLICIES and hazards.OTHER_CLASSIFICATIONS when frozen; each source note
# says where the figures come from).
_CLASS_POLICIES: tuple[dict[str, Any], ...] = (
    {
        "reagent": "KMnO4",
        "nominal_molarities": "[0.02]",
        "shelf_life_days": 180,
        "recheck_interval_days": 14,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "Na2S2O3",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 90,
        "recheck_interval_days": 14,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "I2",
        "nominal_molarities": "[0.05]",
        "shelf_life_days": 90,
        "recheck_interval_days": 14,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "Ce(SO4)2",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "FAS",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 30,
        "recheck_interval_days": 7,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "K2Cr2O7",
        "nominal_molarities": "[0.0167, 0.02]",
        "shelf_life_days": 365,
        "recheck_interval_days": 180,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "AgNO3",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 180,
        "recheck_interval_days": 60,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "NH4SCN",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 180,
        "recheck_interval_days": 60,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "EDTA",
        "nominal_molarities": "[0.05, 0.1]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "ZnSO4",
        "nominal_molarities": "[0.05, 0.1]",
        "shelf_life_days": 365,
        "recheck_interval_days": 90,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
    {
        "reagent": "HClO4-AcOH",
        "nominal_molarities": "[0.1]",
        "shelf_life_days": 180,
        "recheck_interval_days": 30,
        "tolerance_rel": 0.005,
        "max_rsd": 0.002,
        "min_replicates": 3,
        "effective_from": "2000-01-01",
        "recorded_by": "system",
        "reason": "starting policy",
    },
)
_CLASS_HAZARDS: tuple[dict[str, Any], ...] = (
    {
        "reagent": "KMnO4",
        "min_molarity": 0.0,
        "max_molarity": 0.016,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY
        + (" Not classified at this strength by the CLP generic limits (from memory). Below 0.25 % w/w (about 0.016 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "KMnO4",
        "min_molarity": 0.016,
        "max_molarity": 0.15,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": '["H412"]',
        "precautionary_statements": '["P273", "P501"]',
        "source_note": _FROM_MEMORY
        + (
            " KMnO4 is Aquatic Chronic 1 (CLP Annex VI): Chronic 3 from 0.25 % w/w (about 0.016 mol/L) to 2.5 % "
            "(about 0.16 mol/L); the solid is also an oxidizer (H272)."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "Na2S2O3",
        "min_molarity": 0.0,
        "max_molarity": 1.0,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY + (" Not classified at this strength by the CLP generic limits (from memory)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "I2",
        "min_molarity": 0.0,
        "max_molarity": 0.039,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY
        + (" Not classified at this strength by the CLP generic limits (from memory). Below 1 % w/w iodine (about 0.039 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "I2",
        "min_molarity": 0.039,
        "max_molarity": 0.3,
        "signal_word": "Warning",
        "pictograms": '["GHS08"]',
        "hazard_statements": '["H373"]',
        "precautionary_statements": '["P260", "P501"]',
        "source_note": _FROM_MEMORY
        + (" Iodine is STOT RE 1 (thyroid): H373 from 1 % w/w (about 0.039 mol/L); iodine vapour irritates."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "Ce(SO4)2",
        "min_molarity": 0.0,
        "max_molarity": 0.2,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290", "H315", "H319"]',
        "precautionary_statements": '["P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313"]',
        "source_note": _FROM_MEMORY + (" From the sulfuric acid medium (about 0.5 mol/L H2SO4)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "FAS",
        "min_molarity": 0.0,
        "max_molarity": 0.5,
        "signal_word": "Warning",
        "pictograms": '["GHS05"]',
        "hazard_statements": '["H290"]',
        "precautionary_statements": '["P234", "P390"]',
        "source_note": _FROM_MEMORY + (" From the dilute sulfuric acid medium; the iron salt itself is not classified."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "K2Cr2O7",
        "min_molarity": 0.0,
        "max_molarity": 0.1,
        "signal_word": "Danger",
        "pictograms": '["GHS08"]',
        "hazard_statements": '["H340", "H350", "H360", "H412"]',
        "precautionary_statements": '["P201", "P280", "P273", "P501"]',
        "source_note": _FROM_MEMORY
        + (
            " Potassium dichromate is Muta. 1B, Carc. 1B, Repr. 1B (CLP Annex VI): H340/H350 from 0.1 % w/w and "
            "H360 from 0.3 %, so even 0.0167 mol/L (0.49 %) carries them; also a skin and respiratory sensitizer "
            "at higher strengths. Dispose of as chromium(VI) waste."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "AgNO3",
        "min_molarity": 0.0,
        "max_molarity": 0.059,
        "signal_word": "Warning",
        "pictograms": '["GHS09"]',
        "hazard_statements": '["H410"]',
        "precautionary_statements": '["P273", "P501"]',
        "source_note": _FROM_MEMORY
        + (" Silver nitrate is Aquatic Acute 1 and Chronic 1 with high M-factors: even dilute solutions are H410."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "AgNO3",
        "min_molarity": 0.059,
        "max_molarity": 0.3,
        "signal_word": "Warning",
        "pictograms": '["GHS07", "GHS09"]',
        "hazard_statements": '["H315", "H319", "H410"]',
        "precautionary_statements": '["P264", "P273", "P280", "P302+P352", "P305+P351+P338", "P501"]',
        "source_note": _FROM_MEMORY
        + (
            " Silver nitrate is also Skin Corr. 1B: Skin Irrit. 2 and Eye Irrit. 2 from 1 % w/w (about 0.059 "
            "mol/L); Aquatic Acute 1 and Chronic 1 with high M-factors (H410)."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "NH4SCN",
        "min_molarity": 0.0,
        "max_molarity": 0.5,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY + (" Not classified at this strength by the CLP generic limits (from memory)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "EDTA",
        "min_molarity": 0.0,
        "max_molarity": 0.027,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY
        + (" Not classified at this strength by the CLP generic limits (from memory). Below 1 % w/w (about 0.027 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "EDTA",
        "min_molarity": 0.027,
        "max_molarity": 0.3,
        "signal_word": "Warning",
        "pictograms": '["GHS08"]',
        "hazard_statements": '["H373"]',
        "precautionary_statements": '["P260", "P501"]',
        "source_note": _FROM_MEMORY + (" Disodium edetate is STOT RE 2 (CLP Annex VI): H373 from 1 % w/w (about 0.027 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "ZnSO4",
        "min_molarity": 0.0,
        "max_molarity": 0.0155,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": "[]",
        "precautionary_statements": "[]",
        "source_note": _FROM_MEMORY
        + (" Not classified at this strength by the CLP generic limits (from memory). Below 0.25 % w/w (about 0.016 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "ZnSO4",
        "min_molarity": 0.0155,
        "max_molarity": 0.062,
        "signal_word": "",
        "pictograms": "[]",
        "hazard_statements": '["H412"]',
        "precautionary_statements": '["P273", "P501"]',
        "source_note": _FROM_MEMORY
        + (" Zinc sulfate is Aquatic Chronic 1: Chronic 3 from 0.25 % w/w; eye irritation (H319) from 1 % (about 0.062 mol/L)."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "ZnSO4",
        "min_molarity": 0.062,
        "max_molarity": 0.15,
        "signal_word": "Warning",
        "pictograms": '["GHS07"]',
        "hazard_statements": '["H319", "H412"]',
        "precautionary_statements": '["P264", "P273", "P280", "P305+P351+P338", "P337+P313", "P501"]',
        "source_note": _FROM_MEMORY
        + (" Zinc sulfate is Eye Dam. 1: Eye Irrit. 2 from 1 % w/w (about 0.062 mol/L); Aquatic Chronic 3."),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
    {
        "reagent": "HClO4-AcOH",
        "min_molarity": 0.0,
        "max_molarity": 0.25,
        "signal_word": "Danger",
        "pictograms": '["GHS02", "GHS05"]',
        "hazard_statements": '["H226", "H314"]',
        "precautionary_statements": '["P210", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]',
        "source_note": _FROM_MEMORY
        + (
            " Glacial acetic acid is Flam. Liq. 3 (flash point about 39 °C) and Skin Corr. 1A from 90 %; "
            "perchloric acid at 0.1 mol/L adds little, but never let the solution evaporate to dryness."
        ),
        "reason": "starting classification",
        "effective_from": "2000-01-01",
        "recorded_by": "system",
    },
)


@MIGRATIONS(name="0013_titrant_classes")
def _titrant_classes(db: sqlite_utils.Database) -> None:
    # The temperature of the solution titrated (°C), for pairs titrated hot (permanganate and oxalate).
    db.execute("ALTER TABLE runs ADD COLUMN titration_temperature_c REAL")
    now = dbmod.utc_now()
    for row in _CLASS_POLICIES:
        db.table("reagent_policies").insert({**row, "recorded_at": now})
    for row in _CLASS_HAZARDS:
        db.table("hazard_classifications").insert({**row, "recorded_at": now})


# A batch registered by mistake (a double entry, the wrong reagent): marked so, with the reason, as a
# new row. Distinct from a withdrawal (a batch that was in service and is taken out of use): status
# "registered in error" is derived from it (stockroom.policy.status_on), and such a batch is never
# standardized, released or offered for a lab day. One row per batch at most.
@MIGRATIONS(name="0011_registered_in_error")
def _registered_in_error(db: sqlite_utils.Database) -> None:
    db.execute(
        """CREATE TABLE registrations_in_error (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL UNIQUE REFERENCES batches (id),
        marked_on TEXT NOT NULL,                    -- the lab's date it was marked (YYYY-MM-DD)
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )"""
    )
    for statement in _append_only_triggers(("registrations_in_error",)) + _no_replace_triggers(("registrations_in_error",)):
        db.execute(statement)


# What was actually measured when a batch was made up: the concentrate's volume (mL) or the pellets'
# mass (g), beside what the preparation calculator suggested for the same fields. One row per batch,
# written with the batch's registration (its entry names it); append-only like the batch itself.
_BATCH_PREPARATIONS = """CREATE TABLE batch_preparations (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL UNIQUE REFERENCES batches (id),
        source_form TEXT NOT NULL CHECK (source_form IN ('liquid', 'solid')),
        measured_amount REAL CHECK (measured_amount IS NULL OR measured_amount > 0),
        measured_unit TEXT NOT NULL CHECK (measured_unit IN ('mL', 'g')),
        suggested_amount REAL CHECK (suggested_amount IS NULL OR suggested_amount > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )"""


@MIGRATIONS(name="0017_ux")
def _batch_preparations(db: sqlite_utils.Database) -> None:
    db.execute(_BATCH_PREPARATIONS)
    for statement in _append_only_triggers(("batch_preparations",)) + _no_replace_triggers(("batch_preparations",)):
        db.execute(statement)


# Lists that cost what they show, however long the history. The batch register reads its pages in
# date order from an index, and filters on a batch's coarse status (awaiting, live, expired, withdrawn)
# through a per-batch summary of its release and withdrawal dates. The summary is derived, not a record:
# triggers keep it current as each batch, release and withdrawal is inserted (in the same transaction),
# the backfill below computes it from the records, and readmodel.status_summary_problems recomputes it
# to prove it equal (tests/test_scale.py). The audit trail's filters get indexes of their own.
_SCALE_INDEXES = [
    "CREATE INDEX ix_batches_prepared ON batches (prepared_on, id)",
    "CREATE INDEX ix_events_action ON events (action, id)",
    "CREATE INDEX ix_events_occurred ON events (occurred_at)",
    # A recall follows what rests on its item: the runs made with a lot, or against a reference release.
    "CREATE INDEX ix_runs_lot ON runs (standard_lot_id)",
    "CREATE INDEX ix_runs_reference ON runs (reference_release_id)",
    "CREATE INDEX ix_releases_run ON releases (run_id)",
    """CREATE TABLE batch_status_summary (
        batch_id INTEGER PRIMARY KEY REFERENCES batches (id),
        first_released_on TEXT,                     -- the earliest release date (NULL: none yet)
        last_released_on TEXT,                      -- the newest release by (released_on, id)
        last_expires_on TEXT,                       -- that release's expiry
        withdrawn_on TEXT,                          -- the earliest withdrawal date (NULL: none)
        in_error_on TEXT                            -- the date it was marked registered in error (NULL: not)
    )""",
    "CREATE TRIGGER batch_status_summary_batch AFTER INSERT ON batches "
    "BEGIN INSERT INTO batch_status_summary (batch_id) VALUES (NEW.id); END",
    # SET expressions all read the row as it was before the update.
    "CREATE TRIGGER batch_status_summary_release AFTER INSERT ON releases BEGIN "
    "UPDATE batch_status_summary SET "
    "first_released_on = min(coalesce(first_released_on, NEW.released_on), NEW.released_on), "
    "last_expires_on = CASE WHEN last_released_on IS NULL OR NEW.released_on >= last_released_on "
    "THEN NEW.expires_on ELSE last_expires_on END, "
    "last_released_on = CASE WHEN last_released_on IS NULL OR NEW.released_on >= last_released_on "
    "THEN NEW.released_on ELSE last_released_on END "
    "WHERE batch_id = NEW.batch_id; END",
    "CREATE TRIGGER batch_status_summary_withdrawal AFTER INSERT ON withdrawals BEGIN "
    "UPDATE batch_status_summary SET withdrawn_on = min(coalesce(withdrawn_on, NEW.withdrawn_on), NEW.withdrawn_on) "
    "WHERE batch_id = NEW.batch_id; END",
    "CREATE TRIGGER batch_status_summary_in_error AFTER INSERT ON registrations_in_error BEGIN "
    "UPDATE batch_status_summary SET in_error_on = NEW.marked_on WHERE batch_id = NEW.batch_id; END",
    "INSERT INTO batch_status_summary "
    "(batch_id, first_released_on, last_released_on, last_expires_on, withdrawn_on, in_error_on) "
    "SELECT b.id, "
    "(SELECT min(r.released_on) FROM releases r WHERE r.batch_id = b.id), "
    "(SELECT r.released_on FROM releases r WHERE r.batch_id = b.id ORDER BY r.released_on DESC, r.id DESC LIMIT 1), "
    "(SELECT r.expires_on FROM releases r WHERE r.batch_id = b.id ORDER BY r.released_on DESC, r.id DESC LIMIT 1), "
    "(SELECT min(w.withdrawn_on) FROM withdrawals w WHERE w.batch_id = b.id), "
    "(SELECT e.marked_on FROM registrations_in_error e WHERE e.batch_id = b.id) "
    "FROM batches b",
]


@MIGRATIONS(name="0015_scale_indexes")
def _scale_indexes(db: sqlite_utils.Database) -> None:
    for statement in _SCALE_INDEXES:
        db.execute(statement)


# Where a released batch's solution goes. A dispensing fills one container (a bench bottle, a burette
# reservoir, a smaller carboy) from a batch: the container row is the dispensing, with its readable code,
# the volume put in it (L), its fill date, its expiry (never later than the batch's release in force on the
# fill date; a container shelf life in the reagent policy may shorten it) and where it went (room, course,
# section). Losses and disposals of the batch's own remaining volume (spills, evaporation, the rest poured
# away) are rows with a reason; a container taken out of use early is marked so once, with the reason.
# All append-only. The volume remaining of a batch is its registered volume less its containers and losses.
_TRACKING = [
    """CREATE TABLE containers (
        id INTEGER PRIMARY KEY,
        code TEXT NOT NULL UNIQUE,                  -- readable, e.g. NAOH-2611-02-C03
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        kind TEXT NOT NULL CHECK (kind IN ('bench bottle', 'burette reservoir', 'carboy')),
        volume_l REAL NOT NULL CHECK (volume_l > 0),  -- volume dispensed into it, L
        filled_on TEXT NOT NULL,                    -- the lab's date (YYYY-MM-DD)
        expires_on TEXT NOT NULL,                   -- no later than the batch's expiry in force on filled_on
        room TEXT NOT NULL DEFAULT '',
        course TEXT NOT NULL DEFAULT '',
        section TEXT NOT NULL DEFAULT '',
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_containers_batch ON containers (batch_id, filled_on)",
    "CREATE INDEX ix_containers_destination ON containers (course COLLATE NOCASE, section COLLATE NOCASE, filled_on)",
    """CREATE TABLE batch_volume_losses (
        id INTEGER PRIMARY KEY,
        batch_id INTEGER NOT NULL REFERENCES batches (id),
        kind TEXT NOT NULL CHECK (kind IN ('loss', 'disposal')),
        volume_l REAL NOT NULL CHECK (volume_l > 0),
        occurred_on TEXT NOT NULL,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_volume_losses_batch ON batch_volume_losses (batch_id, occurred_on)",
    """CREATE TABLE container_disposals (
        id INTEGER PRIMARY KEY,
        container_id INTEGER NOT NULL UNIQUE REFERENCES containers (id),
        disposed_on TEXT NOT NULL,
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    # The lab schedule: a lab session on a date for a course and section, in a room, needing a volume of
    # one titrant (reagent and nominal mol/L). Entered or imported; a session called off is marked so once.
    """CREATE TABLE lab_sessions (
        id INTEGER PRIMARY KEY,
        session_on TEXT NOT NULL,                   -- the lab's date (YYYY-MM-DD)
        course TEXT NOT NULL CHECK (length(trim(course)) > 0),
        section TEXT NOT NULL DEFAULT '',
        room TEXT NOT NULL DEFAULT '',
        reagent TEXT NOT NULL,
        nominal_molarity REAL NOT NULL CHECK (nominal_molarity > 0),
        volume_needed_l REAL NOT NULL CHECK (volume_needed_l > 0),
        notes TEXT NOT NULL DEFAULT '',
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    "CREATE INDEX ix_lab_sessions_on ON lab_sessions (session_on, id)",
    "CREATE INDEX ix_lab_sessions_titrant ON lab_sessions (reagent, nominal_molarity, session_on)",
    """CREATE TABLE lab_session_cancellations (
        id INTEGER PRIMARY KEY,
        session_id INTEGER NOT NULL UNIQUE REFERENCES lab_sessions (id),
        reason TEXT NOT NULL CHECK (length(trim(reason)) > 0),
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL
    )""",
    # Days a container filled from a batch may be used, counted from its fill date (NULL: the batch's own).
    "ALTER TABLE reagent_policies ADD COLUMN container_shelf_life_days INTEGER "
    "CHECK (container_shelf_life_days IS NULL OR container_shelf_life_days > 0)",
]
_TRACKING_TABLES = (
    "containers",
    "batch_volume_losses",
    "container_disposals",
    "lab_sessions",
    "lab_session_cancellations",
)


@MIGRATIONS(name="0012_tracking")
def _tracking(db: sqlite_utils.Database) -> None:
    for statement in _TRACKING + _append_only_triggers(_TRACKING_TABLES) + _no_replace_triggers(_TRACKING_TABLES):
        db.execute(statement)


APPEND_ONLY_TABLES: tuple[str, ...] = APPEND_ONLY_TABLES_AT_0008 + ("registrations_in_error", "batch_preparations")
APPEND_ONLY_TABLES = APPEND_ONLY_TABLES + _TRACKING_TABLES
# A replicate's titration curve and the end point located on it. One row per replicate with its points
# as JSON rather than one row per point: the curve is one measurement, read and located whole (its end
# point rests on every point together), never queried point by point; one row keeps the run's entry
# naming one part per curve, and at most 500 points is under 20 KB. Written with the run, in the same
# transaction and before its entry, like the replicates; append-only like them.
_REPLICATE_CURVES = """CREATE TABLE replicate_curves (
        id INTEGER PRIMARY KEY,
        run_id INTEGER NOT NULL REFERENCES runs (id),
        position INTEGER NOT NULL,                  -- the replicate's position in its run (1-based)
        reading TEXT NOT NULL CHECK (reading IN ('ph', 'mv')),
        method TEXT NOT NULL CHECK (method IN ('derivative', 'second-derivative', 'gran')),
        points_json TEXT NOT NULL,                  -- [[volume added, mL; reading, pH or mV], ...] as recorded
        point_count INTEGER NOT NULL CHECK (point_count >= 5 AND point_count <= 500),
        volume_ml REAL NOT NULL CHECK (volume_ml > 0),  -- the located end point, mL added
        u_ml REAL NOT NULL CHECK (u_ml >= 0),       -- its standard uncertainty, mL
        u_step_ml REAL,                             -- the contributions (stockroom.endpoints.EndPoint)
        u_noise_ml REAL,
        u_fit_ml REAL,
        recorded_at TEXT NOT NULL,
        recorded_by TEXT NOT NULL,
        UNIQUE (run_id, position)
    )"""


@MIGRATIONS(name="0014_replicate_curves")
def _replicate_curves(db: sqlite_utils.Database) -> None:
    db.execute(_REPLICATE_CURVES)
    for statement in _append_only_triggers(("replicate_curves",)) + _no_replace_triggers(("replicate_curves",)):
        db.execute(statement)


APPEND_ONLY_TABLES = APPEND_ONLY_TABLES + ("replicate_curves",)

# The register's text search: a trigram full-text index of each batch's code, preparer and notes as the
# batch now reads (its corrections applied), so that a search costs what it finds instead of a read of
# every batch. Like batch_status_summary it is derived, not a record: triggers keep it in the same
# transaction as the batch or the correction, the backfill below builds it from the records, and
# readmodel.search_index_problems recomputes it to prove it equal. Only the literal statements below
# ever write it; it carries no append-only guard (a correction must update it), and the audit trail
# names no row of it. SQLite keeps the index in shadow tables named batch_search_*.
SEARCH_INDEX_TABLES = ("batch_search",)
_SEARCH_INDEX = [
    "CREATE VIRTUAL TABLE batch_search USING fts5(code, prepared_by, notes, tokenize = 'trigram')",
    "CREATE TRIGGER batch_search_batch AFTER INSERT ON batches BEGIN "
    "INSERT INTO batch_search (rowid, code, prepared_by, notes) VALUES (NEW.id, NEW.code, NEW.prepared_by, NEW.notes); END",
    # A correction's new value is JSON (records.batches.amend_batch); the index holds it decoded.
    "CREATE TRIGGER batch_search_amendment AFTER INSERT ON amendments "
    "WHEN NEW.entity = 'batches' AND NEW.field IN ('prepared_by', 'notes') BEGIN "
    "UPDATE batch_search SET "
    "prepared_by = CASE WHEN NEW.field = 'prepared_by' THEN json_extract(NEW.new_value, '$') ELSE prepared_by END, "
    "notes = CASE WHEN NEW.field = 'notes' THEN json_extract(NEW.new_value, '$') ELSE notes END "
    "WHERE rowid = NEW.entity_id; END",
    "INSERT INTO batch_search (rowid, code, prepared_by, notes) "
    "SELECT b.id, b.code, "
    "CASE WHEN EXISTS (SELECT 1 FROM amendments a WHERE a.entity = 'batches' AND a.entity_id = b.id "
    " AND a.field = 'prepared_by') THEN (SELECT json_extract(a.new_value, '$') FROM amendments a "
    " WHERE a.entity = 'batches' AND a.entity_id = b.id AND a.field = 'prepared_by' ORDER BY a.id DESC LIMIT 1) "
    "ELSE b.prepared_by END, "
    "CASE WHEN EXISTS (SELECT 1 FROM amendments a WHERE a.entity = 'batches' AND a.entity_id = b.id "
    " AND a.field = 'notes') THEN (SELECT json_extract(a.new_value, '$') FROM amendments a "
    " WHERE a.entity = 'batches' AND a.entity_id = b.id AND a.field = 'notes' ORDER BY a.id DESC LIMIT 1) "
    "ELSE b.notes END "
    "FROM batches b",
]


@MIGRATIONS(name="0016_search_index")
def _search_index(db: sqlite_utils.Database) -> None:
    for statement in _SEARCH_INDEX:
        db.execute(statement)


SCHEMA_VERSION = len(MIGRATIONS._migrations)


def schema_version(db: sqlite_utils.Database) -> int:
    """Number of stockroom migrations applied to this database."""
    if not db["_sqlite_migrations"].exists():
        return 0
    row = db.execute("SELECT count(*) FROM _sqlite_migrations WHERE migration_set = ?", [MIGRATIONS.name]).fetchone()
    return int(row[0])


def migrate(db: sqlite_utils.Database) -> int:
    """Apply pending migrations under the write lock; return the schema version reached."""
    with dbmod.write_lock():
        version = schema_version(db)
        if version > SCHEMA_VERSION:
            raise RuntimeError(
                f"database schema version {version} is newer than this stockroom ({SCHEMA_VERSION}); "
                "upgrade stockroom before opening it"
            )
        if version < SCHEMA_VERSION:
            MIGRATIONS.apply(db)
    return schema_version(db)
