"""Online backup while the server writes, and a restore that refuses damaged or newer files."""

from __future__ import annotations

import datetime as dt
import sqlite3
import threading

import pytest
from click.testing import CliRunner

from stockroom import backup, records, schema
from stockroom import db as dbmod
from stockroom.cli import main
from stockroom.demo import build_demo


def _tables(path):
    conn = sqlite3.connect(path)
    try:
        names = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        # By the first column (the id; the key of the search index's FTS5 shadow tables, some of which
        # have no rowid).
        return {n: conn.execute(f"SELECT * FROM {n} ORDER BY 1").fetchall() for n in names}
    finally:
        conn.close()


def test_round_trip_keeps_every_table(tmp_path):
    live = tmp_path / "live.db"
    build_demo(str(live), today=dt.date(2026, 12, 1))
    result = CliRunner().invoke(main, ["backup", str(tmp_path / "b.db"), "--db", str(live)])
    assert result.exit_code == 0, result.output
    before = _tables(live)
    fresh = tmp_path / "restored.db"
    # A new place has no trail key yet: the one the file was made under is given, and installed there.
    key = tmp_path / "live.db.trail-key"
    args = ["restore", str(tmp_path / "b.db"), "--db", str(fresh), "--yes", "--key-file", str(key)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    assert (tmp_path / "restored.db.trail-key").read_bytes() == key.read_bytes()
    after = _tables(fresh)
    assert set(before) == set(after)
    for name in before:
        assert before[name] == after[name], name
    assert CliRunner().invoke(main, ["verify", "--db", str(fresh)]).exit_code == 0


def test_backup_while_writing_is_consistent(tmp_path):
    live = tmp_path / "busy.db"
    conn = dbmod.connect(live)
    schema.migrate(conn)
    stop = threading.Event()

    def write():
        c = dbmod.connect(live)
        while not stop.is_set():
            with dbmod.write(c):
                records.append_event(c, "writer", "account.signout")
        c.close()

    t = threading.Thread(target=write)
    t.start()
    try:
        for i in range(5):
            backup.backup(live, tmp_path / f"b{i}.db")
    finally:
        stop.set()
        t.join()
    for i in range(5):
        copy = dbmod.connect(tmp_path / f"b{i}.db")
        assert records.verify_chain(copy) is None  # a snapshot, never half a write
        copy.close()
    with pytest.raises(FileExistsError):
        backup.backup(live, tmp_path / "b0.db")


def test_restore_refuses_damaged_foreign_and_newer_files(tmp_path):
    good = tmp_path / "good.db"
    build_demo(str(good), today=dt.date(2026, 12, 1))
    damaged = tmp_path / "damaged.db"
    data = bytearray(good.read_bytes())
    data[4096 * 3 : 4096 * 3 + 512] = b"\xff" * 512
    damaged.write_bytes(bytes(data))
    foreign = tmp_path / "foreign.db"
    sqlite3.connect(foreign).execute("CREATE TABLE t (x)").connection.commit()
    newer = tmp_path / "newer.db"
    newer.write_bytes(good.read_bytes())
    c = sqlite3.connect(newer)
    c.execute("INSERT INTO _sqlite_migrations (migration_set, name, applied_at) VALUES ('stockroom', '9999_future', 'x')")
    c.commit()
    c.close()
    text = tmp_path / "notes.txt"
    text.write_text("not a database at all\n" * 100)
    target = tmp_path / "target.db"
    for bad, why in (
        (damaged, "malformed"),
        (foreign, "not a stockroom database"),
        (newer, "newer schema"),
        (text, "not a readable SQLite database"),
    ):
        result = CliRunner().invoke(main, ["restore", str(bad), "--db", str(target), "--yes"])
        assert result.exit_code == 1 and why in result.output.replace("integrity check", "malformed"), (bad, result.output)
    assert not target.exists()


def test_restore_refuses_a_file_with_only_a_migration_record(tmp_path):
    # Before this check, such a file passed (its migration names are stockroom's) and the restore
    # replaced a full database with an empty one.
    live = tmp_path / "live.db"
    build_demo(str(live), today=dt.date(2026, 12, 1))
    before = live.read_bytes()
    shell = tmp_path / "shell.db"
    c = sqlite3.connect(shell)
    c.execute("CREATE TABLE _sqlite_migrations (migration_set TEXT, name TEXT, applied_at TEXT)")
    c.execute("INSERT INTO _sqlite_migrations VALUES ('stockroom', '0001_initial', 'x')")
    c.commit()
    c.close()
    result = CliRunner().invoke(main, ["restore", str(shell), "--db", str(live), "--yes"])
    assert result.exit_code == 1
    assert "not a stockroom database" in result.output and "would empty the database" in result.output
    assert len(result.output.strip().splitlines()) == 1
    assert live.read_bytes() == before


def _backup_of_demo(tmp_path):
    live = tmp_path / "live.db"
    build_demo(str(live), today=dt.date(2026, 12, 1))
    assert CliRunner().invoke(main, ["backup", str(tmp_path / "b.db"), "--db", str(live)]).exit_code == 0
    return live, tmp_path / "b.db"


def test_restore_refuses_a_broken_chain_before_touching_the_target(tmp_path):
    live, copy = _backup_of_demo(tmp_path)
    backup.manifest_path(copy).unlink()  # no manifest: the chain and contents alone must catch it
    c = sqlite3.connect(copy)
    c.execute("DROP TRIGGER releases_no_update")
    c.execute("UPDATE releases SET molarity = molarity + 0.001 WHERE id = 1")
    c.execute(schema.expected_triggers()["releases_no_update"])  # the guard put back as it was: only the content is wrong
    c.commit()
    c.close()
    before = live.read_bytes()
    result = CliRunner().invoke(main, ["restore", str(copy), "--db", str(live), "--yes"])
    assert result.exit_code == 1, result.output
    assert "fails the audit verification" in result.output and "release 1 of" in result.output
    assert len(result.output.strip().splitlines()) == 1
    assert live.read_bytes() == before


def test_restore_refuses_a_file_that_is_not_what_its_manifest_says(tmp_path):
    live, copy = _backup_of_demo(tmp_path)
    c = sqlite3.connect(copy)
    c.execute("CREATE TABLE notes (x)")  # any change of the bytes
    c.commit()
    c.close()
    result = CliRunner().invoke(main, ["restore", str(copy), "--db", str(tmp_path / "new.db"), "--yes"])
    assert result.exit_code == 1 and "SHA-256 differs" in result.output
    assert not (tmp_path / "new.db").exists()


def test_the_manifest_states_the_backups_head_counts_and_hash(tmp_path):
    import hashlib
    import json

    live, copy = _backup_of_demo(tmp_path)
    manifest = json.loads(backup.manifest_path(copy).read_text())
    conn = dbmod.connect(live)
    try:
        head = records.audit.chain_head(conn)
        batches = conn.execute("SELECT count(*) FROM batches").fetchone()[0]
        version = schema.schema_version(conn)
    finally:
        conn.close()
    assert head is not None
    assert manifest["trail_head"] == {"entry_id": head[0], "mac": head[1]}
    assert manifest["row_counts"]["batches"] == batches == 9  # the scenario's 8 invented batches and the potentiometric one
    assert manifest["schema_version"] == version == schema.SCHEMA_VERSION
    assert manifest["sha256"] == hashlib.sha256(copy.read_bytes()).hexdigest()  # hashlib, independently
    assert dt.datetime.fromisoformat(manifest["written_at"]).tzinfo is not None
    # A second backup to the same place overwrites neither the file nor its manifest.
    again = CliRunner().invoke(main, ["backup", str(copy), "--db", str(live)])
    assert again.exit_code == 1 and "already exists" in again.output


def test_a_restore_keeps_the_old_head_log_aside_and_the_result_verifies(tmp_path):
    live, copy = _backup_of_demo(tmp_path)
    conn = dbmod.connect(live)
    records.append_event(conn, "writer", "account.signout")  # the live trail moves past the backup
    conn.close()
    result = CliRunner().invoke(main, ["restore", str(copy), "--db", str(live), "--yes"])
    assert result.exit_code == 0, result.output
    kept = list(tmp_path.glob("live.db.trail-head.before-restore-*"))
    assert len(kept) == 1 and "kept as" in result.output
    check = CliRunner().invoke(main, ["verify", "--db", str(live), "--manifest", str(backup.manifest_path(copy))])
    assert check.exit_code == 0, check.output
