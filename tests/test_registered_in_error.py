"""A batch registered by mistake is marked "registered in error" as a new record: distinct from withdrawn,
never standardized, released, printed or offered for a lab day afterwards."""

from __future__ import annotations

import datetime as dt
import re
import sqlite3

import pytest
from formposts import count, post

from stockroom import db as dbmod
from stockroom import records
from stockroom.policy import BatchFacts, ReleaseFact, Status, known_by, release_in_force, status_on

TODAY = dt.datetime.now(dt.UTC).date()  # the test app's lab time zone is UTC

# Four replicates of about 0.1 mol/L NaOH against KHP (the same as tests/test_runs.py): g, g, mL, mL.
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def test_status_is_registered_in_error_whatever_the_day_once_known():
    day = dt.date(2026, 3, 1)
    release = ReleaseFact(1, day, day + dt.timedelta(days=90), 0.1, 0.0001, 0.0002, 2.0, 14, 0.005)
    facts = BatchFacts(prepared_on=day, releases=(release,), registered_in_error_on=day + dt.timedelta(days=10))
    for on in (day, day + dt.timedelta(days=5), day + dt.timedelta(days=20)):
        report = status_on(facts, on)
        assert report.status is Status.REGISTERED_IN_ERROR and report.release is None
        assert report.status.label == "Registered in error" and "never in use" in report.reasons[0]
        assert release_in_force(facts, on) is None
    # As the record stood before the mark, the batch was in service (the mark is dated).
    before = known_by(facts, day + dt.timedelta(days=5))
    assert status_on(before, day + dt.timedelta(days=5)).status is Status.IN_SERVICE
    assert Status.REGISTERED_IN_ERROR.value != Status.WITHDRAWN.value


@pytest.fixture
def world(app):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        lot = records.create_lot(
            conn,
            {
                "substance": "KHP",
                "assay": 1.0,
                "assay_expanded_u": 0.0002,
                "assay_k": 2,
                "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
                "dried_on": TODAY.isoformat(),
                "dried_at_c": 120,
            },
            "setup",
        )
        batches = [
            records.create_batch(
                conn,
                {
                    "reagent": "NaOH",
                    "nominal_molarity": 0.1,
                    "volume_l": 20,
                    "prepared_on": (TODAY - dt.timedelta(days=2)).isoformat(),
                    "prepared_by": "Test Person",
                    "water_grade": "CO2-free",
                },
                "setup",
            )
            for _ in range(2)
        ]
    finally:
        conn.close()
    return {"lot": lot, "mistake": batches[0], "real": batches[1]}


def _run_form(world):
    form = {
        "purpose": "certify",
        "standard_lot_id": str(world["lot"]["id"]),
        "performed_on": TODAY.isoformat(),
        "analyst": "Test Person",
        "burette_capacity_ml": "50.0",
        "action": "record",
    }
    for i, (gross, tare, initial, final) in enumerate(GOOD, start=1):
        form |= {f"r{i}_gross_g": gross, f"r{i}_tare_g": tare, f"r{i}_initial_ml": initial, f"r{i}_final_ml": final}
    return form


def test_marking_needs_a_reason_then_the_batch_reads_registered_in_error_everywhere(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = world["mistake"]["code"]
    url = f"/batches/{code}/registered-in-error"
    # A run recorded before the mark: it cannot release the batch afterwards.
    recorded = post(staff, form_token, f"/batches/{code}/runs/new", _run_form(world))
    assert recorded.status_code == 303
    run_id = int(re.search(r"/runs/(\d+)", recorded.headers["Location"]).group(1))

    before = count(app, "events"), count(app, "registrations_in_error")
    refused = post(staff, form_token, url, {"reason": "  "})
    assert refused.status_code == 422
    page = refused.get_data(as_text=True)
    assert "What was registered by mistake</a>: is required" in page and "reason:" not in page
    assert (count(app, "events"), count(app, "registrations_in_error")) == before

    done = post(staff, form_token, url, {"reason": "entered twice: the same carboy as the next batch"})
    assert done.status_code == 303 and done.headers["Location"] == f"/batches/{code}"
    assert count(app, "registrations_in_error") == 1
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        event = conn.execute("SELECT action, actor, reason FROM events ORDER BY id DESC LIMIT 1").fetchone()
        assert tuple(event) == ("batch.registered_in_error", "staff-user", "entered twice: the same carboy as the next batch")
        with pytest.raises(sqlite3.DatabaseError, match="append-only"):
            conn.execute("UPDATE registrations_in_error SET reason = 'changed'")
        with pytest.raises(sqlite3.DatabaseError, match="append-only"):
            conn.execute("DELETE FROM registrations_in_error")
    finally:
        conn.close()

    shown = staff.get(f"/batches/{code}").get_data(as_text=True)
    assert "Registered in error</span>" in shown and "entered twice: the same carboy as the next batch" in shown
    assert "Withdrawn" not in shown and f"/batches/{code}/runs/new" not in shown
    assert staff.get(f"/api/v1/batches/{code}").get_json()["status"] == "registered_in_error"
    listed = staff.get("/batches/?status=registered_in_error").get_data(as_text=True)
    assert code in listed and world["real"]["code"] not in listed
    assert '<option value="registered_in_error"' in listed and "Registered in error</option>" in listed
    assert code not in staff.get("/batches/?status=awaiting").get_data(as_text=True)

    # Never standardized, released, printed, withdrawn or marked again afterwards.
    assert staff.get(f"/batches/{code}/runs/new").status_code == 409
    assert post(staff, form_token, f"/batches/{code}/runs/new", _run_form(world)).status_code == 409
    accept = post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"})
    assert accept.status_code == 409 and "registered in error" in accept.get_data(as_text=True)
    assert (
        post(staff, form_token, f"/batches/{code}/withdraw", {"withdrawn_on": TODAY.isoformat(), "reason": "x"}).status_code
        == 409
    )
    assert post(staff, form_token, url, {"reason": "again"}).status_code == 409
    assert post(staff, form_token, f"/batches/{code}/labels", {"layout": "bottle", "copies": "1"}).status_code == 422
    assert count(app, "releases") == 0 and count(app, "withdrawals") == 0 and count(app, "label_prints") == 0
    assert count(app, "registrations_in_error") == 1


def test_a_released_batch_marked_in_error_is_not_offered_for_a_lab_day(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = world["mistake"]["code"]
    recorded = post(staff, form_token, f"/batches/{code}/runs/new", _run_form(world))
    run_id = int(re.search(r"/runs/(\d+)", recorded.headers["Location"]).group(1))
    assert post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"}).status_code == 303
    instructor = signed_in_client("instructor")
    ask = f"/api/v1/lab-day?date={TODAY.isoformat()}&titrant=NaOH"
    assert [b["batch_id"] for b in instructor.get(ask).get_json()["batches"]] == [code]
    page = staff.get(f"/batches/{code}/registered-in-error").get_data(as_text=True)
    assert "withdraw it</a> instead" in page  # a batch that was released: withdrawal is offered first
    assert post(staff, form_token, f"/batches/{code}/registered-in-error", {"reason": "wrong reagent entered"}).status_code == 303
    assert instructor.get(ask).get_json()["batches"] == []
    page = instructor.get(f"/lab-day?date={TODAY.isoformat()}&titrant=NaOH").get_data(as_text=True)
    assert f"<p>{code} was registered in error.</p>" in page  # the page says why nothing is offered


def test_a_withdrawn_batch_keeps_its_withdrawal(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = world["real"]["code"]
    assert (
        post(staff, form_token, f"/batches/{code}/withdraw", {"withdrawn_on": TODAY.isoformat(), "reason": "spilt"}).status_code
        == 303
    )
    refused = post(staff, form_token, f"/batches/{code}/registered-in-error", {"reason": "mistake"})
    assert refused.status_code == 409 and "its withdrawal stands" in refused.get_data(as_text=True)
    assert staff.get(f"/api/v1/batches/{code}").get_json()["status"] == "withdrawn"
