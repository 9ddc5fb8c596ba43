"""The pure hazard module: which classification applies, GHS precedence, checks of an admin's entry."""

from __future__ import annotations

import datetime as dt
import re
import sqlite3

import periodictable
import pytest

from stockroom import hazards
from stockroom.hazards import DEFAULT_CLASSIFICATIONS, Classification

DAY = dt.date(2026, 1, 15)


def elements(reagent: str, molarity: float):
    found = hazards.pick(DEFAULT_CLASSIFICATIONS, reagent, molarity, DAY)
    assert found is not None, f"no starting classification for {reagent} at {molarity} mol/L"
    return hazards.label_elements(found)


def codes(pairs):
    return [code for code, _ in pairs]


def test_dilute_sodium_hydroxide_carries_h290_only_and_1_molar_is_corrosive():
    # DOMAIN primer (memory — verify against the SDS): ~0.1 mol/L NaOH often H290 only, Warning;
    # NaOH >= 2 % w/w (about 0.5 mol/L) Skin Corr. 1B, H314, Danger, corrosion pictogram.
    dilute = elements("NaOH", 0.1)
    assert (dilute.signal_word, dilute.pictograms, codes(dilute.hazard_statements)) == ("Warning", ("GHS05",), ["H290"])
    strong = elements("NaOH", 1.0)
    assert strong.signal_word == "Danger"
    assert strong.pictograms == ("GHS05",)
    assert codes(strong.hazard_statements) == ["H290", "H314"]
    assert dict(strong.hazard_statements)["H314"] == "Causes severe skin burns and eye damage."
    assert {"P280", "P303+P361+P353", "P305+P351+P338", "P310"} <= set(codes(strong.precautionary_statements))


def test_bands_are_half_open_and_the_limit_gets_the_stronger_band():
    assert codes(elements("NaOH", 0.4999).hazard_statements) == ["H290", "H315", "H319"]
    assert codes(elements("NaOH", 0.5).hazard_statements) == ["H290", "H314"]
    assert hazards.pick(DEFAULT_CLASSIFICATIONS, "HNO3", 10.0, DAY) is None  # the seeded nitric bands stop below 10
    assert hazards.pick(DEFAULT_CLASSIFICATIONS, "HClO4", 0.1, DAY) is None  # no starting data: no label prints


# (reagent, mass fraction at the CLP Annex VI specific concentration limit, solution density g/mL there).
# Limits: CLP Annex VI entries for NaOH, KOH, HCl, H2SO4, HNO3 (from memory — verify); densities of the
# aqueous solutions at 20 °C from the CRC Handbook's concentrative-properties tables (from memory).
LIMITS = [
    ("NaOH", "NaOH", 0.005, 1.004),
    ("NaOH", "NaOH", 0.02, 1.021),
    ("KOH", "KOH", 0.005, 1.003),
    ("KOH", "KOH", 0.02, 1.016),
    ("HCl", "HCl", 0.10, 1.048),
    ("HCl", "HCl", 0.25, 1.125),
    ("H2SO4", "H2SO4", 0.05, 1.032),
    ("H2SO4", "H2SO4", 0.15, 1.102),
    ("HNO3", "HNO3", 0.05, 1.026),
]


@pytest.mark.parametrize(("reagent", "formula", "w", "density"), LIMITS)
def test_band_limits_sit_at_or_just_below_the_mass_fraction_limits(reagent, formula, w, density):
    # c = 1000 w rho / M, M from periodictable (independent of stockroom's own atomic weights).
    c = 1000 * w * density / periodictable.formula(formula).mass
    edges = sorted({r.min_molarity for r in DEFAULT_CLASSIFICATIONS if r.reagent == reagent and r.min_molarity > 0})
    edge = min(edges, key=lambda e: abs(e - c))
    assert 0.93 * c <= edge <= c, f"{reagent} band edge {edge} mol/L against the limit {c:.4f} mol/L"
    below = hazards.pick(DEFAULT_CLASSIFICATIONS, reagent, edge * 0.99, DAY)
    at = hazards.pick(DEFAULT_CLASSIFICATIONS, reagent, c, DAY)
    assert below is not None and at is not None and below != at


def test_h318_is_not_printed_beside_h314():
    c = Classification("NaOH", 0.5, None, "Danger", ("GHS05",), ("H314", "H318", "H290"), ("P280",))
    el = hazards.label_elements(c)
    assert codes(el.hazard_statements) == ["H290", "H314"]


def test_exclamation_mark_yields_to_corrosion_for_irritation_but_not_for_respiratory_irritation():
    # GHS precedence of pictograms (1.4.10.5.3.1, from memory): under GHS05 the exclamation mark is not used
    # for skin or eye irritation; it still stands for H335 (DOMAIN primer: conc. HCl shows both pictograms).
    assert hazards.implied_elements(["H290", "H315", "H319"]) == ("Warning", ("GHS05",))
    assert hazards.implied_elements(["H290", "H314", "H335"]) == ("Danger", ("GHS05", "GHS07"))
    assert hazards.implied_elements(["H315", "H319"]) == ("Warning", ("GHS07",))
    stored = Classification("HCl", 1, 2, "Warning", ("GHS05", "GHS07"), ("H290", "H315"), ("P280",))
    assert hazards.label_elements(stored).pictograms == ("GHS05",)


def test_concentrated_hydrochloric_acid_matches_the_primer():
    # DOMAIN primer (memory): concentrated (~37 %, ~12 mol/L) HCl H290 H314 H335, Danger, corrosion and
    # exclamation-mark pictograms.
    el = elements("HCl", 12.0)
    assert (el.signal_word, el.pictograms, codes(el.hazard_statements)) == (
        "Danger",
        ("GHS05", "GHS07"),
        ["H290", "H314", "H335"],
    )


def test_every_starting_row_passes_the_admin_checks_and_has_texts():
    for c in DEFAULT_CLASSIFICATIONS:
        assert (
            hazards.check(
                c.reagent,
                c.min_molarity,
                c.max_molarity,
                c.signal_word,
                c.pictograms,
                c.hazard_statements,
                c.precautionary_statements,
            )
            == []
        ), c
        assert "from memory" in c.source_note  # the rule: values recalled are marked as such
        for code, text in hazards.label_elements(c).hazard_statements + hazards.label_elements(c).precautionary_statements:
            assert text, code


def test_the_bands_of_each_reagent_do_not_overlap_and_leave_no_gap():
    for reagent in {c.reagent for c in DEFAULT_CLASSIFICATIONS}:
        rows = sorted((c for c in DEFAULT_CLASSIFICATIONS if c.reagent == reagent), key=lambda c: c.min_molarity)
        assert rows[0].min_molarity == 0
        for a, b in zip(rows, rows[1:], strict=False):
            assert a.max_molarity == b.min_molarity, reagent


@pytest.mark.parametrize(
    ("kwargs", "field", "words"),
    [
        ({"hazard_statements": ["H29O"]}, "hazard_statements", "H followed by three digits"),
        ({"hazard_statements": ["H999"]}, "hazard_statements", "no text"),
        ({"precautionary_statements": ["P305+351"]}, "precautionary_statements", "combinations joined by +"),
        ({"hazard_statements": ["H290", "H314", "H318"], "signal_word": "Danger"}, "hazard_statements", "H318"),
        ({"signal_word": "Danger"}, "signal_word", "Warning"),
        ({"pictograms": []}, "pictograms", "GHS05"),
        ({"pictograms": ["GHS05", "GHS07"]}, "pictograms", "not called for"),
        ({"pictograms": ["GHS06"]}, "pictograms", "can print only"),
        ({"max_molarity": 0.05}, "max_molarity", "above the lower limit"),
        ({"max_molarity": 500.0}, "max_molarity", "check the unit"),
        ({"precautionary_statements": []}, "precautionary_statements", "safety data sheet"),
    ],
)
def test_check_names_the_field_and_the_rule(kwargs, field, words):
    entry = {
        "reagent": "NaOH",
        "min_molarity": 0.1,
        "max_molarity": None,
        "signal_word": "Warning",
        "pictograms": ["GHS05"],
        "hazard_statements": ["H290"],
        "precautionary_statements": ["P234", "P390"],
    }
    entry.update(kwargs)
    errors = hazards.check(**entry)
    assert any(e.field == field and words in e.message for e in errors), errors


def test_a_not_classified_band_is_allowed():
    assert hazards.check("NaOH", 0.0, 0.001, "", [], [], []) == []


def test_newest_row_wins_inside_its_band_and_the_older_still_applies_outside():
    old = Classification(
        "NaOH", 0.5, None, "Danger", ("GHS05",), ("H290", "H314"), ("P280",), effective_from=dt.date(2020, 1, 1), id=1
    )
    narrower = Classification(
        "NaOH", 0.5, 2.0, "Danger", ("GHS05",), ("H290", "H314"), ("P280", "P310"), effective_from=dt.date(2026, 1, 1), id=2
    )
    future = Classification("NaOH", 0.0, None, "", (), (), (), effective_from=dt.date(2030, 1, 1), id=3)
    rows = [old, narrower, future]
    assert hazards.pick(rows, "NaOH", 1.0, DAY) is narrower
    assert hazards.pick(rows, "NaOH", 3.0, DAY) is old
    assert hazards.pick(rows, "NaOH", 1.0, dt.date(2025, 6, 1)) is old  # before the narrower row took effect
    assert hazards.pick(rows, "NaOH", 1.0, dt.date(2030, 1, 1)) is future
    assert hazards.in_force(rows, DAY) == [narrower, old]  # sorted by band; old still decides above 2 mol/L
    replacing = Classification(
        "NaOH", 0.5, None, "Danger", ("GHS05",), ("H290", "H314"), ("P280",), effective_from=dt.date(2026, 1, 2), id=4
    )
    assert hazards.in_force(rows + [replacing], DAY) == [replacing]  # both older rows wholly covered


def test_statements_are_listed_in_number_order_and_codes_split_as_typed():
    assert hazards.statement_order(["P310", "P280", "P303+P361+P353", "P234"]) == ("P234", "P280", "P303+P361+P353", "P310")
    assert hazards.statement_order(["EUH071", "H314", "H290"]) == ("H290", "H314", "EUH071")
    assert hazards.split_codes(" h290, H314;p305 + p351 + p338 ") == ["H290", "H314", "P305+P351+P338"]


# ---------------------------------------------------------------- the admin page


def _rows(app, sql, params=()):
    from stockroom import db as dbmod

    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return dbmod.query(conn, sql, params)
    finally:
        conn.close()


GOOD_ENTRY = {
    "reagent": "NaOH",
    "min_molarity": "0.5",
    "max_molarity": "",
    "signal_word": "Danger",
    "pictograms": ["GHS05"],
    "hazard_statements": "H290 H314",
    "precautionary_statements": "P280, P260, P303+P361+P353, P305+P351+P338, P310, P234",
    "source_note": "Invented Chemicals SDS rev. 7 (invented)",
    "reason": "supplier changed the P statements",
}


def test_hazard_data_needs_hazard_edit(client, signed_in_client, form_token):
    assert client.get("/admin/hazards").status_code == 303
    assert signed_in_client("staff").get("/admin/hazards").status_code == 403
    instructor = signed_in_client("instructor")
    token = form_token(instructor, "/")
    assert instructor.post("/admin/hazards", data=dict(GOOD_ENTRY, csrf_token=token)).status_code == 403
    page = signed_in_client("admin").get("/admin/hazards")
    assert page.status_code == 200
    html = page.get_data(as_text=True)
    assert "0.5 mol/L and above" in html and "H314" in html and "data:image/svg+xml;base64," in html


def test_an_admin_adds_a_classification_and_the_next_label_uses_it(app, signed_in_client, form_token):
    admin = signed_in_client("admin")
    before = len(_rows(app, "SELECT id FROM hazard_classifications"))
    resp = admin.post("/admin/hazards", data=dict(GOOD_ENTRY, csrf_token=form_token(admin, "/admin/hazards")))
    assert resp.status_code == 303
    rows = _rows(app, "SELECT * FROM hazard_classifications ORDER BY id DESC LIMIT 1")
    assert len(_rows(app, "SELECT id FROM hazard_classifications")) == before + 1
    row = rows[0]
    assert (row["reagent"], row["min_molarity"], row["max_molarity"], row["signal_word"]) == ("NaOH", 0.5, None, "Danger")
    assert row["precautionary_statements"] == '["P234", "P260", "P280", "P303+P361+P353", "P305+P351+P338", "P310"]'
    assert row["recorded_by"] == "admin-user" and row["reason"] == "supplier changed the P statements"
    event = _rows(app, "SELECT * FROM events WHERE action = 'hazard.classify'")
    assert len(event) == 1 and event[0]["entity_id"] == row["id"] and event[0]["reason"] == row["reason"]
    from stockroom import db as dbmod
    from stockroom.pdf import labels

    conn = dbmod.connect(app.config["DATABASE"])
    try:
        el = labels.hazard_for(conn, "NaOH", 1.0, dt.datetime.now(dt.UTC).date())  # the app's lab day (UTC)
    finally:
        conn.close()
    assert "P260" in [code for code, _ in el.precautionary_statements]
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        conn = dbmod.connect(app.config["DATABASE"])
        try:
            conn.execute("UPDATE hazard_classifications SET signal_word = 'Warning'")
        finally:
            conn.close()


@pytest.mark.parametrize(
    ("change", "field", "words"),
    [
        ({"hazard_statements": "H290 H314 H318"}, "hazard_statements", "leave out H318"),
        ({"hazard_statements": "H2900"}, "hazard_statements", "H followed by three digits"),
        ({"signal_word": "Warning"}, "signal_word", "call for Danger"),
        ({"pictograms": []}, "pictograms", "need GHS05"),
        ({"min_molarity": "1,000"}, "min_molarity", "could be 1.000 or 1000"),
        ({"max_molarity": "0.2"}, "max_molarity", "above the lower limit"),
        ({"reason": ""}, "reason", "is required"),
        ({"effective_from": "2001-01-01"}, "effective_from", "cannot be earlier than"),
    ],
)
def test_a_bad_entry_is_422_beside_the_field(app, signed_in_client, form_token, change, field, words):
    admin = signed_in_client("admin")
    before = len(_rows(app, "SELECT id FROM hazard_classifications"))
    resp = admin.post("/admin/hazards", data=dict(GOOD_ENTRY, **change, csrf_token=form_token(admin, "/admin/hazards")))
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert re.search(rf'id="e-{field}">[^<]*{re.escape(words)}', html), html[:2000]
    assert len(_rows(app, "SELECT id FROM hazard_classifications")) == before
