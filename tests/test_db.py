"""The database layer: pragmas, migrations, the write lock and append-only records."""

from __future__ import annotations

import sqlite3
import threading

import pytest

from stockroom import db as dbmod
from stockroom import records
from stockroom.schema import APPEND_ONLY, SCHEMA_VERSION


def test_pragmas_on_every_connection(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert conn.execute("PRAGMA synchronous").fetchone()[0] == 1  # NORMAL
    assert conn.execute("PRAGMA busy_timeout").fetchone()[0] == dbmod.BUSY_TIMEOUT_MS


def test_migrations_create_schema_once_and_are_idempotent(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    assert dbmod.schema_version(conn) == 0
    assert dbmod.migrate(conn) == SCHEMA_VERSION
    assert dbmod.migrate(conn) == SCHEMA_VERSION
    tables = set(conn.table_names())
    assert {"batches", "runs", "replicates", "releases", "events", "users", "reagent_policies"} <= tables
    # Starting policy written once, by its migration.
    n = conn.execute("SELECT count(*) FROM reagent_policies").fetchone()[0]
    assert n == len(records.policies(conn))


def test_newer_schema_refused(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    dbmod.migrate(conn)
    with dbmod.write(conn):
        conn["_sqlite_migrations"].insert({"migration_set": "stockroom", "name": "9999_future", "applied_at": "2099-01-01"})
    with pytest.raises(RuntimeError, match="newer"):
        dbmod.migrate(conn)


@pytest.mark.parametrize("table", APPEND_ONLY)
def test_every_record_table_has_append_only_triggers(database, table):
    names = {r[0] for r in database.execute("SELECT name FROM sqlite_master WHERE type = 'trigger' AND tbl_name = ?", [table])}
    assert {f"{table}_no_update", f"{table}_no_delete"} <= names


def test_append_only_triggers_refuse_changes(database):
    with dbmod.write(database):
        records.append_event(database, "tester", "test.write")
    for sql in (
        "UPDATE events SET actor = 'x'",
        "DELETE FROM events",
        "UPDATE reagent_policies SET shelf_life_days = 1",
        "DELETE FROM reagent_policies",
    ):
        with pytest.raises(sqlite3.IntegrityError, match="append-only"):
            with dbmod.write(database):
                database.execute(sql)


def test_write_rolls_back_whole_block_on_error(database):
    before = database.execute("SELECT count(*) FROM events").fetchone()[0]
    with pytest.raises(ZeroDivisionError):
        with dbmod.write(database):
            records.append_event(database, "tester", "test.action")
            1 / 0  # noqa: B018
    assert database.execute("SELECT count(*) FROM events").fetchone()[0] == before


def test_concurrent_writers_are_serialized(tmp_path):
    path = tmp_path / "c.db"
    dbmod.migrate(dbmod.connect(path))
    errors = []

    def work(i):
        conn = dbmod.connect(path)
        try:
            for j in range(25):
                with dbmod.write(conn):
                    records.append_event(conn, f"w{i}", "test.write", detail={"j": j})
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)
        finally:
            conn.close()

    threads = [threading.Thread(target=work, args=(i,)) for i in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    conn = dbmod.connect(path)
    assert conn.execute("SELECT count(*) FROM events").fetchone()[0] == 150
    # The chain stays whole under concurrency because every append happens under the write lock.
    assert records.verify_chain(conn) is None


def test_audit_chain_detects_edit_behind_the_back(tmp_path):
    path = tmp_path / "h.db"
    conn = dbmod.connect(path)
    dbmod.migrate(conn)
    with dbmod.write(conn):
        for i in range(5):
            records.append_event(conn, "tester", "test.write", detail={"i": i})
    assert records.verify_chain(conn) is None
    # Bypass the triggers the way someone with a raw SQLite shell would.
    conn.execute("DROP TRIGGER events_no_update")
    conn.execute("UPDATE events SET actor = 'mallory' WHERE id = 3")
    assert records.verify_chain(conn) == 3
