"""`stockroom verify`: what it checked, every problem with its record, exit 1 on any; bad files in one line."""

from __future__ import annotations

import datetime as dt
import json
import shutil
import sqlite3

import pytest
from click.testing import CliRunner

from stockroom import backup
from stockroom.cli import main
from stockroom.demo import build_demo


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    folder = tmp_path_factory.mktemp("verify")
    path = folder / "live.db"
    build_demo(str(path), today=dt.date(2026, 12, 1))
    return path


def _copy(demo_db, tmp_path, name="copy.db"):
    """A copy of the demo database with its key and head log beside it under the new name."""
    dest = tmp_path / name
    src = sqlite3.connect(demo_db)
    out = sqlite3.connect(dest)
    src.backup(out)
    out.close()
    src.close()
    shutil.copy(f"{demo_db}.trail-key", f"{dest}.trail-key")
    shutil.copy(f"{demo_db}.trail-head", f"{dest}.trail-head")
    return dest


def _run(*args):
    return CliRunner().invoke(main, ["verify", *args])


def test_a_clean_database_verifies_and_says_what_it_checked(demo_db, tmp_path):
    db = _copy(demo_db, tmp_path)
    result = _run("--db", str(db))
    assert result.exit_code == 0, result.output
    out = result.output
    assert "audit entries: " in out and "append-only guards: " in out
    assert (
        "9 batches" in out and "8 releases" in out
    )  # the scenario registers 8 batches and releases 8; the potentiometric run adds an undecided batch
    assert f"head log {db}.trail-head: " in out
    assert "no problems" in out


@pytest.mark.parametrize(
    "kind, make, words",
    [
        ("missing", lambda p: None, "no database at"),
        ("text", lambda p: p.write_text("batch,molarity\nHCL-1,0.1\n"), "is not a readable SQLite database"),
        ("foreign", lambda p: sqlite3.connect(p).execute("CREATE TABLE t (x)").connection.commit(), "not a stockroom database"),
        (
            "migrations only",
            lambda p: (
                sqlite3.connect(p)
                .execute("CREATE TABLE _sqlite_migrations (migration_set TEXT, name TEXT, applied_at TEXT)")
                .execute("INSERT INTO _sqlite_migrations VALUES ('stockroom', '0001_initial', 'x')")
                .connection.commit()
            ),
            "not a stockroom database",
        ),
    ],
)
def test_each_bad_database_is_one_line_exit_1_and_nothing_is_created(tmp_path, kind, make, words):
    target = tmp_path / "sub" / "db.sqlite" if kind == "missing" else tmp_path / "db.sqlite"
    make(target)
    before = sorted(p.name for p in tmp_path.rglob("*"))
    result = _run("--db", str(target))
    assert result.exit_code == 1, result.output
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: ") and words in lines[0], result.output
    assert "Traceback" not in result.output
    assert sorted(p.name for p in tmp_path.rglob("*")) == before  # no file, no folder, no key, no head log


def test_an_unmigrated_database_is_refused_and_left_as_it_is(demo_db, tmp_path):
    db = _copy(demo_db, tmp_path)
    c = sqlite3.connect(db)
    newest = c.execute("SELECT max(rowid) FROM _sqlite_migrations").fetchone()[0]
    c.execute("DELETE FROM _sqlite_migrations WHERE rowid = ?", [newest])  # as if one migration were still to run
    c.commit()
    c.close()
    data = db.read_bytes()
    result = _run("--db", str(db))
    assert result.exit_code == 1
    assert "init-db" in result.output and len(result.output.strip().splitlines()) == 1
    assert db.read_bytes() == data


def test_a_tampered_copy_exits_non_zero_naming_the_record(demo_db, tmp_path):
    db = _copy(demo_db, tmp_path)
    c = sqlite3.connect(db)
    # The first release of the second batch released: its row id is not its number (1) within the batch.
    first_of_each = "SELECT min(id), batch_id FROM releases GROUP BY batch_id ORDER BY min(id)"
    release_id, batch_id = c.execute(first_of_each).fetchall()[1]
    assert release_id != 1
    code = c.execute("SELECT code FROM batches WHERE id = ?", [batch_id]).fetchone()[0]
    c.execute("DROP TRIGGER IF EXISTS releases_no_update")
    c.execute("UPDATE releases SET molarity = molarity * 1.01 WHERE id = ?", [release_id])
    c.commit()
    c.close()
    result = _run("--db", str(db))
    assert result.exit_code == 1
    assert f"release 1 of {code}" in result.output and f"release {release_id} of" not in result.output
    assert "molarity" in result.output


def test_anchors_from_a_manifest_and_a_certificate_catch_a_removed_tail(demo_db, tmp_path):
    db = _copy(demo_db, tmp_path)
    backup.backup(db, tmp_path / "b.db")
    manifest = backup.manifest_path(tmp_path / "b.db")
    head = json.loads(manifest.read_text())["trail_head"]
    anchor = f"{head['entry_id']}:{head['mac'][:16]}"
    ok = _run("--db", str(db), "--manifest", str(manifest), "--anchor", anchor)
    assert ok.exit_code == 0, ok.output
    assert f"manifest {manifest}: entry {head['entry_id']}" in ok.output and f"--anchor {anchor}" in ok.output
    # Remove the newest entry and the head log with it (as someone hiding a write would): the
    # anchors kept elsewhere still show it.
    c = sqlite3.connect(db)
    c.execute("DROP TRIGGER IF EXISTS events_no_delete")
    c.execute("DELETE FROM events WHERE id = ?", [head["entry_id"]])
    c.commit()
    c.close()
    (tmp_path / "copy.db.trail-head").unlink()
    bad = _run("--db", str(db), "--manifest", str(manifest), "--anchor", anchor)
    assert bad.exit_code == 1
    assert f"audit entry {head['entry_id']}" in bad.output and "tail was removed" in bad.output
    wrong = _run("--db", str(_copy(demo_db, tmp_path, "again.db")), "--anchor", f"{head['entry_id']}:{'0' * 16}")
    assert wrong.exit_code == 1 and "differs from its copy recorded outside the database" in wrong.output


def test_without_the_key_verify_says_so_and_fails(demo_db, tmp_path):
    db = _copy(demo_db, tmp_path)
    (tmp_path / "copy.db.trail-key").unlink()
    result = _run("--db", str(db))
    assert result.exit_code == 1
    assert "could not be checked" in result.output
    assert not (tmp_path / "copy.db.trail-key").exists()  # verify never makes a key


def test_the_demo_writes_its_release_history_at_the_release_dates(demo_db):
    """The loader's clock is set to each run's day: every release's audit entry carries its release date."""
    conn = sqlite3.connect(str(demo_db))
    try:
        releases = conn.execute("SELECT id, released_on FROM releases").fetchall()
        assert len(releases) >= 2
        for release_id, released_on in releases:
            times = [
                row[0]
                for row in conn.execute(
                    "SELECT occurred_at FROM events WHERE entity IN ('release', 'releases') AND entity_id = ?", [release_id]
                )
            ]
            assert times and all(t.startswith(released_on) for t in times), (release_id, released_on, times)
        days = {r[0][:10] for r in conn.execute("SELECT occurred_at FROM events")}
        assert len(days) > 3  # not all the moment it was built
    finally:
        conn.close()
