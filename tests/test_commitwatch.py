"""The commit token read from SQLite's shared memory moves with every commit, from any process, and the
view cache built on it never answers from before a commit."""

from __future__ import annotations

import datetime as dt
import sqlite3
import subprocess
import sys

from stockroom import commitwatch, records
from stockroom import db as dbmod
from stockroom.web import viewcache


def _insert_from_another_process(path: str) -> None:
    # A separate interpreter with the plain sqlite3 module: a writer this process knows nothing about.
    code = (
        "import sqlite3, sys; c = sqlite3.connect(sys.argv[1]); "
        "c.execute(\"INSERT INTO signin_attempts (username, occurred_at, succeeded) VALUES ('x', '', 0)\"); "
        "c.commit(); c.close()"
    )
    subprocess.run([sys.executable, "-c", code, path], check=True)


def test_the_token_stays_while_nothing_commits_and_moves_at_each_commit(database):
    path = str(database.conn.execute("PRAGMA database_list").fetchone()[2])
    first = commitwatch.token(path)
    assert first is not None and len(first) == 48
    database.execute("SELECT count(*) FROM batches").fetchone()  # reads commit nothing
    assert commitwatch.token(path) == first
    with dbmod.write(database):
        records.append_event(database, "tester", "account.signout")
    second = commitwatch.token(path)
    assert second is not None and second != first
    _insert_from_another_process(path)
    third = commitwatch.token(path)
    assert third is not None and third not in (first, second)


def test_the_token_survives_a_checkpoint_that_restarts_the_wal(database):
    path = str(database.conn.execute("PRAGMA database_list").fetchone()[2])
    before = commitwatch.token(path)
    database.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
    with dbmod.write(database):
        records.append_event(database, "tester", "account.signout")
    after = commitwatch.token(path)
    assert after is not None and after != before


def test_a_database_not_in_wal_mode_gives_no_token(tmp_path):
    path = tmp_path / "rollback.db"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE t (x)")
    conn.commit()
    assert commitwatch.token(str(path)) is None
    assert commitwatch.token("") is None  # an in-memory database names no file
    conn.close()
    missing = tmp_path / "never-made.db"
    assert commitwatch.token(str(missing)) is None and not missing.exists()  # a watch creates no database


def test_watches_are_bounded_and_close_their_files(tmp_path):
    paths = []
    for i in range(commitwatch.MAX_WATCHED + 3):
        conn = dbmod.connect(tmp_path / f"w{i}.db")
        conn.execute("CREATE TABLE t (x)")
        conn.close()
        paths.append(str(tmp_path / f"w{i}.db"))
        assert commitwatch.token(paths[-1]) is not None
    assert len(commitwatch._WATCHES) <= commitwatch.MAX_WATCHED
    assert paths[0] not in commitwatch._WATCHES
    assert commitwatch.token(paths[0]) is not None  # watched again on demand


def test_a_cached_view_is_recomputed_after_another_process_commits(database):
    path = str(database.conn.execute("PRAGMA database_list").fetchone()[2])
    calls = []

    def compute():
        calls.append(1)
        return database.execute("SELECT count(*) FROM events").fetchone()[0]

    key = ("test-view", dt.date(2026, 1, 1))
    first = viewcache.cached(database, key, compute)
    assert viewcache.cached(database, key, compute) == first and len(calls) == 1  # a hit: nothing committed
    # An audit entry written by another process: the token moves, the newest entry's id with it.
    code = (
        "import sys; from stockroom import db, records; c = db.connect(sys.argv[1]); "
        "w = db.write(c); w.__enter__(); records.append_event(c, 'other', 'account.signout'); w.__exit__(None, None, None)"
    )
    subprocess.run([sys.executable, "-c", code, path], check=True)
    now = database.execute("SELECT count(*) FROM events").fetchone()[0]
    assert now > first
    assert viewcache.cached(database, key, compute) == now and len(calls) == 2
    # A commit that appends no audit entry moves the token but not the data version: no recomputation.
    _insert_from_another_process(path)
    assert viewcache.cached(database, key, compute) == now and len(calls) == 2
