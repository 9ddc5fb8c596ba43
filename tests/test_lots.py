"""Registering primary-standard lots through the form, and the lot list's in-date / expired states.

The drying rules checked here are common practice in prep rooms (borax decahydrate loses water of
crystallization from about 60 °C, so it is never oven-dried; sodium carbonate is dried at 270–300 °C);
the catalogue marks them so. Percent to mass fraction is plain arithmetic (99.98 % = 0.9998).
"""

from __future__ import annotations

import datetime as dt
import re
from html import escape, unescape

import pytest
from formposts import count, error_beside

from stockroom import db as dbmod
from stockroom import records


def today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's lab time zone is UTC


def days(n: int) -> str:
    return (today() + dt.timedelta(days=n)).isoformat()


def good_lot(**changes):
    form = {
        "substance": "KHP",
        "supplier": "Invented Reagents Ltd",
        "supplier_lot": "IR-KHP-7781 (invented)",
        "assay_pct": "99.98",
        "assay_u_pct": "0.02",
        "assay_k": "2",
        "expires_on": days(400),
        "received_on": days(-20),
        "dried_on": days(-2),
        "dried_at_c": "120",
        "storage_note": "",
    }
    form.update(changes)
    return form


def post(client, form_token, data):
    data = dict(data)
    data["csrf_token"] = form_token(client, "/")
    return client.post("/lots/new", data=data)


def lots(app):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return records.list_lots(conn)
    finally:
        conn.close()


@pytest.fixture
def staff(signed_in_client):
    return signed_in_client("staff")


def test_register_a_dried_lot(app, staff, form_token):
    resp = post(staff, form_token, good_lot())
    assert resp.status_code == 303
    (lot,) = lots(app)
    assert resp.headers["Location"] == "/lots/STD-KHP-001"
    assert lot["substance"] == "KHP" and lot["code"] == "STD-KHP-001"
    assert lot["assay"] == pytest.approx(0.9998) and lot["assay_expanded_u"] == pytest.approx(0.0002)
    assert lot["assay_k"] == 2 and lot["dried_at_c"] == 120 and lot["dried_on"] == days(-2)
    assert lot["recorded_by"] == "staff-user"
    page = unescape(staff.get(resp.headers["Location"]).get_data(as_text=True))
    assert "Registered standard lot STD-KHP-001 (potassium hydrogen phthalate)" in page
    # U = 0.020 % to two significant figures, the assay to the same place (JCGM 100:2008, 7.2.6).
    assert "Assay (w/w)</dt><dd>99.980 ± 0.020 % (k = 2)" in page
    assert "notice-warning" not in page
    events = [dict(e) for e in _events(app) if e["action"] == "lot.register"]
    assert len(events) == 1 and events[0]["actor"] == "staff-user"


def _events(app):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return dbmod.query(conn, "SELECT * FROM events ORDER BY id")
    finally:
        conn.close()


def test_borax_dried_at_105_is_refused_with_the_reason(app, staff, form_token):
    resp = post(staff, form_token, good_lot(substance="borax", dried_at_c="105"))
    assert resp.status_code == 422
    message = error_beside(resp.get_data(as_text=True), "dried_at_c")
    assert message.startswith("refused: sodium tetraborate decahydrate must not be oven-dried (recorded 105 °C)")
    assert "loses water of crystallization from about 60 °C" in message
    assert count(app, "standard_lots") == 0


def test_borax_kept_at_constant_humidity_is_registered_without_a_warning(app, staff, form_token):
    resp = post(
        staff,
        form_token,
        good_lot(
            substance="borax", dried_on="", dried_at_c="", storage_note="constant-humidity jar over saturated NaCl and sucrose"
        ),
    )
    assert resp.status_code == 303
    page = staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert "notice-warning" not in page and "not oven-dried" in page
    assert lots(app)[0]["dried_at_c"] is None


def test_carbonate_dried_too_cool_is_refused(app, staff, form_token):
    resp = post(staff, form_token, good_lot(substance="Na2CO3", dried_at_c="105"))
    assert resp.status_code == 422
    assert "below the 270 °C the rule asks" in error_beside(resp.get_data(as_text=True), "dried_at_c")
    assert count(app, "standard_lots") == 0


def test_khp_without_a_drying_record_is_registered_with_a_warning(app, staff, form_token):
    resp = post(staff, form_token, good_lot(dried_on="", dried_at_c="", storage_note="desiccator, silica gel"))
    assert resp.status_code == 303
    page = unescape(staff.get(resp.headers["Location"]).get_data(as_text=True))
    assert "notice-warning" in page
    assert "no drying is recorded for this lot of potassium hydrogen phthalate" in page
    assert count(app, "standard_lots") == 1


@pytest.mark.parametrize(
    ("changes", "field", "message"),
    [
        ({"assay_pct": "0.9998"}, "assay_pct", "is in percent: 0.9998 looks like a mass fraction; for 99.98 % type 99.98"),
        ({"assay_pct": "85"}, "assay_pct", "must be greater than 90 % and at most 100.01 %"),
        ({"assay_pct": "100.5"}, "assay_pct", "must be greater than 90 % and at most 100.01 %"),
        ({"assay_pct": "99,9,8"}, "assay_pct", "has more than one comma"),
        ({"assay_u_pct": "abc"}, "assay_u_pct", "must be a plain decimal number"),
        ({"assay_u_pct": "-0.1"}, "assay_u_pct", "must be between 0 and 2 % w/w"),
        ({"assay_k": "0"}, "assay_k", "must be between 1 and 5"),
        ({"expires_on": "31/12/2027"}, "expires_on", "is not a date; write it as YYYY-MM-DD"),
        ({"substance": "table salt"}, "substance", "is not a primary standard stockroom knows"),
        ({"supplier_lot": ""}, "supplier_lot", "is required"),
        ({"dried_on": ""}, "dried_on", "give the date it was dried with the temperature"),
        ({"dried_at_c": ""}, "dried_at_c", "give the oven temperature with the date it was dried"),
        ({"dried_on": "", "dried_at_c": ""}, "storage_note", "record either the drying (date and temperature) or how"),
        ({"dried_on": days(1)}, "dried_on", f"cannot be later than {today().isoformat()}"),
        ({"received_on": days(-1), "dried_on": days(-3)}, "dried_on", f"cannot be earlier than {days(-1)}"),
    ],
)
def test_bad_lot_input_is_shown_beside_the_field_and_nothing_is_stored(app, staff, form_token, changes, field, message):
    before = count(app, "events")
    resp = post(staff, form_token, good_lot(**changes))
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert message in (error_beside(html, field) or "")
    assert f'value="{escape("IR-KHP-7781 (invented)")}"' in html or field == "supplier_lot"  # typed text stays
    assert count(app, "standard_lots") == 0 and count(app, "events") == before


def test_anonymous_post_goes_to_sign_in_and_instructor_is_refused(app, client, signed_in_client, form_token):
    resp = client.post("/lots/new", data=dict(good_lot(), csrf_token=form_token(client, "/sign-in")))
    assert resp.status_code == 303 and resp.headers["Location"].startswith("/sign-in")
    instructor = signed_in_client("instructor")
    resp = post(instructor, form_token, good_lot())
    assert resp.status_code == 403
    assert "does not allow you to register a primary-standard lot" in resp.get_data(as_text=True)
    assert count(app, "standard_lots") == 0


def _lot(conn, substance, expires_on, **extra):
    values = {
        "substance": substance,
        "supplier": "Invented Supplies",
        "supplier_lot": "X-1 (invented)",
        "assay": 0.9995,
        "assay_expanded_u": 0.0005,
        "assay_k": 2,
        "expires_on": expires_on,
    }
    values.update(extra)
    return records.create_lot(conn, values, "setup")


def test_list_shows_in_date_and_expired_lots_with_their_drying(app, client):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        old = _lot(conn, "KHP", days(-1), dried_on=days(-100), dried_at_c=110)
        last_day = _lot(conn, "TRIS", days(0), dried_on=days(-3), dried_at_c=103)
        fresh = _lot(conn, "Na2CO3", days(200), dried_on=days(-1), dried_at_c=280)
        bare = _lot(conn, "KHP", days(200))  # no drying and no storage note: registered by another route
    finally:
        conn.close()
    html = unescape(client.get("/lots/").get_data(as_text=True))  # a read: open to anyone on the lab network
    rows = {
        m.group(1): m.group(2)
        for m in re.finditer(r'<tr class="lot-\w+">\s*<td[^>]*><a[^>]*>([^<]+)</a></td>(.*?)</tr>', html, re.S)
    }
    assert set(rows) == {old["code"], last_day["code"], fresh["code"], bare["code"]}
    assert "expired 1 day ago" in rows[old["code"]]
    # A lot is usable through its expiry date (workflow.check_lot_usable refuses it from the day after).
    assert "in date, expires in 0 days" in rows[last_day["code"]]
    assert re.search(r'lot-chip-in_date">in date<', rows[fresh["code"]])
    assert f"dried {days(-1)} at 280 °C" in rows[fresh["code"]]
    assert "no drying is recorded" in rows[bare["code"]]
    assert "99.950 ± 0.050 % (k = 2)" in rows[fresh["code"]]
    assert ">Register a lot</a>" not in html  # anonymous readers get no write link


def test_lot_page_and_missing_lot(app, client):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        lot = _lot(conn, "borax", days(30), storage_note="constant-humidity jar")
    finally:
        conn.close()
    html = unescape(client.get(f"/lots/{lot['code']}").get_data(as_text=True))
    assert "sodium tetraborate decahydrate" in html and "constant-humidity jar" in html
    assert "Never oven-dry" in html
    assert client.get("/lots/999").status_code == 404
    assert client.get("/lots/STD-NONE-999").status_code == 404


def test_a_lot_is_addressed_by_its_code_and_an_old_number_moves_there(app, client):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        lot = _lot(conn, "borax", days(30), storage_note="constant-humidity jar")
    finally:
        conn.close()
    moved = client.get(f"/lots/{lot['id']}")
    assert moved.status_code == 301 and moved.headers["Location"] == f"/lots/{lot['code']}"
    listing = client.get("/lots/").get_data(as_text=True)
    assert f'href="/lots/{lot["code"]}"' in listing
    assert f'href="/lots/{lot["id"]}"' not in listing


def test_run_and_batch_pages_link_the_lot_by_its_code(app, signed_in_client, form_token):
    from formposts import post as post_form

    conn = dbmod.connect(app.config["DATABASE"])
    try:
        lot = _lot(conn, "KHP", days(300), dried_on=days(0), dried_at_c=120)
        batch = records.create_batch(
            conn,
            {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 5, "prepared_on": days(-1), "prepared_by": "T"},
            "setup",
        )
    finally:
        conn.close()
    staff = signed_in_client("staff")
    form = {
        "purpose": "certify",
        "standard_lot_id": str(lot["id"]),
        "performed_on": days(0),
        "analyst": "T",
        "burette_capacity_ml": "50.0",
        "action": "record",
    }
    for i, (g, t, a, b) in enumerate(
        [
            ("12.4581", "11.6402", "0.12", "40.21"),
            ("12.0117", "11.1891", "0.40", "40.73"),
            ("11.9012", "11.0759", "0.05", "40.50"),
        ],
        1,
    ):
        form |= {f"r{i}_gross_g": g, f"r{i}_tare_g": t, f"r{i}_initial_ml": a, f"r{i}_final_ml": b}
    resp = post_form(staff, form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303
    link = f'href="/lots/{lot["code"]}"'
    assert link in staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert link in staff.get(f"/batches/{batch['code']}").get_data(as_text=True)
