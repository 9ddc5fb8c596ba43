"""The keyed audit trail, the registry of its actions, and the one insert path for record rows.

API NOTE (agreed with the anchors work; change it only with a note here):
    chain_head(db) -> (entry_id, mac) | None
    verify(db, *, anchors=(), key_file=None) -> Report   (Report.ok, .problems, .checked, .notes)
    head_log_anchors(db) -> list[(entry_id, mac)]       (the head log beside the key, read back)
    key_file_for(db) / head_log_for(db) -> Path | None; use_key_file(database, key_file) for TRAIL_KEY_FILE
    (create_app calls it; the README settings table needs a TRAIL_KEY_FILE row for tests/test_docs.py).
    A copy of the database verifies only with its key: a backup must carry or name the key file.

Every write appends one entry whose MAC covers the entry before it and the content of the record rows
it wrote or changed: the entry names each row (table, id) with a SHA-256 of its canonical content
(canonical JSON of the whole row). From trail_keying.first_keyed_entry on, the MAC is an HMAC-SHA-256
under a key kept outside the database file (`<database>.trail-key` beside it, 0600, or TRAIL_KEY_FILE);
entries made before keying keep their plain SHA-256 and are checked that way. After each committed
write the newest entry's id and MAC are appended to a head log beside the key, so a removed or
rewritten tail shows against it (verify's anchors).

The actions an entry may carry are registered here once, each with its code, its label in plain words
(the audit page shows it) and the table whose row it records, if any; append_event refuses an action
that is not registered.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import hmac
import json
import os
import secrets
import threading
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import schema

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
    Action("batch.registered_in_error", "marked a batch registered in error", "registrations_in_error", every_row=True),
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
    Action("container.fill", "filled a container from a batch", "containers", every_row=True),
    Action("batch.volume_loss", "recorded a loss or disposal of batch volume", "batch_volume_losses", every_row=True),
    Action("container.dispose", "took a container out of use", "container_disposals", every_row=True),
    Action("schedule.add", "entered a lab session", "lab_sessions", every_row=True),
    Action("schedule.cancel", "cancelled a lab session", "lab_session_cancellations", every_row=True),
    # The first keyed entry of a database names every record row already there (the starting data a
    # migration wrote, or a whole history made before keying), so each row has an entry that names it.
    Action("trail.begin", "began the keyed audit trail"),
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


# ---------------------------------------------------------------- which tables are records
# The record tables: every append-only table (the trail itself and trail_keying aside) and the mutable
# tables people rely on: users (role, disabled, password) and API tokens with their revocations.
# Decisions are append-only already. Not records: web_sessions and signin_attempts (sign-in sessions and
# counters; they change or grow with every sign-in and prove nothing about the prep room's work).
RECORD_TABLES: tuple[str, ...] = tuple(
    t for t in schema.APPEND_ONLY_TABLES if t not in {"events", "signin_attempts", "trail_keying"}
) + ("users",)

# How a person reads a row of each record table.
_NOUNS: Mapping[str, str] = {
    "reagent_policies": "reagent policy",
    "batches": "batch",
    "standard_lots": "standard lot",
    "runs": "run",
    "run_results": "computed result",
    "replicates": "replicate",
    "exclusions": "left-out replicate",
    "decisions": "decision",
    "releases": "release",
    "withdrawals": "withdrawal",
    "registrations_in_error": "registration in error",
    "label_prints": "label print",
    "amendments": "correction",
    "class_corrections": "class-data correction",
    "hazard_classifications": "hazard classification",
    "instruments": "instrument",
    "calibrations": "calibration",
    "run_instruments": "instrument use",
    "recalls": "recall",
    "recall_clearances": "recall clearance",
    "api_tokens": "API token",
    "api_token_revocations": "API token revocation",
    "users": "user account",
    "batch_preparations": "amount measured for a batch",
    "containers": "container filled from a batch",
    "batch_volume_losses": "loss or disposal of batch volume",
    "container_disposals": "container taken out of use",
    "lab_sessions": "lab session",
    "lab_session_cancellations": "lab session cancellation",
    # Not records, named only when one of their append-only guards is reported.
    "events": "audit entry",
    "signin_attempts": "sign-in attempt",
    "trail_keying": "trail keying",
}


class TrailKeyMissing(RuntimeError):
    """The database has keyed entries but the trail key file is not there: writing would break the chain."""


# ---------------------------------------------------------------- canonical content
def _canonical_value(value: Any) -> Any:
    if isinstance(value, float):
        return "f:" + format(value, ".17g")  # fixed repr: the same bits always give the same text
    if isinstance(value, bytes):
        return "b:" + value.hex()
    return value


def _canonical(row: Mapping[str, Any]) -> str:
    return json.dumps({k: _canonical_value(v) for k, v in row.items()}, sort_keys=True, separators=(",", ":"), ensure_ascii=True)


def content_hash(row: Mapping[str, Any]) -> str:
    """SHA-256 (hex) of a row's canonical JSON: every column, sorted keys, floats as 17 significant digits."""
    return hashlib.sha256(_canonical(row).encode("utf-8")).hexdigest()


def _field_hints(row: Mapping[str, Any]) -> str:
    # 4 hex digits per column (sorted by name): not for integrity (the row hash is), only so verify can
    # say which field changed.
    return "".join(hashlib.sha256(json.dumps(_canonical_value(row[k])).encode("utf-8")).hexdigest()[:4] for k in sorted(row))


# ---------------------------------------------------------------- the key and the head log
_KEY_FILES: dict[str, Path] = {}  # database file -> key file chosen by the TRAIL_KEY_FILE setting
_KEYS: dict[str, bytes] = {}
_MEMORY_KEY = secrets.token_bytes(32)  # an in-memory database lives only as long as the process


def use_key_file(database: str | Path, key_file: str | Path | None) -> None:
    """Keep the trail key of `database` in `key_file` (the TRAIL_KEY_FILE setting); None: beside the database."""
    name = str(Path(database).resolve())
    if key_file:
        _KEY_FILES[name] = Path(key_file)
    else:
        _KEY_FILES.pop(name, None)


def key_file_for(db: sqlite_utils.Database) -> Path | None:
    """Where the trail key of this database is kept; None for an in-memory database."""
    name = dbmod.database_file(db)
    if not name:
        return None
    chosen = _KEY_FILES.get(str(Path(name).resolve())) or os.environ.get("STOCKROOM_TRAIL_KEY_FILE")
    return Path(chosen) if chosen else Path(name + ".trail-key")


def head_log_for(db: sqlite_utils.Database) -> Path | None:
    """The head log of this database (beside its key); None for an in-memory database."""
    key = key_file_for(db)
    name = dbmod.database_file(db)
    if key is None or not name:
        return None
    return key.parent / (Path(name).name + ".trail-head")


def _read_key(path: Path) -> bytes | None:
    cached = _KEYS.get(str(path))
    if cached is not None:
        return cached
    try:
        key = path.read_bytes()
    except FileNotFoundError:
        return None
    if len(key) < 32:
        raise TrailKeyMissing(f"the trail key file {path} is damaged (shorter than 32 bytes)")
    _KEYS[str(path)] = key
    return key


def _key_for_reading(db: sqlite_utils.Database, key_file: str | Path | None = None) -> bytes | None:
    if key_file is not None:
        return _read_key(Path(key_file))
    path = key_file_for(db)
    return _MEMORY_KEY if path is None else _read_key(path)


def _key_for_writing(db: sqlite_utils.Database, first_keyed: int) -> bytes:
    path = key_file_for(db)
    if path is None:
        return _MEMORY_KEY
    key = _read_key(path)
    if key is not None:
        return key
    keyed = db.execute("SELECT count(*) FROM events WHERE id >= ?", [first_keyed]).fetchone()[0]
    if keyed:
        raise TrailKeyMissing(
            f"the audit trail is keyed but its key file {path} is missing: put it back (or set TRAIL_KEY_FILE) "
            "before recording anything"
        )
    path.parent.mkdir(parents=True, exist_ok=True)
    # Written whole to a temporary file, then linked into place: a process killed half-way leaves no
    # short key behind, and two processes racing keep the first key (link refuses an existing name).
    tmp = path.with_name(f"{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        with os.fdopen(fd, "wb") as out:
            out.write(secrets.token_bytes(32))
            out.flush()
            os.fsync(out.fileno())
        try:
            os.link(tmp, path)
        except FileExistsError:
            pass
    finally:
        tmp.unlink(missing_ok=True)
    key = _read_key(path)
    if key is None:
        raise TrailKeyMissing(f"could not create the trail key file {path}")
    return key


def _first_keyed(db: sqlite_utils.Database) -> int | None:
    if not db["trail_keying"].exists():
        return None
    row = db.execute("SELECT first_keyed_entry FROM trail_keying ORDER BY id LIMIT 1").fetchone()
    return int(row[0]) if row else None


def head_log_anchors(db: sqlite_utils.Database) -> list[tuple[int, str]]:
    """(entry id, MAC) of every line of the head log, oldest first; [] if there is none."""
    path = head_log_for(db)
    if path is None or not path.exists():
        return []
    out = []
    for line in path.read_text(encoding="utf-8").splitlines():
        parts = line.split()
        if len(parts) >= 2 and parts[0].isdigit():
            out.append((int(parts[0]), parts[1]))
    return out


# ---------------------------------------------------------------- entries
_LEGACY_FIELDS = ("occurred_at", "actor", "action", "entity", "entity_id", "batch_id", "reason", "detail")


def _event_hash(prev_hash: str, row: Mapping[str, Any]) -> str:
    """The plain SHA-256 of an entry made before keying."""
    body = json.dumps({k: row[k] for k in _LEGACY_FIELDS}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256((prev_hash + body).encode("utf-8")).hexdigest()


def _event_mac(key: bytes, prev_hash: str, row: Mapping[str, Any], first_keyed: int) -> str:
    """HMAC-SHA-256 of a keyed entry: its id, fields, the rows it names, the previous MAC, where keying began."""
    body = json.dumps(
        {**{k: row[k] for k in _LEGACY_FIELDS}, "id": row["id"], "records": row["records"], "keyed_from": first_keyed},
        sort_keys=True,
        separators=(",", ":"),
    )
    return hmac.new(key, (prev_hash + body).encode("utf-8"), hashlib.sha256).hexdigest()


def _named_rows(db: sqlite_utils.Database, pairs: Iterable[tuple[str, int]]) -> list[list[Any]]:
    out: list[list[Any]] = []
    seen: set[tuple[str, int]] = set()
    for table, row_id in pairs:
        if table not in RECORD_TABLES or (table, row_id) in seen:
            continue
        seen.add((table, row_id))
        found = db.execute(f"SELECT * FROM [{table}] WHERE id = ?", [row_id]).fetchone()
        if found is not None:
            row = dict(found)
            out.append([table, row_id, content_hash(row), _field_hints(row)])
    return out


def _all_record_rows(db: sqlite_utils.Database) -> list[tuple[str, int]]:
    out: list[tuple[str, int]] = []
    for table in RECORD_TABLES:
        out.extend((table, int(r[0])) for r in db.execute(f"SELECT id FROM [{table}] ORDER BY id"))
    return out


def _insert_entry(db: sqlite_utils.Database, row: dict[str, Any], first_keyed: int | None) -> int:
    last = db.execute("SELECT id, hash FROM events ORDER BY id DESC LIMIT 1").fetchone()
    prev_hash = last[1] if last else GENESIS_HASH
    row["id"] = (int(last[0]) if last else 0) + 1
    row["prev_hash"] = prev_hash
    if first_keyed is not None and row["id"] >= first_keyed:
        row["hash"] = _event_mac(_key_for_writing(db, first_keyed), prev_hash, row, first_keyed)
    else:
        row["hash"] = _event_hash(prev_hash, row)
    entry_id = dbmod.insert_row(db, "events", row)
    dbmod.take_written_rows(db)  # the entry row itself
    _note_head(db, entry_id, row["hash"])
    return entry_id


def _note_head(db: sqlite_utils.Database, entry_id: int, mac: str) -> None:
    # One head-log line per committed write: the newest entry it made. The hooks live only as long as
    # the write (db.write drops them on rollback).
    for hook in dbmod.after_commit(db):
        pending = getattr(hook, "trail_head", None)
        if pending is not None:
            pending["id"], pending["mac"] = entry_id, mac
            return
    head: dict[str, Any] = {"id": entry_id, "mac": mac}

    def write_head() -> None:
        path, newest = head_log_for(db), chain_head(db)
        if path is None or newest is None:
            return
        # Read back at commit (under the write lock): a savepoint rolled back inside the write leaves
        # the noted entry behind, the committed head is the truth.
        with path.open("a", encoding="utf-8") as log:
            log.write(f"{newest[0]} {newest[1]} {dbmod.utc_now()}\n")

    def check_parts() -> None:
        left = [(t, i) for t, i in dbmod.take_written_rows(db) if t in RECORD_TABLES]
        if left:
            raise RuntimeError(f"record rows written after their audit entry, so no entry names them: {left}")

    write_head.trail_head = head  # type: ignore[attr-defined]
    dbmod.before_commit(db).append(check_parts)
    dbmod.after_commit(db).append(write_head)


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
    rows: Iterable[tuple[str, int]] = (),
) -> int:
    """Append one audit entry to the keyed chain; call inside a write; return its id.

    The entry names, with their content hash, the record rows `rows` (table, id), every record row
    dbmod.insert_row appended in this write since the last entry, and the record it is about (entity,
    entity_id) when that is a record row: a row changed in place (a user's role) gets its new hash.
    """
    action(action_code)  # refuses an unregistered code before anything is written
    with dbmod.write(db):
        first_keyed = _first_keyed(db)
        if first_keyed is not None:
            newest = db.execute("SELECT coalesce(max(id), 0) FROM events").fetchone()[0]
            if newest + 1 == first_keyed:
                begin = {
                    "occurred_at": dbmod.utc_now(),
                    "actor": "system",
                    "action": "trail.begin",
                    "entity": "",
                    "entity_id": None,
                    "batch_id": None,
                    "reason": "",
                    "detail": "{}",
                    "records": json.dumps(_named_rows(db, _all_record_rows(db)), separators=(",", ":")),
                }
                _insert_entry(db, begin, first_keyed)
        pairs = list(rows) + dbmod.take_written_rows(db)
        if entity and entity_id is not None:
            pairs.append((entity, int(entity_id)))
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
        if first_keyed is not None:
            row["records"] = json.dumps(_named_rows(db, pairs), separators=(",", ":"))
        return _insert_entry(db, row, first_keyed)


def chain_head(db: sqlite_utils.Database) -> tuple[int, str] | None:
    """(id, MAC) of the newest audit entry, or None if the trail is empty."""
    row = db.execute("SELECT id, hash FROM events ORDER BY id DESC LIMIT 1").fetchone()
    return (int(row[0]), str(row[1])) if row else None


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
    parts: Callable[[int], None] | None = None,
) -> int:
    """Insert one record row and append its audit entry in the same write; return the row's id.

    The entry is about the new row unless `about` (table, id) names the record it belongs to (an
    exclusion or a decision is entered against its run); `row_is_batch` files the entry under the new
    row's own id as its batch (a batch's registration). `parts(row_id)`, if given, writes the row's
    parts (a run's replicates) before the entry, so the entry names them too. The action must be
    registered as recording rows of `table`.
    """
    registered = action(action_code)
    if registered.records != table:
        raise UnregisteredAction(f"audit action {action_code!r} is not registered as recording rows of {table!r}")
    with dbmod.write(db):
        row_id = dbmod.insert_row(db, table, dict(row))
        if parts is not None:
            parts(row_id)
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


def verify_chain(db: sqlite_utils.Database, after: tuple[int, str] | None = None) -> int | None:
    """Recompute the audit chain (plain SHA-256 before keying, HMAC after); id of the first broken entry, or None.

    Without the key the keyed entries are checked for their links only; verify() says so. after: (id,
    hash) of an entry already checked, to check only that entry and the ones after it (it must still
    carry that hash and its own content must still match it; otherwise its id is the answer).
    """
    first_keyed = _first_keyed(db)
    key = _key_for_reading(db)
    prev = GENESIS_HASH
    expected_id = None
    sql, params = "SELECT * FROM events ORDER BY id", []
    if after is not None:
        row = db.execute("SELECT prev_hash, hash FROM events WHERE id = ?", [after[0]]).fetchone()
        if row is None or row[1] != after[1]:
            return after[0]
        # Its MAC covers the link it carries: an edit of that entry or of its link shows at once.
        prev, expected_id = str(row[0]), after[0]
        sql, params = "SELECT * FROM events WHERE id >= ? ORDER BY id", [after[0]]
    for row in db.execute(sql, params):
        r = dict(row)
        if expected_id is not None and r["id"] != expected_id:
            return expected_id  # a row was deleted
        if r["prev_hash"] != prev:
            return int(r["id"])
        if first_keyed is None or r["id"] < first_keyed:
            if _event_hash(prev, r) != r["hash"]:
                return int(r["id"])
        elif key is not None and not hmac.compare_digest(_event_mac(key, prev, r, first_keyed), r["hash"]):
            return int(r["id"])
        prev = r["hash"]
        expected_id = r["id"] + 1
    return None


# ---------------------------------------------------------------- verification
@dataclass(frozen=True)
class Problem:
    """One thing verify found wrong: which record or entry (in words) and what is wrong with it."""

    what: str
    wrong: str

    def __str__(self) -> str:
        return f"{self.what}: {self.wrong}"


@dataclass(frozen=True)
class Report:
    """What verify checked (kind in words, count) and every problem it found; notes say how it checked."""

    checked: tuple[tuple[str, int], ...]
    problems: tuple[Problem, ...]
    notes: tuple[str, ...] = ()
    key_missing: bool = False  # the keyed part of the chain could not be checked

    @property
    def ok(self) -> bool:
        """True when nothing is wrong and every part could be checked."""
        return not self.problems and not self.key_missing


class _Namer:
    """Names record rows the way a person reads them: 'release 3 of HCL-2606-01'."""

    def __init__(self, db: sqlite_utils.Database) -> None:
        self.db = db
        self.batch_codes = {int(r[0]): str(r[1]) for r in db.execute("SELECT id, code FROM batches")}
        self.run_batch = {int(r[0]): int(r[1]) for r in db.execute("SELECT id, batch_id FROM runs")}
        self.usernames = {int(r[0]): str(r[1]) for r in db.execute("SELECT id, username FROM users")}
        # A release is named by its number within its batch (release 2 of HCL-2606-01), never its row id.
        self.release_numbers: dict[int, int] = {}
        seen: dict[int, int] = {}
        for rid, bid in db.execute("SELECT id, batch_id FROM releases ORDER BY id"):
            seen[int(bid)] = seen.get(int(bid), 0) + 1
            self.release_numbers[int(rid)] = seen[int(bid)]

    def _of_batch(self, batch_id: Any) -> str:
        code = self.batch_codes.get(int(batch_id)) if batch_id is not None else None
        return f" of {code}" if code else (f" of batch {batch_id}" if batch_id is not None else "")

    def name(self, table: str, row_id: int, row: Mapping[str, Any] | None) -> str:
        noun = _NOUNS.get(table, table.replace("_", " "))
        row = row or {}
        if table == "batches" and row.get("code"):
            return f"batch {row['code']}"
        if table == "users" and row.get("username"):
            return f"user account {row['username']!r}"
        if table == "users" and row_id in self.usernames:
            return f"user account {self.usernames[row_id]!r}"
        if table in {"standard_lots", "instruments"} and row.get("code"):
            return f"{noun} {row['code']}"
        if table == "replicates" and "run_id" in row:
            return (
                f"replicate {row.get('position')} of run {row['run_id']}{self._of_batch(self.run_batch.get(int(row['run_id'])))}"
            )
        if table == "releases" and row_id in self.release_numbers and "batch_id" in row:
            return f"release {self.release_numbers[row_id]}{self._of_batch(row['batch_id'])}"
        if "batch_id" in row:
            return f"{noun} {row_id}{self._of_batch(row['batch_id'])}"
        if "run_id" in row:
            return f"{noun} {row_id} of run {row['run_id']}{self._of_batch(self.run_batch.get(int(row['run_id'])))}"
        if table == "api_token_revocations" and "token_id" in row:
            return f"revocation of API token {row['token_id']}"
        return f"{noun} {row_id}"


# The audit page checks the hash chain on its first page. Checking it whole costs a moment per ten
# thousand entries, so this process remembers the newest entry it found whole and, between full checks
# (at most every FULL_CHECK_SECONDS), checks only the entries added since: the page says when the whole
# chain was last checked. `stockroom verify` checks every entry and every record's content from the file.
FULL_CHECK_SECONDS = 600
_CHECKED: dict[str, tuple[int, str, float, dt.datetime]] = {}  # file -> (entry id, its hash, monotonic s, UTC time)
_CHECKED_LOCK = threading.Lock()


def verify_chain_since_last_check(db: sqlite_utils.Database) -> tuple[int | None, dt.datetime | None]:
    """(the first broken entry or None, when (UTC) the whole chain was last checked, or None when it was now)."""
    name = dbmod.database_file(db)
    now = time.monotonic()
    with _CHECKED_LOCK:
        seen = _CHECKED.get(name)
    full = seen is None or now - seen[2] > FULL_CHECK_SECONDS
    # Read the newest entry first: whatever is appended meanwhile is checked next time.
    newest = db.execute("SELECT id, hash FROM events ORDER BY id DESC LIMIT 1").fetchone()
    broken = verify_chain(db, None if full or seen is None else (seen[0], seen[1]))
    with _CHECKED_LOCK:
        if broken is not None or newest is None:
            _CHECKED.pop(name, None)
            return broken, None
        if full:
            _CHECKED[name] = (int(newest[0]), str(newest[1]), now, dt.datetime.now(dt.UTC))
            return None, None
        assert seen is not None
        _CHECKED[name] = (int(newest[0]), str(newest[1]), seen[2], seen[3])
        return None, seen[3]


def _changed_fields(row: Mapping[str, Any], hints: str) -> list[str]:
    now = _field_hints(row)
    names = sorted(row)
    if len(now) != len(hints):
        return []
    return [names[i // 4] for i in range(0, len(now), 4) if now[i : i + 4] != hints[i : i + 4]]


def _check_schema(db: sqlite_utils.Database) -> tuple[int, list[Problem]]:
    present = {str(r[0]): str(r[1]) for r in db.execute("SELECT name, sql FROM sqlite_master WHERE type = 'trigger'")}
    problems = []
    expected = schema.expected_triggers()
    for name, sql in expected.items():
        table = name.rsplit("_no_", 1)[0]
        what = f"the append-only guard {name} on {_NOUNS.get(table, table.replace('_', ' '))} rows"
        if name not in present:
            problems.append(Problem(what, "is missing (dropped behind the program's back)"))
        elif present[name] != sql:
            problems.append(Problem(what, "differs from the one stockroom makes"))
    return len(expected), problems


def verify(db: sqlite_utils.Database, *, anchors: Iterable[tuple[int, str]] = (), key_file: str | Path | None = None) -> Report:
    """Check the audit trail whole: schema guards, the chain, every record's content, and outside anchors.

    anchors: (entry id, MAC) pairs kept outside the database (head log, certificates, backup
    manifests); each must match the entry with that id. key_file: the trail key (default key_file_for).
    """
    problems: list[Problem] = []
    notes: list[str] = []
    n_triggers, schema_problems = _check_schema(db)
    problems.extend(schema_problems)
    namer = _Namer(db)
    first_keyed = _first_keyed(db)
    key = _key_for_reading(db, key_file)
    key_missing = False
    entries = db.execute("SELECT * FROM events ORDER BY id").fetchall()
    if first_keyed is not None and key is None and any(r["id"] >= first_keyed for r in entries):
        key_missing = True
        where = key_file or key_file_for(db)
        notes.append(f"cannot check the keyed audit chain: its key file {where} is not there")
    newest_naming: dict[tuple[str, int], tuple[int, str, str]] = {}
    macs: dict[int, str] = {}
    prev, expected_id, legacy = GENESIS_HASH, None, 0
    broken_at: int | None = None
    for r in entries:
        entry_id = int(r["id"])
        macs[entry_id] = str(r["hash"])
        named = json.loads(r["records"]) if "records" in r.keys() and r["records"] else []
        for table, row_id, digest, hints in named:
            newest_naming[(table, int(row_id))] = (entry_id, digest, hints)
        if broken_at is not None:
            continue
        about = _entry_words(r, named, namer)
        if expected_id is not None and entry_id != expected_id:
            problems.append(Problem(f"audit entries {expected_id} to {entry_id - 1}", "are missing (deleted)"))
        if r["prev_hash"] != prev:
            problems.append(Problem(f"audit entry {entry_id} ({about})", "does not follow the entry before it"))
            broken_at = entry_id
        elif first_keyed is None or entry_id < first_keyed:
            legacy += 1
            if _event_hash(prev, dict(r)) != r["hash"]:
                problems.append(Problem(f"audit entry {entry_id} ({about})", "was changed after it was written"))
                broken_at = entry_id
        elif key is not None and not hmac.compare_digest(_event_mac(key, prev, dict(r), first_keyed), str(r["hash"])):
            problems.append(
                Problem(
                    f"audit entry {entry_id} ({about})",
                    "its keyed MAC does not match: the entry or the chain from it was rewritten",
                )
            )
            broken_at = entry_id
        prev = str(r["hash"])
        expected_id = entry_id + 1
    if legacy:
        notes.append(f"entries 1 to {legacy} were made before keying: checked by their plain SHA-256 chain")
    # Content: every record row against the newest entry that names it.
    n_rows = 0
    seen: set[tuple[str, int]] = set()
    for table in RECORD_TABLES:
        for found in db.execute(f"SELECT * FROM [{table}]"):
            row = dict(found)
            row_id = int(row["id"])
            n_rows += 1
            seen.add((table, row_id))
            entry = newest_naming.get((table, row_id))
            if entry is None:
                if first_keyed is not None:
                    problems.append(
                        Problem(namer.name(table, row_id, row), "no audit entry names it (written behind the program's back)")
                    )
                continue
            if content_hash(row) != entry[1]:
                fields = _changed_fields(row, entry[2])
                what = ", ".join(fields) + (" changed" if len(fields) == 1 else " changed") if fields else "content changed"
                problems.append(Problem(namer.name(table, row_id, row), f"{what} since audit entry {entry[0]}"))
    for (table, row_id), entry in newest_naming.items():
        if (table, row_id) not in seen:
            problems.append(Problem(namer.name(table, row_id, None), f"is gone (audit entry {entry[0]} recorded it)"))
    # Anchors from outside the database.
    anchors = list(anchors)
    newest_id = int(entries[-1]["id"]) if entries else 0
    for anchor_id, anchor_mac in anchors:
        if anchor_id > newest_id:
            problems.append(
                Problem(
                    f"audit entry {anchor_id}",
                    f"is recorded outside the database but the trail ends at entry {newest_id}: its tail was removed",
                )
            )
        elif macs.get(anchor_id) is None:
            problems.append(Problem(f"audit entry {anchor_id}", "is recorded outside the database but is missing from it"))
        elif macs[anchor_id] != anchor_mac:
            problems.append(
                Problem(
                    f"audit entry {anchor_id}", "differs from its copy recorded outside the database: the trail was rewritten"
                )
            )
    checked = (
        ("append-only guards", n_triggers),
        ("audit entries", len(entries)),
        ("record rows", n_rows),
        ("outside anchors", len(anchors)),
    )
    return Report(checked, tuple(problems), tuple(notes), key_missing)


def _entry_words(r: Any, named: list[Any], namer: _Namer) -> str:
    words = action_label(str(r["action"]))
    if named and len(named) <= 3:
        words += ": " + ", ".join(namer.name(t, int(i), _row_or_none(namer.db, t, int(i))) for t, i, *_ in named)
    elif r["entity"] in RECORD_TABLES and r["entity_id"] is not None:
        words += ": " + namer.name(
            str(r["entity"]), int(r["entity_id"]), _row_or_none(namer.db, str(r["entity"]), int(r["entity_id"]))
        )
    return words


def _row_or_none(db: sqlite_utils.Database, table: str, row_id: int) -> dict[str, Any] | None:
    if table not in RECORD_TABLES:
        return None
    found = db.execute(f"SELECT * FROM [{table}] WHERE id = ?", [row_id]).fetchone()
    return dict(found) if found is not None else None
