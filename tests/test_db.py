"""The database layer: pragmas, migrations, the write lock and append-only records."""

from __future__ import annotations

import datetime as dt
import json
import sqlite3
import threading
from pathlib import Path

import pytest

from stockroom import db as dbmod
from stockroom import records, schema
from stockroom.hazards import DEFAULT_CLASSIFICATIONS
from stockroom.policy import DEFAULT_POLICIES
from stockroom.schema import APPEND_ONLY, SCHEMA_VERSION


def test_pragmas_on_every_connection(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL (README: durability)
    assert conn.execute("PRAGMA busy_timeout").fetchone()[0] == dbmod.BUSY_TIMEOUT_MS


def test_migrations_create_schema_once_and_are_idempotent(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    assert schema.schema_version(conn) == 0
    assert schema.migrate(conn) == SCHEMA_VERSION
    assert schema.migrate(conn) == SCHEMA_VERSION
    tables = set(conn.table_names())
    assert {"batches", "runs", "replicates", "releases", "events", "users", "reagent_policies"} <= tables
    # Starting policy written once, by its migration.
    n = conn.execute("SELECT count(*) FROM reagent_policies").fetchone()[0]
    assert n == len(records.policies(conn))


def test_newer_schema_refused(tmp_path):
    conn = dbmod.connect(tmp_path / "a.db")
    schema.migrate(conn)
    with dbmod.write(conn):
        conn["_sqlite_migrations"].insert({"migration_set": "stockroom", "name": "9999_future", "applied_at": "2099-01-01"})
    with pytest.raises(RuntimeError, match="newer"):
        schema.migrate(conn)


@pytest.mark.parametrize("table", APPEND_ONLY)
def test_every_record_table_has_append_only_triggers(database, table):
    names = {r[0] for r in database.execute("SELECT name FROM sqlite_master WHERE type = 'trigger' AND tbl_name = ?", [table])}
    assert {f"{table}_no_update", f"{table}_no_delete"} <= names


def test_append_only_triggers_refuse_changes(database):
    with dbmod.write(database):
        records.append_event(database, "tester", "account.signout")
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
            records.append_event(database, "tester", "account.signout")
            1 / 0  # noqa: B018
    assert database.execute("SELECT count(*) FROM events").fetchone()[0] == before


def test_concurrent_writers_are_serialized(tmp_path):
    path = tmp_path / "c.db"
    schema.migrate(dbmod.connect(path))
    errors = []

    def work(i):
        conn = dbmod.connect(path)
        try:
            for j in range(25):
                with dbmod.write(conn):
                    records.append_event(conn, f"w{i}", "account.signout", detail={"j": j})
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
    # 150 entries plus the one that began the keyed trail (it names the starting rows).
    assert conn.execute("SELECT count(*) FROM events WHERE action != 'trail.begin'").fetchone()[0] == 150
    assert conn.execute("SELECT count(*) FROM events WHERE action = 'trail.begin'").fetchone()[0] == 1
    # The chain stays whole under concurrency because every append happens under the write lock.
    assert records.verify_chain(conn) is None


def test_audit_chain_detects_edit_behind_the_back(tmp_path):
    path = tmp_path / "h.db"
    conn = dbmod.connect(path)
    schema.migrate(conn)
    with dbmod.write(conn):
        for i in range(5):
            records.append_event(conn, "tester", "account.signout", detail={"i": i})
    assert records.verify_chain(conn) is None
    # Bypass the triggers the way someone with a raw SQLite shell would.
    conn.execute("DROP TRIGGER events_no_update")
    conn.execute("UPDATE events SET actor = 'mallory' WHERE id = 3")
    assert records.verify_chain(conn) == 3


# ---------------------------------------------------------------- seeded rows are literal data

SEEDED = Path(__file__).parent / "data" / "seeded_rows.json"


def _seeded_rows(conn) -> dict[str, list[dict]]:
    """Every row a fresh database holds, per table, without the time it was written."""
    out: dict[str, list[dict]] = {}
    for table in conn.table_names():
        if table.startswith(("_", "sqlite")) or table == "trail_keying":  # checked on its own below
            continue
        if table.startswith(schema.SEARCH_INDEX_TABLES):  # the search index and SQLite's shadow tables: derived
            continue
        rows = dbmod.query(conn, f"SELECT * FROM {table} ORDER BY rowid")  # batch_status_summary keys on batch_id
        if rows:
            for r in rows:
                r.pop("recorded_at", None)
            out[table] = rows
    return out


def test_a_fresh_database_has_exactly_the_rows_the_migrations_wrote_before_they_became_literal(tmp_path):
    # tests/data/seeded_rows.json was captured from a database built by the migrations as they were
    # when they still called the application's defaults (the commit before schema.py held literals).
    conn = dbmod.connect(tmp_path / "a.db")
    schema.migrate(conn)
    seeded = _seeded_rows(conn)
    frozen = json.loads(SEEDED.read_text(encoding="utf-8"))
    # Later migrations append rows of their own (0013: the titrants beyond acids and bases); the rows
    # frozen before them stay exactly as they were, and the appended ones are those migrations' literals.
    later = {"reagent_policies": schema._CLASS_POLICIES, "hazard_classifications": schema._CLASS_HAZARDS}
    assert set(seeded) == set(frozen)
    # Columns a later migration added (0012: a policy's container shelf life) hold NULL in those rows.
    added = {"reagent_policies": {"container_shelf_life_days"}}
    for table, rows in frozen.items():
        got = seeded[table]
        for r in got:
            for column in added.get(table, ()):
                assert r.pop(column) is None
        assert got[: len(rows)] == rows
        extra = [{k: v for k, v in r.items() if k != "id"} for r in got[len(rows) :]]
        assert extra == [dict(r) for r in later.get(table, ())]
    # A fresh database is keyed from its first entry on.
    assert [r["first_keyed_entry"] for r in dbmod.query(conn, "SELECT * FROM trail_keying")] == [1]


def test_the_seeded_rows_still_agree_with_the_applications_defaults(tmp_path):
    # A cross-check, not a rule: the literal rows and policy/hazards defaults were equal when frozen.
    # When a default changes on purpose, a new migration adds the row and this comparison is updated.
    conn = dbmod.connect(tmp_path / "a.db")
    schema.migrate(conn)
    policies = dbmod.query(conn, "SELECT * FROM reagent_policies ORDER BY id")
    assert [
        (r["reagent"], tuple(json.loads(r["nominal_molarities"])), r["shelf_life_days"], r["recheck_interval_days"])
        for r in policies
    ] == [(p.reagent, p.nominal_molarities, p.shelf_life_days, p.recheck_interval_days) for p in DEFAULT_POLICIES]
    assert [(r["tolerance_rel"], r["max_rsd"], r["min_replicates"]) for r in policies] == [
        (p.tolerance_rel, p.max_rsd, p.min_replicates) for p in DEFAULT_POLICIES
    ]
    rows = dbmod.query(conn, "SELECT * FROM hazard_classifications ORDER BY id")
    assert [
        (
            r["reagent"],
            r["min_molarity"],
            r["max_molarity"],
            r["signal_word"],
            tuple(json.loads(r["pictograms"])),
            tuple(json.loads(r["hazard_statements"])),
            tuple(json.loads(r["precautionary_statements"])),
            r["source_note"],
            r["effective_from"],
        )
        for r in rows
    ] == [
        (
            c.reagent,
            c.min_molarity,
            c.max_molarity,
            c.signal_word,
            c.pictograms,
            c.hazard_statements,
            c.precautionary_statements,
            c.source_note,
            c.effective_from.isoformat(),
        )
        for c in DEFAULT_CLASSIFICATIONS
    ]


def test_lab_today_turns_at_the_labs_midnight_not_utcs():
    # 2026-03-01 23:30 UTC is already 2 March in Auckland (UTC+13 in March, NZDT) and still 1 March
    # in New York (UTC-5, EST): the IANA rules, from the zoneinfo database.
    moment = dt.datetime(2026, 3, 1, 23, 30, tzinfo=dt.UTC)
    assert dbmod.lab_today("Pacific/Auckland", moment) == dt.date(2026, 3, 2)
    assert dbmod.lab_today("America/New_York", moment) == dt.date(2026, 3, 1)
    assert dbmod.lab_today("UTC", moment) == dt.date(2026, 3, 1)
    with pytest.raises(ValueError, match="aware"):
        dbmod.lab_today("UTC", dt.datetime(2026, 3, 1, 12, 0))
