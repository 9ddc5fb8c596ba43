"""The audit trail: the page, corrections with before/after, and `stockroom verify` catching tampering."""

from __future__ import annotations

import ast
import datetime as dt
import fnmatch
import sqlite3
from pathlib import Path

import pytest
from click.testing import CliRunner

from stockroom import db as dbmod
from stockroom import records
from stockroom.cli import main
from stockroom.demo import build_demo

TODAY = dt.date(2026, 12, 1)


@pytest.fixture
def demo_db(tmp_path):
    path = tmp_path / "demo.db"
    build_demo(str(path), today=TODAY)
    return path


def verify(path):
    return CliRunner().invoke(main, ["verify", "--db", str(path)])


def test_verify_passes_on_an_untouched_database(demo_db):
    result = verify(demo_db)
    assert result.exit_code == 0, result.output
    assert "is whole" in result.output


def _raw(path):
    conn = sqlite3.connect(path)
    conn.isolation_level = None
    return conn


def test_verify_reports_an_edited_entry(demo_db):
    conn = _raw(demo_db)
    conn.execute("DROP TRIGGER events_no_update")  # what someone with a raw SQLite shell could do
    target = conn.execute("SELECT id FROM events WHERE action = 'batch.release' ORDER BY id LIMIT 1").fetchone()[0]
    conn.execute("UPDATE events SET detail = replace(detail, '\"k\":', '\"k\":9') WHERE id = ?", [target])
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1
    assert f"audit entry {target}" in result.output and "keyed MAC does not match" in result.output


def test_verify_reports_a_deleted_middle_entry(demo_db):
    conn = _raw(demo_db)
    conn.execute("DROP TRIGGER events_no_delete")
    conn.execute("DELETE FROM events WHERE id = 10")
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1 and "audit entry 10: is recorded outside the database but is missing from it" in result.output


def test_verify_reports_the_newest_entry_removed(demo_db):
    """Removing the last entry leaves the chain consistent; the head log outside the database gives it away."""
    conn = _raw(demo_db)
    conn.execute("DROP TRIGGER events_no_delete")
    last = conn.execute("SELECT id, entity, entity_id FROM events ORDER BY id DESC LIMIT 1").fetchone()
    conn.execute("DELETE FROM events WHERE id = ?", [last[0]])
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1
    assert f"audit entry {last[0]}: is recorded outside the database but the trail ends at entry {last[0] - 1}" in result.output


def test_audit_page_needs_a_user_and_filters(app, client, signed_in_client):
    assert client.get("/audit").status_code == 303
    staff = signed_in_client("staff")
    conn = dbmod.connect(app.config["DATABASE"])
    b = records.create_batch(
        conn,
        {"reagent": "HCl", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": "2026-11-30", "prepared_by": "x"},
        "someone-else",
    )
    conn.close()
    html = staff.get("/audit?actor=someone-else").get_data(as_text=True)
    assert "registered a batch" in html and b["code"] in html and "chain was checked just now and is whole" in html
    assert "signed in" not in staff.get("/audit?actor=someone-else").get_data(as_text=True).split("<tbody>")[1]
    by_batch = staff.get(f"/audit?batch={b['code']}").get_data(as_text=True)
    assert by_batch.count("<tr>") == 2  # header row + the one entry about that batch
    assert staff.get("/audit?from=2026-99-01").status_code == 422


def test_a_correction_keeps_the_original_and_shows_before_and_after(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    conn = dbmod.connect(app.config["DATABASE"])
    b = records.create_batch(
        conn,
        {
            "reagent": "HCl",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": "2026-11-30",
            "prepared_by": "x",
            "container": "20 L carboy",
        },
        "setup",
    )
    url = f"/batches/{b['code']}/amend"
    token = form_token(staff, "/")
    assert (
        staff.post(url, data={"field": "container", "new_value": "10 L carboy", "reason": "", "csrf_token": token}).status_code
        == 422
    )
    assert (
        staff.post(url, data={"field": "reagent", "new_value": "NaOH", "reason": "typo", "csrf_token": token}).status_code == 422
    )
    assert (
        staff.post(url, data={"field": "volume_l", "new_value": "ten", "reason": "typo", "csrf_token": token}).status_code == 422
    )
    resp = staff.post(
        url, data={"field": "container", "new_value": "10 L carboy", "reason": "wrong size typed", "csrf_token": token}
    )
    assert resp.status_code == 303
    page = staff.get(f"/batches/{b['code']}").get_data(as_text=True)
    assert "<del>20 L carboy</del> → <ins>10 L carboy</ins> — wrong size typed" in page
    assert records.batch_by_code(conn, b["code"])["container"] == "10 L carboy"
    # The row as first written is unchanged.
    assert conn.execute("SELECT container FROM batches WHERE id = ?", [b["id"]]).fetchone()[0] == "20 L carboy"
    trail = staff.get("/audit?action=batch.amend").get_data(as_text=True)
    assert "<del>20 L carboy</del> → <ins>10 L carboy</ins>" in trail
    conn.close()
    assert signed_in_client("instructor").post(url, data={}).status_code in (400, 403)


# ---------------------------------------------------------------- the action registry

PACKAGE = Path(__file__).resolve().parents[1] / "stockroom"


def _action_codes_in_source() -> list[tuple[str, str]]:
    """(file, code or f-string pattern) of every action passed to append_event or record_row in stockroom."""
    out = []
    for path in sorted(PACKAGE.rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if not isinstance(node, ast.Call):
                continue
            name = node.func.attr if isinstance(node.func, ast.Attribute) else getattr(node.func, "id", "")
            if name == "append_event":
                arg = node.args[2] if len(node.args) > 2 else next(k.value for k in node.keywords if k.arg == "action_code")
            elif name == "record_row":
                arg = next(k.value for k in node.keywords if k.arg == "action_code")
            else:
                continue
            if isinstance(arg, ast.Name) and path.parent.name == "records" and path.name == "audit.py":
                continue  # record_row passes its own argument on, checked by the registry before it writes
            if isinstance(arg, ast.Constant):
                out.append((path.name, arg.value))
            elif isinstance(arg, ast.JoinedStr):
                # f"run.record.{purpose}": the literal parts, with a wildcard for each value
                out.append((path.name, "".join(v.value if isinstance(v, ast.Constant) else "*" for v in arg.values)))
            else:
                out.append((path.name, f"<not a literal: {ast.unparse(arg)}>"))
    return out


def test_every_action_passed_to_append_event_is_registered_with_a_label():
    found = _action_codes_in_source()
    assert len(found) >= 25  # the scan really sees the callers (accounts, records, instruments, recall...)
    for file, code in found:
        matching = [a for a in records.ACTIONS.values() if fnmatch.fnmatchcase(a.code, code)]
        assert matching, f"{file}: audit action {code!r} is not registered in stockroom.records.audit"
        assert all(a.label.strip() and a.label != a.code for a in matching), code


def test_append_event_refuses_an_unregistered_action(database):
    with pytest.raises(records.UnregisteredAction, match="batch.destroy"):
        records.append_event(database, "tester", "batch.destroy")
    assert database.execute("SELECT count(*) FROM events").fetchone()[0] == 0


def test_record_row_refuses_an_action_registered_for_another_table(database):
    with pytest.raises(records.UnregisteredAction, match="withdrawals"):
        records.record_row(
            database,
            "withdrawals",
            {"batch_id": 1, "withdrawn_on": "2026-01-01", "reason": "x", "recorded_at": "t", "recorded_by": "a"},
            actor="a",
            action_code="batch.register",
        )
    assert database.execute("SELECT count(*) FROM withdrawals").fetchone()[0] == 0


def test_the_audit_page_words_come_from_the_registry():
    from stockroom.web.formatting import action_label

    assert action_label("batch.release") == records.ACTIONS["batch.release"].label == "released a batch"
    assert action_label("no.such.code") == "no.such.code"  # an old, unknown code reads as it is


def test_every_table_checked_for_unaudited_rows_exists(database):
    tables = set(database.table_names())
    for a in records.ACTIONS.values():
        if a.records:
            assert a.records in tables, a.code
