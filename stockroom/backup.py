"""Online backup and checked restore of the SQLite database (SQLite's backup API, never a file copy)."""

from __future__ import annotations

import sqlite3
from pathlib import Path

from stockroom import db as dbmod
from stockroom import schema
from stockroom.schema import MIGRATIONS, SCHEMA_VERSION


class RestoreRefused(Exception):
    """The file offered for restore is not a sound stockroom database this version can open."""


def backup(source: str | Path, dest: str | Path) -> int:
    """Copy the live database at `source` into a new file `dest` while it may be serving; return pages copied.

    SQLite's online backup takes a consistent snapshot even with writers active (WAL mode).
    """
    dest = Path(dest)
    if dest.exists():
        raise FileExistsError(f"{dest} already exists; a backup never overwrites a file")
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
    finally:
        out.close()
        src.close()
    return pages


def check_restorable(path: str | Path) -> int:
    """Refuse a file that is not an intact stockroom database or has a newer schema; return its version."""
    path = Path(path)
    if not path.is_file():
        raise RestoreRefused(f"{path} does not exist")
    try:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
        try:
            result = conn.execute("PRAGMA integrity_check").fetchone()[0]
            if result != "ok":
                raise RestoreRefused(f"{path} fails SQLite's integrity check: {result}")
            try:
                names = [
                    r[0] for r in conn.execute("SELECT name FROM _sqlite_migrations WHERE migration_set = ?", [MIGRATIONS.name])
                ]
            except sqlite3.DatabaseError:
                raise RestoreRefused(f"{path} is not a stockroom database (no migration record)") from None
        finally:
            conn.close()
    except sqlite3.DatabaseError as exc:
        raise RestoreRefused(f"{path} is not a readable SQLite database: {exc}") from None
    known = {m.name for m in MIGRATIONS._migrations}
    unknown = [n for n in names if n not in known]
    if unknown or len(names) > SCHEMA_VERSION:
        raise RestoreRefused(
            f"{path} has a newer schema than this stockroom ({', '.join(unknown) or len(names)}); upgrade stockroom first"
        )
    return len(names)


def restore(source: str | Path, target: str | Path) -> int:
    """Replace the database at `target` with the checked file `source`; return the restored schema version.

    Stop the server first: a restore replaces every page of the target at once.
    """
    version = check_restorable(source)
    src = sqlite3.connect(f"file:{Path(source)}?mode=ro", uri=True)
    out = sqlite3.connect(target, timeout=30)
    try:
        src.backup(out)
    finally:
        out.close()
        src.close()
    conn = dbmod.connect(target)
    try:
        schema.migrate(conn)  # an older backup is brought up to this version's schema
    finally:
        conn.close()
    return version
