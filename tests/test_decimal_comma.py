"""A decimal comma is read in the HTML forms where it cannot be a thousands separator; the JSON API refuses every comma."""

from __future__ import annotations

import datetime as dt

import pytest
from formposts import count, post

from stockroom import db as dbmod
from stockroom import records, tokens
from stockroom.parsing import Parser, form_decimal


@pytest.mark.parametrize(
    ("typed", "read"),
    [
        ("0,1012", "0.1012"),
        ("12,5", "12.5"),
        ("-0,25", "-0.25"),
        (",5", "0.5"),
        ("0,123", "0.123"),  # a whole part of 0 is never a thousands group
        ("1,2345", "1.2345"),
        ("20", "20"),  # no comma: as typed
        ("0.1", "0.1"),
    ],
)
def test_an_unambiguous_decimal_comma_reads_as_a_point(typed, read):
    assert form_decimal(typed) == (read, None)


@pytest.mark.parametrize(
    ("typed", "words"),
    [
        ("1,234,5", "more than one comma"),
        ("1,234.5", "mixes a comma and a point"),
        ("1.234,5", "mixes a comma and a point"),
        ("1,234", "'1,234' could be 1.234 or 1234"),
        ("25,000", "could be 25.000 or 25000"),
    ],
)
def test_an_ambiguous_comma_is_refused_with_the_rule(typed, words):
    value, problem = form_decimal(typed)
    assert value is None and words in problem


def test_only_the_form_parser_reads_the_comma():
    form, strict = Parser(decimal_comma=True), Parser()
    assert form.number("0,1012", "c", gt=0) == pytest.approx(0.1012)
    assert strict.number("0,1012", "c", gt=0) is None
    assert strict.errors[0].message == "use a point, not a comma, for the decimal sign: write 0.1012"
    assert form.number("1,234.5", "c") is None and "mixes a comma and a point" in form.errors[0].message


def _batch_form(**changes):
    form = {
        "reagent": "HCl",
        "nominal_molarity": "0,1",
        "volume_l": "2,5",
        "source_form": "liquid",
        "concentrate_assay_pct": "37,2",
        "concentrate_density_g_ml": "1,19",
        "prepared_on": dt.datetime.now(dt.UTC).date().isoformat(),
        "prepared_by": "A. Tester",
        "water_grade": "deionized",
        "action": "register",
    }
    form.update(changes)
    return form


def test_the_register_form_reads_decimal_commas(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = post(staff, form_token, "/batches/new", _batch_form())
    assert resp.status_code == 303, resp.get_data(as_text=True)[:500]
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        batch = records.batch_by_code(conn, resp.headers["Location"].rsplit("/", 1)[-1])
    finally:
        conn.close()
    assert batch["nominal_molarity"] == pytest.approx(0.1) and batch["volume_l"] == pytest.approx(2.5)
    assert batch["concentrate_assay_w_w"] == pytest.approx(0.372) and batch["concentrate_density_g_ml"] == pytest.approx(1.19)


def test_the_register_form_refuses_an_ambiguous_comma_by_its_label(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = post(staff, form_token, "/batches/new", _batch_form(volume_l="1,500"))
    assert resp.status_code == 422
    page = resp.get_data(as_text=True)
    assert "could be 1.500 or 1500" in page and "volume_l:" not in page
    assert count(app, "batches") == 0


def test_the_json_api_stays_strict(app, client, make_user):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        user = make_user("api-staff", "staff")
        secret = tokens.create(conn, user.id, user.username, "script")[1]
    finally:
        conn.close()
    body = {
        "reagent": "NaOH",
        "nominal_molarity": "0,1",
        "volume_l": 20,
        "prepared_on": dt.datetime.now(dt.UTC).date().isoformat(),
        "prepared_by": "API Person",
        "water_grade": "boiled, CO2-free",
    }
    resp = client.post("/api/v1/batches", json=body, headers={"Authorization": f"Bearer {secret}"})
    assert resp.status_code == 422
    errors = resp.get_json()["errors"]
    assert errors == [{"field": "nominal_molarity", "message": "use a point, not a comma, for the decimal sign: write 0.1"}]
    assert count(app, "batches") == 0
    plan = client.post("/api/v1/preparation/plan", json={"reagent": "HCl", "nominal_molarity": "0,1", "volume_l": 1})
    assert plan.status_code == 422 and "not a comma" in plan.get_json()["errors"][0]["message"]


def test_the_form_pages_live_helpers_read_the_comma_as_their_form_does(client):
    # The register page's calculator sends X-Stockroom-Door: form (stockroom/static/intake.js).
    body = {
        "reagent": "HCl",
        "nominal_molarity": "0,1",
        "volume_l": "1",
        "concentrate_assay_pct": "37",
        "concentrate_density_g_ml": "1,19",
    }
    helper = client.post("/api/v1/preparation/plan", json=body, headers={"X-Stockroom-Door": "form"})
    assert helper.status_code == 200, helper.get_json()
    program = client.post("/api/v1/preparation/plan", json=body)
    assert program.status_code == 422
    assert {e["field"] for e in program.get_json()["errors"]} == {"nominal_molarity", "concentrate_density_g_ml"}
    ambiguous = client.post("/api/v1/preparation/plan", json=dict(body, volume_l="1,000"), headers={"X-Stockroom-Door": "form"})
    assert ambiguous.status_code == 422 and "could be 1.000 or 1000" in ambiguous.get_json()["errors"][0]["message"]
