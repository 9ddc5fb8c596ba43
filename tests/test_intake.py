"""Registering a batch, the preparation and adjustment calculators, and withdrawing a batch, through the forms.

External checks: molar masses from the periodictable package (PyPI; CIAAW standard atomic weights); the
amounts are re-derived by arithmetic written out here (c·V·M/(w·ρ) for a dilution, c·V·M/w for a solid,
and the mass balance c·V + c_conc·v = c_target·(V + v) for an adjustment, volume contraction neglected).
"""

from __future__ import annotations

import datetime as dt
import re
from html import escape, unescape

import periodictable
import pytest
from formposts import count, error_beside, post

from stockroom import db as dbmod
from stockroom import policy, readmodel, records

M_HCL = periodictable.formula("HCl").mass  # g/mol, periodictable (CIAAW)
M_NAOH = periodictable.formula("NaOH").mass


def today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's lab time zone is UTC


def good_form(**changes):
    form = {
        "reagent": "HCl",
        "nominal_molarity": "0.1",
        "volume_l": "20",
        "source_form": "liquid",
        "concentrate_lot": "INV-HCL-0042 (invented)",
        "concentrate_assay_pct": "37",
        "concentrate_density_g_ml": "1.19",
        "prepared_on": today().isoformat(),
        "prepared_by": "A. Tester",
        "water_grade": "deionized, Type II",
        "container": "20 L HDPE carboy",
        "notes": "",
        "action": "register",
    }
    form.update(changes)
    return form


def rows(app, sql, params=()):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return dbmod.query(conn, sql, params)
    finally:
        conn.close()


def kept(html: str, field: str, value: str) -> bool:
    return re.search(rf'name="{re.escape(field)}" type="[a-z]+" value="{re.escape(escape(value))}"', html) is not None


@pytest.fixture
def staff(signed_in_client):
    return signed_in_client("staff")


# ---------------------------------------------------------------------------------------------- register


def test_form_offers_titrants_and_fills_in_who_and_when(staff):
    html = staff.get("/batches/new").get_data(as_text=True)
    assert '<option value="HCl"' in html and '<option value="NaOH"' in html
    assert kept(html, "prepared_by", "Staff-User")  # the signed-in user's display name
    assert kept(html, "prepared_on", today().isoformat())
    assert "Ba(OH)2" in html and "no reagent policy" in html  # listed as not registrable, and why
    assert 'list="nominal-options"' in html and '<option value="0.05">' in html  # H2SO4's 0.05 among the usual


def test_register_batch_gives_readable_id_awaiting_and_an_audit_event(app, staff, form_token):
    before = count(app, "events")
    resp = post(staff, form_token, "/batches/new", good_form())
    assert resp.status_code == 303
    code = resp.headers["Location"].rsplit("/", 1)[1]
    assert code == f"HCL-{today():%y%m}-01"
    page = staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert f"Registered batch {code}" in unescape(page)
    assert "Awaiting standardization" in page
    (batch,) = rows(app, "SELECT * FROM batches")
    assert batch["concentrate_assay_w_w"] == pytest.approx(0.37)  # 37 % typed, stored as a mass fraction
    assert batch["concentrate_density_g_ml"] == 1.19 and batch["volume_l"] == 20.0
    assert batch["recorded_by"] == "staff-user" and batch["prepared_by"] == "A. Tester"
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        report = policy.status_on(readmodel.batch_facts(conn, batch["id"]), today())
    finally:
        conn.close()
    assert report.status is policy.Status.AWAITING
    events = rows(app, "SELECT * FROM events WHERE id > ? AND action = 'batch.register'", [before])
    assert len(events) == 1 and events[0]["actor"] == "staff-user" and events[0]["batch_id"] == batch["id"]
    # A second HCl batch that month gets the next number.
    again = post(staff, form_token, "/batches/new", good_form())
    assert again.headers["Location"].endswith(f"HCL-{today():%y%m}-02")


@pytest.mark.parametrize(
    ("field", "typed", "message"),
    [
        ("volume_l", "twenty", "must be a plain decimal number such as 0.25"),
        ("nominal_molarity", "0,1,2", "has more than one comma"),
        ("volume_l", "1,234.5", "mixes a comma and a point"),
        ("volume_l", "2,500", "could be 2.500 or 2500"),
        ("volume_l", "-5", "must be between 0.1 and 50 L"),
        ("volume_l", "80", "must be between 0.1 and 50 L"),
        ("nominal_molarity", "-0.1", "must be greater than 0 mol/L and at most 2 mol/L"),
        ("reagent", "NaCl", "'NaCl' is not a titrant stockroom knows"),
        ("concentrate_assay_pct", "137", "must be greater than 1 % and at most 100 %"),
        ("concentrate_assay_pct", "0.37", "is in percent: 0.37 looks like a mass fraction; for 37 % type 37"),
        ("concentrate_density_g_ml", "1190", "must be between 0.8 and 2.5 g/mL"),
        ("prepared_by", "", "is required"),
        ("prepared_on", "12/01/2026", "is not a date; write it as YYYY-MM-DD"),
    ],
)
def test_bad_input_is_shown_beside_the_field_and_nothing_is_stored(app, staff, form_token, field, typed, message):
    before = (count(app, "batches"), count(app, "events"))
    resp = post(staff, form_token, "/batches/new", good_form(**{field: typed}))
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert message in (error_beside(html, field) or "")
    assert "Nothing was saved" in html
    if field not in ("reagent", "prepared_by"):
        assert kept(html, field, typed)
    assert kept(html, "concentrate_lot", "INV-HCL-0042 (invented)")  # the rest of what was typed stays
    assert (count(app, "batches"), count(app, "events")) == before


def test_prepared_in_the_future_is_refused(app, staff, form_token):
    tomorrow = (today() + dt.timedelta(days=1)).isoformat()
    resp = post(staff, form_token, "/batches/new", good_form(prepared_on=tomorrow))
    assert resp.status_code == 422
    assert error_beside(resp.get_data(as_text=True), "prepared_on") == f"cannot be later than {today().isoformat()}"
    assert count(app, "batches") == 0


def test_every_bad_field_is_reported_at_once(app, staff, form_token):
    resp = post(staff, form_token, "/batches/new", good_form(volume_l="0,5,0", concentrate_assay_pct="x", prepared_by=""))
    html = resp.get_data(as_text=True)
    assert resp.status_code == 422 and "3 fields need attention" in html
    for field in ("volume_l", "concentrate_assay_pct", "prepared_by"):
        assert error_beside(html, field)
    assert count(app, "batches") == 0


def test_density_without_assay_and_pellets_for_an_acid_are_refused(app, staff, form_token):
    html = post(staff, form_token, "/batches/new", good_form(concentrate_assay_pct="")).get_data(as_text=True)
    assert "is needed with the density" in error_beside(html, "concentrate_assay_pct")
    resp = post(staff, form_token, "/batches/new", good_form(source_form="solid"))
    assert resp.status_code == 422
    assert "hydrochloric acid is made from a liquid concentrate" in error_beside(resp.get_data(as_text=True), "source_form")
    assert count(app, "batches") == 0


def test_base_without_co2_free_water_is_registered_with_a_warning(app, staff, form_token):
    resp = post(
        staff,
        form_token,
        "/batches/new",
        good_form(reagent="NaOH", concentrate_assay_pct="50", concentrate_density_g_ml="1.52", water_grade="tap"),
    )
    assert resp.status_code == 303
    page = unescape(staff.get(resp.headers["Location"]).get_data(as_text=True))
    assert "notice-warning" in page and "boiled, CO2-free water" in page and "“tap”" in page
    ok = post(
        staff,
        form_token,
        "/batches/new",
        good_form(
            reagent="NaOH", concentrate_assay_pct="50", concentrate_density_g_ml="1.52", water_grade="boiled, CO2-free deionized"
        ),
    )
    assert "notice-warning" not in staff.get(ok.headers["Location"]).get_data(as_text=True)
    assert count(app, "batches") == 2


def test_a_nominal_outside_the_policy_is_recorded_as_typed_with_a_note(app, staff, form_token):
    resp = post(staff, form_token, "/batches/new", good_form(nominal_molarity="0.2"))
    page = staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert "0.2 mol/L is not one of the usual strengths in the HCl policy (0.1, 0.5, 1 mol/L)" in page
    assert rows(app, "SELECT nominal_molarity FROM batches")[0]["nominal_molarity"] == 0.2


def test_anonymous_post_goes_to_sign_in_and_instructor_is_refused(app, client, signed_in_client, form_token):
    resp = client.post("/batches/new", data=dict(good_form(), csrf_token=form_token(client, "/sign-in")))
    assert resp.status_code == 303 and resp.headers["Location"].startswith("/sign-in")
    assert client.get("/batches/new").status_code == 303
    instructor = signed_in_client("instructor")
    resp = post(instructor, form_token, "/batches/new", good_form())
    assert resp.status_code == 403
    assert "does not allow you to register a batch" in resp.get_data(as_text=True)
    assert count(app, "batches") == 0


def test_nav_shows_new_batch_only_to_those_who_may(client, staff, signed_in_client):
    assert ">New batch</a>" in staff.get("/").get_data(as_text=True)
    assert ">New batch</a>" not in signed_in_client("instructor").get("/").get_data(as_text=True)
    anonymous = client.get("/").get_data(as_text=True)
    assert ">New batch</a>" not in anonymous and ">Standard lots</a>" in anonymous


# ------------------------------------------------------------------------------------ preparation plan


def test_work_out_amounts_shows_the_plan_with_cautions_and_stores_nothing(app, staff, form_token):
    resp = post(staff, form_token, "/batches/new", good_form(action="plan"))
    assert resp.status_code == 200
    html = unescape(resp.get_data(as_text=True))
    # Arithmetic check: 20 L · 0.1 mol/L · 36.46 g/mol / (0.37 · 1.19 g/mL · 1000 mL/L) · 1000 mL/L.
    assert 20 * 0.1 * 36.46 / (0.37 * 1.19 * 1000) * 1000 == pytest.approx(165.6, abs=0.05)
    # The same with the molar mass from periodictable, to the four figures the page shows.
    expected_ml = 20 * 0.1 * M_HCL / (0.37 * 1.19)
    assert f"{expected_ml:.1f} mL" == "165.6 mL"
    assert '<span class="plan-value">165.6 mL</span>' in html
    assert f"or weigh {expected_ml * 1.19:.1f} g" in html  # mass = volume · density
    assert "acid to water" in html.lower() and "chemical hygiene plan" in html
    assert "fume hood" in html and "face shield" in html
    assert kept(html, "concentrate_lot", "INV-HCL-0042 (invented)")
    assert count(app, "batches") == 0


def test_work_out_amounts_with_missing_assay_says_so_beside_the_field(app, staff, form_token):
    resp = post(staff, form_token, "/batches/new", good_form(action="plan", concentrate_assay_pct=""))
    assert resp.status_code == 422
    assert error_beside(resp.get_data(as_text=True), "concentrate_assay_pct") == "is required"
    assert count(app, "batches") == 0


def test_plan_api_pellets_for_naoh(client):
    resp = client.post(
        "/api/v1/preparation/plan",
        json={
            "reagent": "NaOH",
            "nominal_molarity": "0.1",
            "volume_l": 20,
            "source_form": "solid",
            "concentrate_assay_pct": "98",
            "water_grade": "deionized",
        },
    )
    assert resp.status_code == 200
    body = resp.get_json()
    # Arithmetic check: 20 L · 0.1 mol/L · M(NaOH) / 0.98 assay (periodictable molar mass).
    assert body["plan"]["concentrate_mass_g"] == pytest.approx(20 * 0.1 * M_NAOH / 0.98, rel=1e-4)
    assert body["plan"]["concentrate_volume_ml"] is None and body["plan"]["form"] == "solid"
    assert body["display"]["figures"][0]["value"] == f"{20 * 0.1 * M_NAOH / 0.98:.2f} g"
    assert any("strongly exothermic" in c for c in body["display"]["cautions"])
    assert any("CO2-free" in w for w in body["warnings"])  # "deionized" is not CO2-free water for a base


def test_plan_api_liquid_matches_the_form(client):
    body = client.post(
        "/api/v1/preparation/plan",
        json={
            "reagent": "HCl",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "concentrate_assay_pct": 37,
            "concentrate_density_g_ml": 1.19,
        },
    ).get_json()
    assert body["plan"]["concentrate_volume_ml"] == pytest.approx(20 * 0.1 * M_HCL / (0.37 * 1.19), rel=1e-4)
    assert body["plan"]["concentrate_molarity_mol_l"] == pytest.approx(1000 * 1.19 * 0.37 / M_HCL, rel=1e-4)
    assert body["warnings"] == []


def test_plan_api_errors_name_the_form_fields(client):
    resp = client.post(
        "/api/v1/preparation/plan",
        json={
            "reagent": "HCl",
            "nominal_molarity": "0,1",
            "volume_l": 20,
            "concentrate_assay_pct": 37,
            "concentrate_density_g_ml": 1.19,
            "colour": "red",
        },
    )
    assert resp.status_code == 422
    fields = {e["field"]: e["message"] for e in resp.get_json()["errors"]}
    assert fields == {
        "nominal_molarity": "use a point, not a comma, for the decimal sign: write 0.1",
        "colour": "is not a field of this request",
    }
    # A target the concentrate cannot reach is reported on the nominal (12.08 mol/L is 37 % HCl's own strength).
    resp = client.post(
        "/api/v1/preparation/plan",
        json={
            "reagent": "HCl",
            "nominal_molarity": 1.5,
            "volume_l": 1,
            "concentrate_assay_pct": 5,
            "concentrate_density_g_ml": 1.02,
        },
    )
    assert resp.status_code == 422
    assert resp.get_json()["errors"][0]["field"] == "nominal_molarity"
    assert client.post("/api/v1/preparation/plan", data="not json", content_type="application/json").status_code == 400


def test_page_loads_its_script_from_the_app(staff):
    html = staff.get("/batches/new").get_data(as_text=True)
    assert '<script src="/static/intake.js" defer></script>' in html
    assert "style=" not in html
    with staff.get("/static/intake.js") as js:
        assert js.status_code == 200 and js.mimetype in ("text/javascript", "application/javascript")
    assert 'data-plan-url="/api/v1/preparation/plan"' in html


# ------------------------------------------------------------------------------------------ adjustment


def released_batch(app, molarity, volume_l=20.0, prepared_days_ago=10):
    """An HCl batch released with a chosen certified molarity (mol/L), straight through the record layer."""
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        prepared = today() - dt.timedelta(days=prepared_days_ago)
        batch = records.create_batch(
            conn,
            {
                "reagent": "HCl",
                "nominal_molarity": 0.1,
                "volume_l": volume_l,
                "prepared_on": prepared.isoformat(),
                "prepared_by": "Setup",
                "concentrate_assay_w_w": 0.37,
                "concentrate_density_g_ml": 1.19,
            },
            "setup",
        )
        lot = records.create_lot(
            conn,
            {
                "substance": "Na2CO3",
                "assay": 0.9998,
                "assay_expanded_u": 0.0004,
                "assay_k": 2,
                "expires_on": (today() + dt.timedelta(days=300)).isoformat(),
                "dried_on": prepared.isoformat(),
                "dried_at_c": 280,
            },
            "setup",
        )
        run_id = records.record_run(
            conn,
            {
                "batch_id": batch["id"],
                "purpose": "certify",
                "method": "primary",
                "standard_lot_id": lot["id"],
                "performed_on": prepared.isoformat(),
                "analyst": "Setup",
            },
            [],
            {"molarity": molarity, "u": 0.0001, "U": 0.0002, "k": 2, "n": 4, "accepted": True},
            "setup",
        )
        records.decide_run(
            conn,
            run_id,
            "accept",
            "",
            "setup",
            release={
                "molarity": molarity,
                "u": 0.0001,
                "U": 0.0002,
                "k": 2,
                "released_on": prepared.isoformat(),
                "expires_on": (prepared + dt.timedelta(days=365)).isoformat(),
                "recheck_interval_days": 90,
                "tolerance_rel": 0.005,
            },
        )
    finally:
        conn.close()
    return batch


def test_strong_batch_gets_water(app, staff):
    batch = released_batch(app, 0.1032)
    page = staff.get(f"/batches/{batch['code']}").get_data(as_text=True)
    assert f'href="/batches/{batch["code"]}/adjust"' in page and 'class="batch-actions"' in page
    form = staff.get(f"/batches/{batch['code']}/adjust").get_data(as_text=True)
    # Value ± U as every page shows it: U = 0.00020 mol/L to two significant figures (JCGM 100:2008, 7.2.6).
    assert "the certified value in force (released " in form and "), 0.10320 ± 0.00020 mol/L (k = 2)" in form
    assert kept(form, "concentrate_assay_pct", "37")  # the batch's own concentrate, prefilled
    resp = staff.get(f"/batches/{batch['code']}/adjust?basis=certified&volume_l=15")
    assert resp.status_code == 200
    html = unescape(resp.get_data(as_text=True))
    # Arithmetic check: water w = V·(c/c_target − 1) = 15 L · (0.1032/0.1 − 1) = 0.48 L.
    assert 15 * (0.1032 / 0.1 - 1) == pytest.approx(0.48)
    assert '<span class="plan-value">480 mL</span>' in html
    assert "+3.20 % from nominal" in html
    assert "re-standardized" in html
    assert "chemical hygiene plan" in html


def test_weak_batch_gets_concentrate_by_the_mass_balance(app, staff):
    batch = released_batch(app, 0.0975)
    resp = staff.get(
        f"/batches/{batch['code']}/adjust?basis=certified&volume_l=15&concentrate_assay_pct=37&concentrate_density_g_ml=1.19"
    )
    html = unescape(resp.get_data(as_text=True))
    c_conc = 1000 * 1.19 * 0.37 / M_HCL  # mol/L of 37 % HCl at 1.19 g/mL
    # Mass balance c·V + c_conc·v = c_target·(V + v)  =>  v = V·(c_target − c)/(c_conc − c_target).
    v_ml = 15 * (0.1 - 0.0975) / (c_conc - 0.1) * 1000
    assert v_ml == pytest.approx(3.13, abs=0.01)
    assert f'<span class="plan-value">{v_ml:.2f} mL</span>' in html
    assert "concentrate into the dilute solution" in html


def test_weak_batch_without_a_concentrate_is_asked_for_one(app, staff):
    batch = released_batch(app, 0.0975)
    resp = staff.get(
        f"/batches/{batch['code']}/adjust?basis=certified&volume_l=15&concentrate_assay_pct=&concentrate_density_g_ml="
    )
    assert resp.status_code == 422
    assert "raising it needs a concentrate" in error_beside(resp.get_data(as_text=True), "concentrate_assay_pct")


@pytest.mark.parametrize(
    ("typed", "message"),
    [("", "is required"), ("0,5,1", "more than one comma"), ("-2", "must be greater than 0 L and at most 60 L")],
)
def test_adjustment_volume_is_checked(app, staff, typed, message):
    batch = released_batch(app, 0.1032)
    resp = staff.get(f"/batches/{batch['code']}/adjust?basis=certified&volume_l={typed}")
    assert resp.status_code == 422
    assert message in error_beside(resp.get_data(as_text=True), "volume_l")
    assert kept(resp.get_data(as_text=True), "volume_l", typed)


def test_adjustment_needs_a_standardization_and_a_permitted_role(app, staff, signed_in_client, form_token):
    resp = post(staff, form_token, "/batches/new", good_form())
    code = resp.headers["Location"].rsplit("/", 1)[1]
    assert "/adjust" not in staff.get(f"/batches/{code}").get_data(as_text=True)  # nothing to adjust yet
    assert "no standardization yet" in staff.get(f"/batches/{code}/adjust").get_data(as_text=True)
    assert signed_in_client("instructor").get(f"/batches/{code}/adjust").status_code == 403


# ------------------------------------------------------------------------------------------ withdrawal


def test_withdraw_with_a_reason(app, staff, form_token):
    batch = released_batch(app, 0.1002)
    assert f'href="/batches/{batch["code"]}/withdraw"' in staff.get(f"/batches/{batch['code']}").get_data(as_text=True)
    form = staff.get(f"/batches/{batch['code']}/withdraw").get_data(as_text=True)
    assert kept(form, "withdrawn_on", today().isoformat())
    resp = post(
        staff,
        form_token,
        f"/batches/{batch['code']}/withdraw",
        {"withdrawn_on": today().isoformat(), "reason": "carboy cracked (invented)"},
    )
    assert resp.status_code == 303 and resp.headers["Location"] == f"/batches/{batch['code']}"
    page = staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert "Withdrawn" in page and "carboy cracked (invented)" in page
    assert "/withdraw" not in page  # the link goes once the batch is withdrawn
    (w,) = rows(app, "SELECT * FROM withdrawals")
    assert w["reason"] == "carboy cracked (invented)" and w["recorded_by"] == "staff-user"
    event = rows(app, "SELECT * FROM events WHERE action = 'batch.withdraw'")
    assert len(event) == 1 and event[0]["reason"] == "carboy cracked (invented)"
    # A second withdrawal is a conflict with a clear page, and changes nothing.
    again = post(staff, form_token, f"/batches/{batch['code']}/withdraw", {"reason": "again"})
    assert again.status_code == 409
    text = again.get_data(as_text=True)
    assert "this batch is already withdrawn" in text and "carboy cracked (invented)" in text
    # Even with no reason given, the answer is the conflict, not a field error.
    assert post(staff, form_token, f"/batches/{batch['code']}/withdraw", {"reason": ""}).status_code == 409
    assert count(app, "withdrawals") == 1


def test_withdraw_without_reason_or_before_preparation_is_refused(app, staff, form_token):
    batch = released_batch(app, 0.1002, prepared_days_ago=10)
    url = f"/batches/{batch['code']}/withdraw"
    resp = post(staff, form_token, url, {"withdrawn_on": today().isoformat(), "reason": "  "})
    assert resp.status_code == 422
    assert error_beside(resp.get_data(as_text=True), "reason") == "is required: say why the batch is taken out of use"
    early = (today() - dt.timedelta(days=11)).isoformat()
    resp = post(staff, form_token, url, {"withdrawn_on": early, "reason": "spilled"})
    assert resp.status_code == 422
    prepared = (today() - dt.timedelta(days=10)).isoformat()
    assert error_beside(resp.get_data(as_text=True), "withdrawn_on") == f"cannot be earlier than {prepared}"
    assert "spilled" in resp.get_data(as_text=True)  # the reason typed is kept
    assert count(app, "withdrawals") == 0


def test_withdraw_needs_the_permission(app, client, signed_in_client, form_token):
    batch = released_batch(app, 0.1002)
    url = f"/batches/{batch['code']}/withdraw"
    resp = client.post(url, data={"reason": "x", "csrf_token": form_token(client, "/sign-in")})
    assert resp.status_code == 303 and resp.headers["Location"].startswith("/sign-in")
    instructor = signed_in_client("instructor")
    assert "/withdraw" not in instructor.get(f"/batches/{batch['code']}").get_data(as_text=True)
    assert post(instructor, form_token, url, {"reason": "x"}).status_code == 403
    assert count(app, "withdrawals") == 0
