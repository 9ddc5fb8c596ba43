"""The keyed audit trail: every tampering a plain SQLite client can do on a copy shows in audit.verify.

The damage is done with the standard library's sqlite3 alone (no stockroom code), the way someone with a
shell and the database file would; the records come from the demo builder (an invented scenario).
"""

from __future__ import annotations

import hashlib
import json
import shutil
import sqlite3
import stat

import pytest

from stockroom import db as dbmod
from stockroom import demo, schema
from stockroom.records import audit


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = tmp_path_factory.mktemp("trail") / "demo.db"
    demo.build_demo(str(path), password="correct horse battery staple 7")
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    conn.close()
    return path


@pytest.fixture
def copy(demo_db, tmp_path):
    """A copy of the demo database with its key and head log beside it; returns its path."""
    path = tmp_path / "copy.db"
    shutil.copy(demo_db, path)
    shutil.copy(str(demo_db) + ".trail-key", str(path) + ".trail-key")
    shutil.copy(str(demo_db) + ".trail-head", str(path) + ".trail-head")
    return path


def _raw(path):
    conn = sqlite3.connect(path)
    conn.isolation_level = None
    return conn


def _report(path, **kw):
    conn = dbmod.connect(path)
    try:
        return audit.verify(conn, anchors=audit.head_log_anchors(conn), **kw)
    finally:
        conn.close()


def _text(report):
    return "\n".join(str(p) for p in report.problems)


def _release_words(path, release_id):
    conn = _raw(path)
    code, batch_id = conn.execute(
        "SELECT b.code, b.id FROM releases r JOIN batches b ON b.id = r.batch_id WHERE r.id = ?", [release_id]
    ).fetchone()
    # A release is named by its place among its batch's releases, not by its row id.
    ids = [r[0] for r in conn.execute("SELECT id FROM releases WHERE batch_id = ? ORDER BY id", [batch_id])]
    conn.close()
    return f"release {ids.index(release_id) + 1} of {code}"


def test_an_untouched_copy_verifies_clean(copy):
    report = _report(copy)
    assert report.ok, _text(report)
    counts = dict(report.checked)
    assert counts["record rows"] > 100 and counts["audit entries"] > 30
    assert counts["append-only guards"] == len(schema.expected_triggers())
    assert counts["outside anchors"] > 0


def test_key_file_is_private_and_beside_the_database(demo_db):
    key = demo_db.parent / (demo_db.name + ".trail-key")
    assert len(key.read_bytes()) == 32
    assert stat.S_IMODE(key.stat().st_mode) == 0o600


def test_edited_release_molarity_is_named(copy):
    conn = _raw(copy)
    conn.execute("DROP TRIGGER releases_no_update")
    conn.execute("UPDATE releases SET molarity = molarity * 1.01 WHERE id = 3")
    conn.close()
    text = _text(_report(copy))
    assert f"{_release_words(copy, 3)}: molarity changed since audit entry" in text
    assert _release_words(copy, 3) != "release 3 of " + _release_words(copy, 3).rsplit(" of ", 1)[1]  # id 3 is not 3rd
    assert "releases_no_update" in text  # the dropped guard is reported too


def test_edited_burette_reading_is_named(copy):
    conn = _raw(copy)
    conn.execute("DROP TRIGGER replicates_no_update")
    run_id, position = conn.execute("SELECT run_id, position FROM replicates ORDER BY id LIMIT 1").fetchone()
    conn.execute("UPDATE replicates SET final_ml = final_ml + 0.10 WHERE run_id = ? AND position = ?", [run_id, position])
    conn.execute("CREATE TRIGGER " + schema.expected_triggers()["replicates_no_update"].split("CREATE TRIGGER ", 1)[1])
    conn.close()
    report = _report(copy)
    assert f"replicate {position} of run {run_id} of " in _text(report)
    assert "final_ml changed since audit entry" in _text(report)
    assert len(report.problems) == 1  # the guard was put back exactly: only the content shows


def test_rejection_flipped_to_acceptance_is_named(copy):
    conn = _raw(copy)
    conn.execute("DROP TRIGGER decisions_no_update")
    decision_id, run_id = conn.execute("SELECT id, run_id FROM decisions WHERE decision = 'reject'").fetchone()
    conn.execute("UPDATE decisions SET decision = 'accept' WHERE id = ?", [decision_id])
    conn.close()
    assert f"decision {decision_id} of run {run_id} of " in _text(_report(copy))
    assert "decision changed since audit entry" in _text(_report(copy))


def test_user_promoted_to_admin_is_named(copy):
    conn = _raw(copy)
    username = conn.execute("SELECT username FROM users WHERE role != 'admin' ORDER BY id LIMIT 1").fetchone()[0]
    conn.execute("UPDATE users SET role = 'admin' WHERE username = ?", [username])  # users has no trigger
    conn.close()
    assert f"user account {username!r}: role changed since audit entry" in _text(_report(copy))


def test_insert_or_replace_fails_with_recursive_triggers_and_is_caught_without(copy):
    conn = _raw(copy)
    row = conn.execute("SELECT * FROM releases WHERE id = 2").fetchone()
    cols = [d[0] for d in conn.execute("SELECT * FROM releases LIMIT 0").description]
    values = dict(zip(cols, row, strict=True))
    values["molarity"] = values["molarity"] * 0.98
    sql = f"INSERT OR REPLACE INTO releases ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})"
    conn.execute("PRAGMA recursive_triggers = ON")
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        conn.execute(sql, list(values.values()))
    # Off, and with the no-replace guard dropped, REPLACE goes through: verify still sees both.
    conn.execute("PRAGMA recursive_triggers = OFF")
    conn.execute("DROP TRIGGER releases_no_replace")
    conn.execute(sql, list(values.values()))
    conn.close()
    text = _text(_report(copy))
    assert f"{_release_words(copy, 2)}: molarity changed since audit entry" in text
    assert "releases_no_replace on release rows: is missing" in text


def test_stockroom_connections_turn_recursive_triggers_on(copy):
    conn = dbmod.connect(copy)
    assert conn.execute("PRAGMA recursive_triggers").fetchone()[0] == 1
    conn.close()


def test_a_guard_whose_sql_differs_is_reported(copy):
    conn = _raw(copy)
    conn.execute("DROP TRIGGER batches_no_delete")
    conn.execute("CREATE TRIGGER batches_no_delete BEFORE DELETE ON batches WHEN 0 BEGIN SELECT 1; END")
    conn.close()
    assert "batches_no_delete on batch rows: differs from the one stockroom makes" in _text(_report(copy))


def test_removed_token_revocation_and_its_entry_show_against_the_head_log(tmp_path):
    from stockroom import accounts, tokens

    path = tmp_path / "t.db"
    conn = dbmod.connect(path)
    schema.migrate(conn)
    admin = accounts.create_user(conn, "ada", "Ada", "admin", "a long enough passphrase 9", actor="setup")
    token, _secret = tokens.create(conn, admin.id, "ada", "balance logger")
    tokens.revoke(conn, token.id, admin.id, "ada")
    conn.close()
    assert _report(path).ok
    raw = _raw(path)
    for t in ("events", "api_token_revocations"):
        raw.execute(f"DROP TRIGGER {t}_no_delete")
    newest = raw.execute("SELECT max(id) FROM events").fetchone()[0]
    raw.execute("DELETE FROM events WHERE id = ?", [newest])
    raw.close()
    # The revocation row is still there but no entry names it any more.
    assert "revocation of API token 1: no audit entry names it" in _text(_report(path))
    raw = _raw(path)
    raw.execute("DELETE FROM api_token_revocations")
    raw.close()
    # Both gone: only the head log (outside the database) shows the tail was removed.
    text = _text(_report(path))
    assert f"audit entry {newest}: is recorded outside the database but the trail ends at entry {newest - 1}" in text


def test_removed_rejection_and_its_entry_are_caught(copy):
    conn = _raw(copy)
    for t in ("events", "decisions"):
        conn.execute(f"DROP TRIGGER {t}_no_delete")
    decision_id, run_id = conn.execute("SELECT id, run_id FROM decisions WHERE decision = 'reject'").fetchone()
    entry = conn.execute("SELECT max(id) FROM events WHERE records LIKE ?", [f'%["decisions",{decision_id},%']).fetchone()[0]
    newest = conn.execute("SELECT max(id) FROM events").fetchone()[0]
    conn.execute("DELETE FROM events WHERE id >= ?", [entry])
    conn.execute("DELETE FROM decisions WHERE id = ?", [decision_id])
    conn.close()
    text = _text(_report(copy))
    assert f"audit entry {newest}: is recorded outside the database" in text
    # Rows recorded by the removed entries that are still there have no entry now.
    if newest > entry:
        assert "no audit entry names it" in text


def _rewrite_from(path, start, mac):
    conn = _raw(path)
    conn.execute("DROP TRIGGER events_no_update")
    conn.execute("UPDATE events SET detail = '{\"molarity\": 0.1}' WHERE id = ?", [start])
    prev = conn.execute("SELECT hash FROM events WHERE id = ?", [start - 1]).fetchone()[0]
    for r in conn.execute(
        "SELECT id, occurred_at, actor, action, entity, entity_id, batch_id, reason, detail, records "
        "FROM events WHERE id >= ? ORDER BY id",
        [start],
    ).fetchall():
        body = json.dumps(
            dict(
                zip(
                    ("id", "occurred_at", "actor", "action", "entity", "entity_id", "batch_id", "reason", "detail", "records"),
                    r,
                    strict=True,
                )
            ),
            sort_keys=True,
            separators=(",", ":"),
        )
        new = mac(prev, body)
        conn.execute("UPDATE events SET prev_hash = ?, hash = ? WHERE id = ?", [prev, new, r[0]])
        prev = new
    conn.close()


@pytest.mark.parametrize(
    "mac",
    [
        pytest.param(lambda prev, body: hashlib.sha256((prev + body).encode()).hexdigest(), id="plain-sha256"),
        pytest.param(
            lambda prev, body: __import__("hmac").new(b"k" * 32, (prev + body).encode(), hashlib.sha256).hexdigest(),
            id="wrong-key",
        ),
    ],
)
def test_chain_rewritten_from_a_point_is_caught(copy, mac):
    _rewrite_from(copy, 20, mac)
    report = _report(copy)
    text = _text(report)
    assert "audit entry 20 (" in text and "keyed MAC does not match" in text
    assert "differs from its copy recorded outside the database" in text


def test_without_the_key_verify_says_it_cannot_check(copy):
    (copy.parent / (copy.name + ".trail-key")).unlink()
    report = _report(copy)
    assert report.key_missing and not report.ok
    assert any("cannot check the keyed audit chain" in n for n in report.notes)


def test_writing_without_the_key_of_a_keyed_trail_is_refused(copy):
    (copy.parent / (copy.name + ".trail-key")).unlink()
    conn = dbmod.connect(copy)
    with pytest.raises(audit.TrailKeyMissing, match="key file"):
        audit.append_event(conn, "tester", "account.signout")
    conn.close()


def test_head_log_and_chain_head_agree(copy):
    conn = dbmod.connect(copy)
    head = audit.chain_head(conn)
    assert head is not None and audit.head_log_anchors(conn)[-1] == head
    audit.append_event(conn, "tester", "account.signout")
    assert audit.head_log_anchors(conn)[-1] == audit.chain_head(conn) != head
    conn.close()


def test_entries_before_keying_are_checked_the_old_way(tmp_path):
    # A database made before this change: build it at the schema before 0008, add unkeyed entries.
    path = tmp_path / "old.db"
    conn = dbmod.connect(path)
    migrations = schema.MIGRATIONS._migrations
    try:
        schema.MIGRATIONS._migrations = [m for m in migrations if m.name != "0008_keyed_trail"]
        schema.MIGRATIONS.apply(conn)
    finally:
        schema.MIGRATIONS._migrations = migrations
    prev = audit.GENESIS_HASH
    for i in range(3):
        row = {
            "occurred_at": "2024-01-01T00:00:00+00:00",
            "actor": "old",
            "action": "account.signout",
            "entity": "",
            "entity_id": None,
            "batch_id": None,
            "reason": "",
            "detail": json.dumps({"i": i}),
        }
        row["prev_hash"], row["hash"] = prev, audit._event_hash(prev, row)
        conn.table("events").insert(row)
        prev = row["hash"]
    schema.migrate(conn)
    audit.append_event(conn, "new", "account.signout")
    report = audit.verify(conn, anchors=audit.head_log_anchors(conn))
    assert report.ok, _text(report)
    assert "entries 1 to 3 were made before keying" in " ".join(report.notes)
    starting = conn.execute("SELECT action FROM events WHERE id = 4").fetchone()[0]
    assert starting == "trail.begin"
    conn.close()
