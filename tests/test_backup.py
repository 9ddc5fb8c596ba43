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
        return {n: conn.execute(f"SELECT * FROM {n} ORDER BY rowid").fetchall() for n in names}
    finally:
        conn.close()


def test_round_trip_keeps_every_table(tmp_path):
    live = tmp_path / "live.db"
    build_demo(str(live), today=dt.date(2026, 12, 1))
    result = CliRunner().invoke(main, ["backup", str(tmp_path / "b.db"), "--db", str(live)])
    assert result.exit_code == 0, result.output
    before = _tables(live)
    fresh = tmp_path / "restored.db"
    result = CliRunner().invoke(main, ["restore", str(tmp_path / "b.db"), "--db", str(fresh), "--yes"])
    assert result.exit_code == 0, result.output
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
