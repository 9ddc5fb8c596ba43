"""The preparation record keeps what was actually measured (concentrate in mL, pellets in g) beside the
calculator's figure, through the form and the JSON API alike, and the batch page shows both."""

from __future__ import annotations

import re
from html import unescape

import periodictable
import pytest
from formposts import count, post
from ux_world import today

from stockroom import db as dbmod
from stockroom.records import audit


def _form(**changes):
    form = {
        "reagent": "HCl",
        "nominal_molarity": "0.1",
        "volume_l": "20",
        "source_form": "liquid",
        "concentrate_lot": "INV-HCL-0042 (invented)",
        "concentrate_assay_pct": "37",
        "concentrate_density_g_ml": "1.19",
        "measured_amount": "166",
        "prepared_on": today().isoformat(),
        "prepared_by": "A. Tester",
        "water_grade": "deionized, Type II",
        "container": "20 L HDPE carboy",
        "action": "register",
    }
    form.update(changes)
    return form


def _rows(app, sql, params=()):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return dbmod.query(conn, sql, list(params))
    finally:
        conn.close()


def test_a_liquid_batch_keeps_the_millilitres_measured_and_the_suggestion(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = post(staff, form_token, "/batches/new", _form())
    assert resp.status_code == 303
    (row,) = _rows(app, "SELECT p.*, b.code FROM batch_preparations p JOIN batches b ON b.id = p.batch_id")
    assert (row["source_form"], row["measured_amount"], row["measured_unit"]) == ("liquid", 166.0, "mL")
    # Independent arithmetic: 0.1 mol/L × 20 L of HCl (36.458 g/mol, periodictable) from 37 % w/w at
    # 1.19 g/mL is 0.1 × 20 × 36.458 / (0.37 × 1.19) = 165.6 mL (the calculator aims at nominal here).
    expected = 0.1 * 20 * periodictable.formula("HCl").mass / (0.37 * 1.19)
    assert row["suggested_amount"] == pytest.approx(expected, rel=1e-3)
    html = unescape(staff.get(f"/batches/{row['code']}").get_data(as_text=True))
    shown = re.sub(r"<[^>]+>", " ", re.search(r'id="amount-measured">(.*?)</dd>', html, re.S).group(1))
    assert "166.00 mL of concentrate" in shown and "the calculator gave 165.61 mL" in shown
    assert "a liquid concentrate, diluted" in html
    # Written with the batch, named by its registration entry: the trail checks whole.
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        assert audit.verify(conn).ok
        entry = dbmod.query(conn, "SELECT records, detail FROM events WHERE action = 'batch.register'")[0]
    finally:
        conn.close()
    assert '"batch_preparations"' in entry["records"] and '"measured":"166 mL"' in entry["detail"]


def test_pellets_are_kept_in_grams_and_a_far_amount_is_warned(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    form = _form(
        reagent="NaOH",
        source_form="solid",
        concentrate_assay_pct="98",
        concentrate_density_g_ml="",
        measured_amount="95",
        water_grade="boiled, CO2-free deionized",
    )
    resp = post(staff, form_token, "/batches/new", form)
    assert resp.status_code == 303
    page = unescape(staff.get(resp.headers["Location"]).get_data(as_text=True))
    (row,) = _rows(app, "SELECT * FROM batch_preparations")
    assert (row["source_form"], row["measured_amount"], row["measured_unit"]) == ("solid", 95.0, "g")
    # 0.1 × 20 × 39.997 g/mol (NaOH, periodictable) / 0.98 = 81.63 g of pellets.
    assert row["suggested_amount"] == pytest.approx(0.1 * 20 * periodictable.formula("NaOH").mass / 0.98, rel=1e-3)
    assert "95.00 g of pellets" in page and "the calculator gave 81.63 g" in page
    assert "95.00 g was measured where the calculator gives 81.63 g (+16 %)" in page


def test_the_amount_measured_is_optional_and_refused_when_not_positive(app, signed_in_client, form_token):
    staff = signed_in_client("staff")
    assert post(staff, form_token, "/batches/new", _form(measured_amount="")).status_code == 303
    (row,) = _rows(app, "SELECT * FROM batch_preparations")
    assert row["measured_amount"] is None and row["suggested_amount"] is not None
    before = count(app, "batches")
    resp = post(staff, form_token, "/batches/new", _form(measured_amount="-3"))
    assert resp.status_code == 422 and count(app, "batches") == before
    assert "Amount measured" in unescape(resp.get_data(as_text=True))


def test_the_json_api_takes_the_same_amount(app, make_user):
    from stockroom import tokens

    user = make_user("api-staff", "staff")
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        _, secret = tokens.create(conn, user.id, user.username, "bench tablet (invented)")
    finally:
        conn.close()
    body = {k: v for k, v in _form(measured_amount=165.5).items() if k != "action"}
    resp = app.test_client().post("/api/v1/batches", json=body, headers={"Authorization": f"Bearer {secret}"})
    assert resp.status_code == 201, resp.get_data(as_text=True)
    (row,) = _rows(app, "SELECT * FROM batch_preparations")
    assert (row["measured_amount"], row["measured_unit"]) == (165.5, "mL")


def test_preparation_rows_are_append_only(app, signed_in_client, form_token):
    post(signed_in_client("staff"), form_token, "/batches/new", _form())
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        with pytest.raises(Exception, match="append-only"):
            conn.execute("UPDATE batch_preparations SET measured_amount = 1")
    finally:
        conn.close()
