"""Online backup with its manifest, and a restore that verifies the file before it touches the target.

A backup is SQLite's online backup (never a file copy) plus `DEST.manifest.json`: the schema version,
the audit trail's head (entry id and MAC), row counts per table, the SHA-256 of the backup file and the
time. Kept somewhere else than the server, a manifest anchors the trail: `stockroom verify --manifest`
checks that the database still holds that head.

A restore copies the file into a staging copy outside the target, brings it to this version's schema,
and runs the audit verification on it (chain, record contents, append-only guards, the head of the
manifest beside it) with the target's trail key. Only a file that passes replaces the target.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
import sqlite3
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import schema
from stockroom.records import audit
from stockroom.schema import MIGRATIONS, SCHEMA_VERSION

MANIFEST_FORMAT = "stockroom backup manifest"
MANIFEST_VERSION = 1
# Tables every stockroom database has from its first migration on: a file without them is not one,
# whatever its migration record says (restoring it would empty the database).
CORE_TABLES = ("events", "batches", "runs", "releases", "users")


class RestoreRefused(Exception):
    """The file offered for restore is not a sound stockroom database this version can open."""


class ManifestUnreadable(Exception):
    """A backup manifest that is missing, not JSON, or not a stockroom backup manifest."""


def manifest_path(backup_file: str | Path) -> Path:
    """The manifest written beside a backup file: `DEST.manifest.json`."""
    return Path(f"{backup_file}.manifest.json")


def file_sha256(path: str | Path) -> str:
    """SHA-256 (hex) of a file's bytes."""
    digest = hashlib.sha256()
    with Path(path).open("rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _read_only(path: Path) -> sqlite_utils.Database:
    conn = sqlite3.connect(f"file:{path.resolve()}?mode=ro", uri=True)
    conn.row_factory = sqlite3.Row
    return sqlite_utils.Database(conn, execute_plugins=False)


def _table_counts(db: sqlite_utils.Database) -> dict[str, int]:
    names = [
        str(r[0])
        for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY name")
    ]
    return {n: int(db.execute(f"SELECT count(*) FROM [{n}]").fetchone()[0]) for n in names}


def describe(backup_file: str | Path, *, now: dt.datetime | None = None) -> dict[str, Any]:
    """The manifest of a backup file, read from the file itself (so it states exactly what the copy holds)."""
    path = Path(backup_file)
    db = _read_only(path)
    try:
        version = int(
            db.execute("SELECT count(*) FROM _sqlite_migrations WHERE migration_set = ?", [MIGRATIONS.name]).fetchone()[0]
        )
        head = audit.chain_head(db)
        counts = _table_counts(db)
    finally:
        db.close()
    moment = (now or dt.datetime.now(dt.UTC)).astimezone(dt.UTC).replace(microsecond=0)
    return {
        "format": MANIFEST_FORMAT,
        "manifest_version": MANIFEST_VERSION,
        "backup_file": path.name,
        "schema_version": version,
        "trail_head": {"entry_id": head[0], "mac": head[1]} if head else None,
        "row_counts": counts,
        "sha256": file_sha256(path),
        "bytes": path.stat().st_size,
        "written_at": moment.isoformat(),
    }


def backup(source: str | Path, dest: str | Path) -> int:
    """Copy the live database at `source` into a new file `dest` and write its manifest; return pages copied.

    SQLite's online backup takes a consistent snapshot even with writers active (WAL mode). Neither the
    backup nor its manifest ever overwrites a file.
    """
    dest = Path(dest)
    manifest = manifest_path(dest)
    for existing in (dest, manifest):
        if existing.exists():
            raise FileExistsError(f"{existing} already exists; a backup never overwrites a file")
    dest.parent.mkdir(parents=True, exist_ok=True)
    src = sqlite3.connect(f"file:{Path(source)}?mode=ro", uri=True, timeout=30)
    out = sqlite3.connect(dest)
    pages = 0

    def progress(status: int, remaining: int, total: int) -> None:
        nonlocal pages
        pages = total

    try:
        src.backup(out, pages=256, progress=progress)
        ok = out.execute("PRAGMA integrity_check").fetchone()[0]
        if ok != "ok":
            raise RuntimeError(f"the backup failed its integrity check: {ok}")
        # A backup is one self-contained file (no -wal beside it); a restored database goes back to WAL.
        out.execute("PRAGMA journal_mode = DELETE")
    finally:
        out.close()
        src.close()
    text = json.dumps(describe(dest), indent=2, sort_keys=True) + "\n"
    with manifest.open("x", encoding="utf-8") as f:  # "x": never overwrite
        f.write(text)
    return pages


def read_manifest(path: str | Path) -> dict[str, Any]:
    """A backup manifest read back; ManifestUnreadable (one line) if it is not one."""
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ManifestUnreadable(f"no manifest at {path}") from None
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise ManifestUnreadable(f"{path} is not a readable backup manifest ({exc})") from None
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT:
        raise ManifestUnreadable(f"{path} is not a stockroom backup manifest")
    if data.get("manifest_version") != MANIFEST_VERSION:
        raise ManifestUnreadable(f"{path} is a manifest of version {data.get('manifest_version')!r}; this stockroom reads 1")
    head = data.get("trail_head")
    if head is not None and not (
        isinstance(head, dict) and isinstance(head.get("entry_id"), int) and isinstance(head.get("mac"), str)
    ):
        raise ManifestUnreadable(f"{path} has a trail head that is not an entry id and a MAC")
    return data


def manifest_anchor(manifest: dict[str, Any]) -> tuple[int, str] | None:
    """The (entry id, MAC) a manifest records as the trail's head, or None for an empty trail."""
    head = manifest.get("trail_head")
    return (int(head["entry_id"]), str(head["mac"])) if head else None


def _schema_names(path: Path) -> tuple[list[str], set[str]]:
    """The stockroom migrations applied to a file and its table names; RestoreRefused if it is not one."""
    try:
        conn = sqlite3.connect(f"file:{path.resolve()}?mode=ro", uri=True)
        try:
            result = conn.execute("PRAGMA integrity_check").fetchone()[0]
            if result != "ok":
                raise RestoreRefused(f"{path} fails SQLite's integrity check: {result}")
            tables = {str(r[0]) for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
            if "_sqlite_migrations" not in tables:
                raise RestoreRefused(f"{path} is not a stockroom database (no migration record)")
            names = [
                str(r[0]) for r in conn.execute("SELECT name FROM _sqlite_migrations WHERE migration_set = ?", [MIGRATIONS.name])
            ]
        finally:
            conn.close()
    except sqlite3.DatabaseError as exc:
        raise RestoreRefused(f"{path} is not a readable SQLite database: {exc}") from None
    return names, tables


def key_file_for_path(database: str | Path) -> Path:
    """The trail key file of the database at `database` (it need not exist yet): as audit.key_file_for says."""
    path = Path(database)
    if path.is_file():
        db = _read_only(path)
        try:
            found = audit.key_file_for(db)
        finally:
            db.close()
        if found is not None:
            return found
    chosen = os.environ.get("STOCKROOM_TRAIL_KEY_FILE")
    return Path(chosen) if chosen else Path(f"{path.resolve()}.trail-key")


@dataclass
class CheckedRestore:
    """A file that passed every check, staged (at this version's schema) outside the target until applied."""

    source: Path
    version: int  # the schema version of the file as given
    staged: Path
    report: audit.Report
    anchors: list[tuple[str, int, str]] = field(default_factory=list)  # (where, entry id, MAC)
    head: tuple[int, str] | None = None

    def discard(self) -> None:
        """Remove the staging copy."""
        shutil.rmtree(self.staged.parent, ignore_errors=True)


def check_restorable(source: str | Path, target: str | Path, *, key_file: str | Path | None = None) -> CheckedRestore:
    """Check a file offered for restore over `target` without touching the target; RestoreRefused if unsound.

    Refused, each in one line: a missing or unreadable file, one failing SQLite's integrity check, one
    with no stockroom tables, a newer schema, a manifest beside it that does not match it, and any
    problem the audit verification finds (with the target's trail key, `key_file` if given).
    """
    path = Path(source)
    if not path.is_file():
        raise RestoreRefused(f"{path} does not exist")
    names, tables = _schema_names(path)
    known = {m.name for m in MIGRATIONS._migrations}
    unknown = [n for n in names if n not in known]
    if unknown or len(names) > SCHEMA_VERSION:
        raise RestoreRefused(
            f"{path} has a newer schema than this stockroom ({', '.join(unknown) or len(names)}); upgrade stockroom first"
        )
    missing = [t for t in CORE_TABLES if t not in tables]
    if not names or missing:
        raise RestoreRefused(
            f"{path} is not a stockroom database (it has no {', '.join(missing) or 'stockroom'} tables); "
            "restoring it would empty the database"
        )
    anchors: list[tuple[str, int, str]] = []
    manifest = manifest_path(path)
    if manifest.exists():
        try:
            data = read_manifest(manifest)
        except ManifestUnreadable as exc:
            raise RestoreRefused(str(exc)) from None
        if data.get("sha256") != file_sha256(path):
            raise RestoreRefused(f"{path} is not the file its manifest {manifest.name} describes (its SHA-256 differs)")
        head = manifest_anchor(data)
        if head is not None:
            anchors.append((str(manifest), *head))
    key = Path(key_file) if key_file else key_file_for_path(target)
    staging = Path(tempfile.mkdtemp(prefix="stockroom-restore-"))
    staged = staging / "staged.db"
    try:
        src = sqlite3.connect(f"file:{path.resolve()}?mode=ro", uri=True)
        out = sqlite3.connect(staged)
        try:
            src.backup(out)
        finally:
            out.close()
            src.close()
        conn = dbmod.connect(staged)
        try:
            schema.migrate(conn)  # an older backup is brought up to this version's schema, then verified
            report = audit.verify(conn, anchors=[(i, m) for _, i, m in anchors], key_file=key)
            head = audit.chain_head(conn)
        finally:
            conn.close()
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    checked = CheckedRestore(path, len(names), staged, report, anchors, head)
    if report.key_missing:
        checked.discard()
        raise RestoreRefused(
            f"{path} has a keyed audit trail and its key is not at {key}: put the trail key file there "
            "(or set TRAIL_KEY_FILE) and restore again"
        )
    if report.problems:
        checked.discard()
        first = report.problems[0]
        more = len(report.problems) - 1
        raise RestoreRefused(
            f"{path} fails the audit verification: {first}"
            + (f" (and {more} more problem{'s' if more != 1 else ''})" if more else "")
        )
    return checked


def apply_restore(checked: CheckedRestore, target: str | Path, *, key_file: str | Path | None = None) -> Path | None:
    """Replace the database at `target` with a checked file; return where the old head log was kept, if any.

    Stop the server first: a restore replaces every page of the target at once. The target's head log
    records heads the restored file no longer has, so it is kept aside (renamed, never deleted) and a
    new one starts at the restored head. `key_file` (the key the file was checked with) is copied to the
    target's key place when there is no key there yet (a restore onto a new server); an existing key is
    never replaced.
    """
    target = Path(target)
    if key_file is not None:
        place = key_file_for_path(target)
        if not place.exists() and Path(key_file).resolve() != place.resolve():
            place.parent.mkdir(parents=True, exist_ok=True)
            fd = os.open(place, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
            with os.fdopen(fd, "wb") as key_out:
                key_out.write(Path(key_file).read_bytes())
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        src = sqlite3.connect(checked.staged)
        out = sqlite3.connect(target, timeout=30)
        try:
            src.backup(out)
        finally:
            out.close()
            src.close()
    finally:
        checked.discard()
    conn = dbmod.connect(target)
    try:
        log = audit.head_log_for(conn)
        head = audit.chain_head(conn)
    finally:
        conn.close()
    kept: Path | None = None
    if log is not None:
        if log.exists():
            stamp = dt.datetime.now(dt.UTC).strftime("%Y%m%dT%H%M%SZ")
            kept = log.with_name(f"{log.name}.before-restore-{stamp}")
            log.rename(kept)
        if head is not None:
            log.parent.mkdir(parents=True, exist_ok=True)
            with log.open("a", encoding="utf-8") as f:
                f.write(f"{head[0]} {head[1]} {dbmod.utc_now()} restored from {checked.source.name}\n")
    return kept


def restore(source: str | Path, target: str | Path, *, key_file: str | Path | None = None) -> int:
    """Check `source` (check_restorable) and replace the database at `target` with it; return its schema version."""
    checked = check_restorable(source, target, key_file=key_file)
    apply_restore(checked, target, key_file=key_file)
    return checked.version
