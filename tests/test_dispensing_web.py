"""Dispensing at every door: the batch page's form, the JSON API, the CSV export, the container page and label."""

from __future__ import annotations

import csv
import datetime as dt
import io

import pytest
from formposts import count, post
from pypdf import PdfReader
from stock_world import released_batch

from stockroom import accounts, records, tokens
from stockroom import db as dbmod

TODAY = dt.date.today()


@pytest.fixture
def batch(app, database):
    row, _ = released_batch(database, app.config, prepared_on=TODAY - dt.timedelta(days=10), volume_l=5.0)
    return row


def _token(app, username, role):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        user = accounts.user_by_username(conn, username) or accounts.create_user(
            conn, username, username.title(), role, "token-Test-8c1f2e", "t"
        )
        return {"Authorization": f"Bearer {tokens.create(conn, user.id, user.username, 'test')[1]}"}
    finally:
        conn.close()


def _rows(app, sql, params=()):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return dbmod.query(conn, sql, params)
    finally:
        conn.close()


STORED = ("batch_id", "kind", "volume_l", "filled_on", "expires_on", "room", "course", "section", "notes", "recorded_by")


def test_form_and_json_store_the_same_rows(app, batch, signed_in_client, form_token, quick_password_hashing):
    staff = signed_in_client("staff")
    day = (TODAY - dt.timedelta(days=2)).isoformat()
    form = {
        "volume_l": "0,75",
        "dispensed_on": day,
        "container": "bench bottle",
        "course": "CHM 110",
        "section": "B",
        "room": "214",
        "notes": "",
    }
    resp = post(staff, form_token, f"/batches/{batch['code']}/dispense", form)
    assert resp.status_code == 303 and resp.headers["Location"].endswith(f"/containers/{batch['code']}-C01")
    body = {
        "volume_l": 0.75,
        "dispensed_on": day,
        "container": "bench bottle",
        "destination": {"room": "214", "course": "CHM 110", "section": "B"},
    }
    api = app.test_client().post(
        f"/api/v1/batches/{batch['code']}/dispensings", json=body, headers=_token(app, "staff-user", "staff")
    )
    assert api.status_code == 201
    got = api.get_json()
    assert (got["code"], got["volume_remaining_l"]) == (f"{batch['code']}-C02", 3.5)  # 5 - 0.75 - 0.75 L
    first, second = _rows(app, "SELECT * FROM containers ORDER BY id")
    assert {k: first[k] for k in STORED} == {k: second[k] for k in STORED}
    assert got["container_id"] == second["id"]


def test_batch_page_shows_where_it_went_and_the_json_carries_it(app, batch, signed_in_client, form_token):
    staff = signed_in_client("staff")
    post(
        staff,
        form_token,
        f"/batches/{batch['code']}/dispense",
        {
            "volume_l": "1.5",
            "dispensed_on": TODAY.isoformat(),
            "container": "burette reservoir",
            "course": "CHM 110",
            "section": "A",
        },
    )
    post(
        staff,
        form_token,
        f"/batches/{batch['code']}/volume-loss",
        {"kind": "loss", "volume_l": "0.25", "occurred_on": TODAY.isoformat(), "reason": "spilt at the carboy tap"},
    )
    page = staff.get(f"/batches/{batch['code']}").get_data(as_text=True)
    # 5.0 - 1.5 - 0.25 = 3.25 L
    assert '<strong id="volume-remaining">3.250 L</strong> remaining of 5.0 L registered' in page
    assert "CHM 110 · section A" in page and "spilt at the carboy tap" in page
    data = app.test_client().get(f"/api/v1/batches/{batch['code']}").get_json()
    assert data["volume_remaining_l"] == 3.25
    assert [(c["code"], c["volume_l"], c["status"], c["destination"]["course"]) for c in data["containers"]] == [
        (f"{batch['code']}-C01", 1.5, "in_use", "CHM 110")
    ]


def test_form_refusals_name_the_field_and_store_nothing(app, batch, signed_in_client, form_token):
    staff = signed_in_client("staff")
    before = count(app, "containers")
    resp = post(
        staff,
        form_token,
        f"/batches/{batch['code']}/dispense",
        {"volume_l": "6", "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "course": "CHM 110"},
    )
    page = resp.get_data(as_text=True)
    assert resp.status_code == 422
    assert '<a href="#f-volume_l">Volume dispensed</a>: 6 L is more than remains in the batch (5.000 L left)' in page
    assert count(app, "containers") == before
    resp = post(
        staff,
        form_token,
        f"/batches/{batch['code']}/volume-loss",
        {"kind": "loss", "volume_l": "1", "occurred_on": TODAY.isoformat(), "reason": ""},
    )
    assert resp.status_code == 422 and '<a href="#f-reason">Reason</a>: is required' in resp.get_data(as_text=True)
    assert count(app, "batch_volume_losses") == 0


def test_json_refusals(app, database, batch, quick_password_hashing):
    client = app.test_client()
    url = f"/api/v1/batches/{batch['code']}/dispensings"
    body = {"volume_l": 1, "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "destination": "CHM 110"}
    assert client.post(url, json=body).status_code == 401
    assert client.post(url, json=body, headers=_token(app, "ins", "instructor")).status_code == 403
    staff = _token(app, "ana", "staff")
    too_much = client.post(url, json=dict(body, volume_l=5.5), headers=staff)
    assert too_much.status_code == 422
    assert too_much.get_json()["errors"] == [
        {"field": "volume_l", "message": "5.5 L is more than remains in the batch (5.000 L left)"}
    ]
    bad = client.post(url, json=dict(body, container="beaker", destination={"section": "B"}), headers=staff)
    assert {e["field"] for e in bad.get_json()["errors"]} == {"container", "destination.course"}
    awaiting = records.create_batch(
        database,
        {"reagent": "HCl", "nominal_molarity": 0.1, "volume_l": 10, "prepared_on": TODAY.isoformat(), "prepared_by": "t"},
        "t",
    )
    refused = client.post(f"/api/v1/batches/{awaiting['code']}/dispensings", json=body, headers=staff)
    assert refused.status_code == 409 and "not released" in refused.get_json()["errors"][0]["message"]
    assert count(app, "containers") == 0


def test_csv_container_page_dispose_and_label(app, batch, signed_in_client, form_token):
    staff = signed_in_client("staff")
    post(
        staff,
        form_token,
        f"/batches/{batch['code']}/dispense",
        {
            "volume_l": "0.5",
            "dispensed_on": TODAY.isoformat(),
            "container": "bench bottle",
            "course": "=HYPERLINK(1)",
            "section": "C",
            "room": "101",
        },
    )
    code = f"{batch['code']}-C01"
    text = staff.get(f"/batches/{batch['code']}/dispensings.csv").get_data(as_text=True)
    rows = list(csv.DictReader(io.StringIO("\n".join(line for line in text.splitlines() if not line.startswith('"#')))))
    assert [(r["container"], r["volume_l"], r["course"], r["status"]) for r in rows] == [
        (code, "0.5", "'=HYPERLINK(1)", "In use")
    ]  # OWASP CSV injection: defused
    page = staff.get(f"/containers/{code}").get_data(as_text=True)
    assert "In use" in page and "0.500 L" in page and "mol/L (k = " in page
    pdf = staff.get(f"/containers/{code}/label.pdf")
    assert pdf.status_code == 200 and pdf.mimetype == "application/pdf"
    words = PdfReader(io.BytesIO(pdf.data)).pages[0].extract_text()
    assert code in words and f"Filled {TODAY.isoformat()}" in words and "section C" in words
    resp = post(staff, form_token, f"/containers/{code}/dispose", {"disposed_on": TODAY.isoformat(), "reason": "dropped"})
    assert resp.status_code == 303
    assert "Taken out of use" in staff.get(f"/containers/{code}").get_data(as_text=True)
    again = post(staff, form_token, f"/containers/{code}/dispose", {"disposed_on": TODAY.isoformat(), "reason": "again"})
    assert again.status_code == 409
    words = PdfReader(io.BytesIO(staff.get(f"/containers/{code}/label.pdf").data)).pages[0].extract_text()
    assert "NOT FOR USE" in words


def test_policy_container_shelf_life_shortens_the_container_expiry(app, batch, signed_in_client, form_token):
    admin = signed_in_client("admin")
    form = {
        "reagent": "NaOH",
        "nominal_molarities": "0.1, 0.5, 1",
        "shelf_life_days": "90",
        "recheck_interval_days": "14",
        "tolerance_pct": "0.5",
        "max_rsd_pct": "0.2",
        "min_replicates": "3",
        "container_shelf_life_days": "120",
        "effective_from": (TODAY - dt.timedelta(days=30)).isoformat(),
        "reason": "bench bottles take up CO2",
    }
    resp = post(admin, form_token, "/admin/policy", form)
    assert resp.status_code == 422 and "a container never outlasts its batch" in resp.get_data(as_text=True)
    assert post(admin, form_token, "/admin/policy", dict(form, container_shelf_life_days="7")).status_code == 303
    assert "7 days from filling" in admin.get("/admin/policy").get_data(as_text=True)
    post(
        admin,
        form_token,
        f"/batches/{batch['code']}/dispense",
        {"volume_l": "0.5", "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "course": "CHM 110"},
    )
    (row,) = _rows(app, "SELECT expires_on FROM containers")
    assert row["expires_on"] == (TODAY + dt.timedelta(days=7)).isoformat()


def test_batch_page_offers_no_dispensing_from_a_withdrawn_batch(app, database, batch, signed_in_client):
    records.withdraw_batch(database, batch["id"], TODAY, "cloudy", "test")
    page = signed_in_client("staff").get(f"/batches/{batch['code']}").get_data(as_text=True)
    assert "Nothing may be dispensed: the batch is withdrawn on" in page
    assert 'class="dispense-form"' not in page


def test_dispense_page_says_why_not_and_a_conflict_is_409(app, database, batch, signed_in_client, form_token):
    records.withdraw_batch(database, batch["id"], TODAY - dt.timedelta(days=1), "cloudy", "test")
    staff = signed_in_client("staff")
    assert "Today nothing may be dispensed: the batch is withdrawn on" in staff.get(
        f"/batches/{batch['code']}/dispense"
    ).get_data(as_text=True)
    form = {"volume_l": "1", "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "course": "CHM 110"}
    resp = post(staff, form_token, f"/batches/{batch['code']}/dispense", form)
    assert resp.status_code == 409 and "Nothing dispensed: the batch is withdrawn on" in resp.get_data(as_text=True)
    # Before the withdrawal it was in service: a fill that day is recorded.
    earlier = dict(form, dispensed_on=(TODAY - dt.timedelta(days=2)).isoformat())
    assert post(staff, form_token, f"/batches/{batch['code']}/dispense", earlier).status_code == 303
