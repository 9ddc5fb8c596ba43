"""The audit trail: the page, corrections with before/after, and `stockroom verify` catching tampering."""

from __future__ import annotations

import datetime as dt
import sqlite3

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
    conn.execute("UPDATE events SET detail = replace(detail, '\"k\":2.0', '\"k\":1.0') WHERE id = ?", [target])
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1
    assert f"broken at entry {target}" in result.output


def test_verify_reports_a_deleted_middle_entry(demo_db):
    conn = _raw(demo_db)
    conn.execute("DROP TRIGGER events_no_delete")
    conn.execute("DELETE FROM events WHERE id = 10")
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1 and "broken at entry 10" in result.output


def test_verify_reports_the_newest_entry_removed(demo_db):
    """Removing the last entry leaves the chain consistent; the record left without its entry gives it away."""
    conn = _raw(demo_db)
    conn.execute("DROP TRIGGER events_no_delete")
    last = conn.execute("SELECT id, entity, entity_id FROM events ORDER BY id DESC LIMIT 1").fetchone()
    conn.execute("DELETE FROM events WHERE id = ?", [last[0]])
    conn.close()
    result = verify(demo_db)
    assert result.exit_code == 1
    assert f"{last[1]} row {last[2]} has no audit entry" in result.output


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
