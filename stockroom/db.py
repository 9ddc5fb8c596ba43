"""The SQLite database: connections with pragmas, the per-thread pool, the write lock, queries, the clock.

The lowest layer of the persistence stack: it imports nothing of stockroom. Migrations live one layer
up, in stockroom.schema, and the application hands them to init_app.
"""

from __future__ import annotations

import datetime as dt
import sqlite3
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import sqlite_utils

# SQLite 3.40.x (Debian 12) has a known WAL-reset corruption bug when two connections write
# concurrently (fixed upstream in 3.51.3). Every write in this process therefore goes through one
# lock and starts with BEGIN IMMEDIATE, so at most one writer is ever inside a transaction; readers
# are unaffected and keep WAL's concurrency.
_WRITE_LOCK = threading.RLock()

BUSY_TIMEOUT_MS = 10_000


def connect(path: str | Path) -> sqlite_utils.Database:
    """Open the database file with stockroom's pragmas (WAL, foreign keys, busy timeout, FULL sync)."""
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, check_same_thread=False)
    # Autocommit at the driver level: transactions are only the explicit ones below and atomic().
    conn.isolation_level = None
    conn.row_factory = sqlite3.Row
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA foreign_keys = ON")
    # REPLACE deletes the old row; with recursive triggers on, that delete fires the append-only
    # tables' delete triggers, so INSERT OR REPLACE through stockroom fails like a DELETE does.
    conn.execute("PRAGMA recursive_triggers = ON")
    mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
    if mode.lower() != "wal" and str(path) != ":memory:":
        raise RuntimeError(f"could not switch {path} to WAL journal mode (got {mode})")
    conn.execute("PRAGMA synchronous = FULL")  # an acknowledged write survives power loss (README: durability)
    return sqlite_utils.Database(conn, execute_plugins=False)


@contextmanager
def write(db: sqlite_utils.Database) -> Iterator[sqlite_utils.Database]:
    """Run a block as one atomic write: process-wide lock, BEGIN IMMEDIATE, commit or roll back."""
    with _WRITE_LOCK:
        if db.conn.in_transaction:
            # Nested use joins the outer transaction through a savepoint.
            with db.atomic():
                yield db
            return
        db.conn.execute("BEGIN IMMEDIATE")
        _written(db).clear()
        before_commit(db).clear()
        after_commit(db).clear()
        try:
            yield db
        except BaseException:
            if db.conn.in_transaction:
                db.conn.execute("ROLLBACK")
            _written(db).clear()
            before_commit(db).clear()
            after_commit(db).clear()
            raise
        else:
            checks = list(before_commit(db))
            before_commit(db).clear()
            try:
                for check in checks:  # a check that raises rolls the whole write back
                    check()
            except BaseException:
                db.conn.execute("ROLLBACK")
                _written(db).clear()
                after_commit(db).clear()
                raise
            db.conn.execute("COMMIT")
            _written(db).clear()
            hooks = list(after_commit(db))
            after_commit(db).clear()
            for hook in hooks:  # still under the write lock: no other write can come between
                hook()


def after_commit(db: sqlite_utils.Database) -> list[Callable[[], None]]:
    """The connection's one-shot after-commit hooks: db.write runs them (in order) once the write commits.

    A write that rolls back drops them. The audit trail appends its head log here, so this module needs
    to know nothing about it.
    """
    hooks: list[Callable[[], None]] | None = getattr(db, "_stockroom_after_commit", None)
    if hooks is None:
        hooks = []
        db._stockroom_after_commit = hooks  # type: ignore[attr-defined]
    return hooks


def before_commit(db: sqlite_utils.Database) -> list[Callable[[], None]]:
    """The connection's one-shot before-commit checks: db.write runs them before COMMIT; one raising rolls back."""
    checks: list[Callable[[], None]] | None = getattr(db, "_stockroom_before_commit", None)
    if checks is None:
        checks = []
        db._stockroom_before_commit = checks  # type: ignore[attr-defined]
    return checks


def _written(db: sqlite_utils.Database) -> list[tuple[str, int]]:
    rows: list[tuple[str, int]] | None = getattr(db, "_stockroom_written", None)
    if rows is None:
        rows = []
        db._stockroom_written = rows  # type: ignore[attr-defined]
    return rows


def take_written_rows(db: sqlite_utils.Database) -> list[tuple[str, int]]:
    """(table, id) of every row insert_row appended in this write since the last call; the list is emptied."""
    rows = _written(db)
    out = list(rows)
    rows.clear()
    return out


def database_file(db: sqlite_utils.Database) -> str:
    """The path of the connection's main database file; "" for an in-memory database."""
    for row in db.execute("PRAGMA database_list").fetchall():
        if row[1] == "main":
            return str(row[2] or "")
    return ""


def write_lock() -> threading.RLock:
    """The process-wide write lock (stockroom.schema holds it while it migrates)."""
    return _WRITE_LOCK


_FIXED_NOW: ContextVar[dt.datetime | None] = ContextVar("stockroom_fixed_now", default=None)


def utc_now() -> str:
    """Current UTC time as ISO 8601 with seconds and offset (the fixed time inside clock_at, if any)."""
    fixed = _FIXED_NOW.get()
    moment = fixed if fixed is not None else dt.datetime.now(dt.UTC)
    return moment.astimezone(dt.UTC).replace(microsecond=0).isoformat()


@contextmanager
def clock_at(moment: dt.datetime) -> Iterator[None]:
    """Make utc_now() answer `moment` (an aware time) inside the block: the demo loader writes its
    history at the scenario's dates. Only for building a fresh database; the server never uses it."""
    if moment.tzinfo is None:
        raise ValueError("clock_at needs an aware time (with its UTC offset)")
    token = _FIXED_NOW.set(moment)
    try:
        yield
    finally:
        _FIXED_NOW.reset(token)


def lab_today(timezone_name: str, now: dt.datetime | None = None) -> dt.date:
    """The lab's date (the calendar day in the IANA zone `timezone_name`) at `now` (an aware time; default: now)."""
    moment = now if now is not None else dt.datetime.now(dt.UTC)
    if moment.tzinfo is None:
        raise ValueError("lab_today needs an aware time (with its UTC offset)")
    return moment.astimezone(ZoneInfo(timezone_name)).date()


def insert_row(db: sqlite_utils.Database, table: str, row: dict[str, Any]) -> int:
    """Append one row to a table (inside a write) and return its new id.

    The row is remembered for the write (take_written_rows): the audit entry that follows names it.
    """
    pk = db.table(table).insert(row).last_pk
    if pk is None:
        raise RuntimeError(f"insert into {table} returned no id")
    _written(db).append((table, int(pk)))
    return int(pk)


_SQLITE_INT = (-(2**63), 2**63 - 1)


def _bindable(value: Any) -> Any:
    # An integer beyond SQLite's 64-bit range (e.g. /runs/99999999999999999999) can match no row;
    # binding NULL instead makes the read find nothing rather than raise OverflowError.
    if isinstance(value, int) and not isinstance(value, bool) and not _SQLITE_INT[0] <= value <= _SQLITE_INT[1]:
        return None
    return value


def query(db: sqlite_utils.Database, sql: str, params: Any = ()) -> list[dict[str, Any]]:
    """Run a read query with bound parameters and return plain dict rows."""
    if isinstance(params, (list, tuple)):
        params = [_bindable(p) for p in params]
    return [dict(r) for r in db.execute(sql, params).fetchall()]


# Each server thread keeps its connection between requests: opening one (and the WAL checkpoint SQLite
# runs when the last connection to a file closes) costs more than most pages. A request still has the
# connection to itself; it is handed back clean (any open transaction rolled back) when the request ends.
_POOL = threading.local()
_POOL_SIZE = 4  # distinct database files one thread keeps open (tests make many)


def _pooled(path: str) -> sqlite_utils.Database:
    cache: dict[str, sqlite_utils.Database] = getattr(_POOL, "conns", None) or {}
    _POOL.conns = cache
    conn = cache.pop(path, None)
    if conn is None:
        conn = connect(path)
        while len(cache) >= _POOL_SIZE:
            oldest = next(iter(cache))
            cache.pop(oldest).close()
    cache[path] = conn  # most recently used last
    return conn


def init_app(app: Any, prepare: Callable[[sqlite_utils.Database], object]) -> None:
    """Hand each request the thread's pooled connection and take it back clean; `prepare` (the migration) runs once first."""
    from flask import g

    db = connect(app.config["DATABASE"])
    try:
        prepare(db)
    finally:
        db.close()

    @app.teardown_appcontext
    def _release(exc: BaseException | None) -> None:
        conn = g.pop("db", None)
        if conn is None:
            return
        if conn.conn.in_transaction:
            conn.conn.execute("ROLLBACK")
        if not app.config.get("REUSE_CONNECTIONS", True):
            _POOL.conns.pop(str(app.config["DATABASE"]), None)
            conn.close()


def get_db() -> sqlite_utils.Database:
    """The connection of the current request (the thread's own, reused across its requests)."""
    from flask import current_app, g

    if "db" not in g:
        g.db = _pooled(str(current_app.config["DATABASE"]))
    return g.db
