"""Titrants beyond acids and bases: the catalogue, the stoichiometry from balanced equations, the acetic-acid
medium's expansion, and each new pair registered, standardized, released, labelled and looked up end to end.
"""

from __future__ import annotations

import datetime as dt
import io
import json
import re

import periodictable
import pypdf
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stockroom import chemistry as chem
from stockroom import corrections, records, tokens
from stockroom import db as dbmod
from stockroom import preparation as prep

TODAY = dt.date.today()

# ---------------------------------------------------------------------------------------------------------
# Molar masses against an independent library


NEW_FORMULAS = sorted(
    {t.formula for t in chem.OTHER_TITRANTS}
    | {t.weighed_as for t in chem.OTHER_TITRANTS if t.weighed_as}
    | {s.formula for s in chem.OTHER_STANDARDS}
)


@pytest.mark.parametrize("formula", NEW_FORMULAS)
def test_molar_masses_match_periodictable(formula):
    # Source: the periodictable package (CIAAW standard atomic weights), an independent implementation.
    # periodictable writes the hydrate dot as "+" ("ZnSO4+7H2O").
    assert chem.molar_mass(formula).value == pytest.approx(periodictable.formula(formula.replace("·", "+")).mass, rel=2e-5)


# ---------------------------------------------------------------------------------------------------------
# Stoichiometry by hand and against published equivalents

# Mol titrant per mol partner, worked by hand from the half-reactions (electrons given = electrons taken):
#   MnO4- + 8H+ + 5e- -> Mn2+;  C2O4^2- -> 2CO2 + 2e-          => 2 MnO4- : 5 C2O4^2-, ν = 2/5
#   Ce4+ + e- -> Ce3+                                         => 2 Ce4+ : 1 C2O4^2-,  ν = 2
#   IO3- + 6H+ + 5I- -> 3I2 ; I2 + 2 S2O3^2- -> S4O6^2- + 2I-  => 1 IO3- : 6 S2O3^2-   ν = 6
#   BrO3- and Cr2O7^2- each take 6 e-, i.e. free 3 I2          => ν = 6
#   KH(IO3)2 holds two iodates                                 => ν = 12
#   Cr2O7^2- + 6 Fe2+                                          => ν(Fe per Cr2O7) = 6
#   Ag+ + Cl-, Zn2+ + H2Y^2-, Ca2+ + H2Y^2-, H+ + HPh-         => ν = 1
#   secondary: S2O3^2- per I2 = 2; Fe2+ per MnO4- = 5; Fe2+ per Ce4+ = 1; SCN- per Ag+ = 1.
BY_HAND = [
    ("KMnO4", "Na2C2O4", 0.4),
    ("Ce(SO4)2", "Na2C2O4", 2.0),
    ("Na2S2O3", "KIO3", 6.0),
    ("Na2S2O3", "KBrO3", 6.0),
    ("Na2S2O3", "dichromate", 6.0),
    ("Na2S2O3", "biiodate", 12.0),
    ("FAS", "dichromate", 6.0),
    ("AgNO3", "NaCl", 1.0),
    ("AgNO3", "KCl", 1.0),
    ("EDTA", "Zn", 1.0),
    ("EDTA", "CaCO3", 1.0),
    ("HClO4-AcOH", "KHP", 1.0),
]
BY_HAND_SECONDARY = [
    ("Na2S2O3", "I2", 2.0),
    ("I2", "Na2S2O3", 0.5),
    ("FAS", "KMnO4", 5.0),
    ("KMnO4", "FAS", 0.2),
    ("FAS", "Ce(SO4)2", 1.0),
    ("K2Cr2O7", "FAS", 1 / 6),
    ("NH4SCN", "AgNO3", 1.0),
    ("ZnSO4", "EDTA", 1.0),
]


@pytest.mark.parametrize(("titrant", "standard", "nu"), BY_HAND)
def test_primary_ratios_follow_the_balanced_equations(titrant, standard, nu):
    assert chem.stoichiometric_factor(chem.titrant(titrant), chem.standard(standard)) == pytest.approx(nu, rel=1e-12)


@pytest.mark.parametrize(("titrant", "reference", "nu"), BY_HAND_SECONDARY)
def test_secondary_ratios_follow_the_balanced_equations(titrant, reference, nu):
    assert chem.stoichiometric_factor(chem.titrant(titrant), chem.titrant(reference)) == pytest.approx(nu, rel=1e-12)


# mg of standard per mL of titrant of the stated molarity, as the pharmacopoeias' lists of volumetric
# solutions print them (USP "Volumetric Solutions", Ph. Eur. 4.2.2, BP Appendix I B). From memory unless
# marked: the BP perchloric acid figure was read in BP 2012 Appendix I B, "Perchloric Acid VS".
PUBLISHED = [
    ("KMnO4", 0.02, "Na2C2O4", 6.700),  # potassium permanganate VS (from memory)
    ("Na2S2O3", 0.1, "KIO3", 3.567),  # sodium thiosulfate VS against potassium iodate (from memory)
    ("Na2S2O3", 0.1, "KBrO3", 2.783),  # Ph. Eur. 4.2.2 sodium thiosulfate (from memory)
    ("Na2S2O3", 0.1, "dichromate", 4.903),  # USP sodium thiosulfate VS (from memory)
    ("AgNO3", 0.1, "NaCl", 5.844),  # silver nitrate VS (from memory)
    ("EDTA", 0.05, "Zn", 3.269),  # Ph. Eur. 4.2.2 sodium edetate 0.05 M (from memory)
    ("EDTA", 0.05, "CaCO3", 5.004),  # USP edetate disodium VS 0.05 M (from memory)
    ("HClO4-AcOH", 0.1, "KHP", 20.42),  # BP 2012 Appendix I B, Perchloric Acid VS (looked up)
    ("Ce(SO4)2", 0.1, "Na2C2O4", 6.700),  # ceric sulfate against sodium oxalate (from memory)
]


@pytest.mark.parametrize(("titrant", "molarity", "standard", "mg_per_ml"), PUBLISHED)
def test_published_equivalents(titrant, molarity, standard, mg_per_ml):
    t, s = chem.titrant(titrant), chem.standard(standard)
    nu = chem.stoichiometric_factor(t, s)
    # 1 mL holds molarity mmol of titrant, which reacts with molarity/ν mmol of standard.
    mg = molarity / nu * s.molar_mass.value
    assert mg == pytest.approx(mg_per_ml, abs=0.0006 * mg_per_ml)  # the printed figure's last digit


def test_every_recorded_equation_balances_and_a_wrong_one_is_caught():
    for pair in chem.PAIRS:
        for step in pair.steps:
            assert chem.imbalance(step) is None, step
    assert "Mn" not in (chem.imbalance("2 MnO4^- + 5 C2O4^2- + 16 H^+ -> 2 Mn^2+ + 10 CO2 + 8 H2O") or "")
    assert "O" in chem.imbalance("MnO4^- + 5 C2O4^2- + 16 H^+ -> Mn^2+ + 10 CO2 + 8 H2O")
    assert "charge" in chem.imbalance("Ce^4+ + Fe^2+ -> Ce^3+ + Fe^2+")
    assert chem.parse_species("C2O4^2-") == ("C2O4", -2) and chem.parse_species("Ag^+") == ("Ag", 1)
    with pytest.raises(chem.FormulaError):
        chem.parse_species("Fe^two+")


@pytest.mark.parametrize(
    ("titrant", "partner", "words"),
    [
        ("KMnO4", "NaCl", "a redox titrant"),
        ("AgNO3", "KIO3", "a precipitation titrant"),
        ("EDTA", "Na2C2O4", "a complexometric titrant"),
        ("HClO4-AcOH", "Na2CO3", "anhydrous acetic acid"),
        ("NaOH", "KIO3", "an acid-base titrant"),
    ],
)
def test_pairs_that_do_not_titrate_are_refused_saying_what_does(titrant, partner, words):
    t = chem.titrant(titrant)
    with pytest.raises(chem.IncompatiblePair) as caught:
        chem.stoichiometric_factor(t, chem.standard(partner))
    assert caught.value.status == 422
    msg = caught.value.message
    assert words in msg and "pairs with" in msg
    assert all(s.key in msg for s in chem.list_standards(t))


def test_thiosulfate_against_permanganate_is_refused_with_the_chemistry():
    # Common practice: permanganate oxidizes thiosulfate to a mixture (sulfate and tetrathionate).
    with pytest.raises(chem.IncompatiblePair) as caught:
        chem.stoichiometric_factor(chem.titrant("KMnO4"), chem.titrant("Na2S2O3"))
    assert "no fixed ratio" in caught.value.message
    assert not chem.reacts(chem.titrant("Na2S2O3"), chem.titrant("KMnO4"))


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("ceric sulfate", "Ce(SO4)2"),
        ("ferrous ammonium sulfate", "FAS"),
        ("(NH4)2Fe(SO4)2", "FAS"),
        ("Na2EDTA", "EDTA"),
        ("perchloric acid in glacial acetic acid", "HClO4-AcOH"),
        ("HClO4", "HClO4"),  # the formula alone still means the aqueous acid
        ("silver nitrate", "AgNO3"),
        ("Na2S2O3", "Na2S2O3"),
    ],
)
def test_titrants_by_key_alias_or_formula(text, key):
    assert chem.titrant(text).key == key


@pytest.mark.parametrize(
    ("text", "key"), [("Na2C2O4", "Na2C2O4"), ("potassium dichromate", "dichromate"), ("K2Cr2O7", "dichromate"), ("zinc", "Zn")]
)
def test_standards_by_key_alias_or_formula(text, key):
    assert chem.standard(text).key == key


def test_each_new_entry_says_its_class_and_model():
    for t in chem.OTHER_TITRANTS:
        assert t.reaction_class in chem.REACTION_CLASSES and t.endpoint and t.storage
        assert chem.list_standards(t) or chem.list_references(t)
    for s in chem.OTHER_STANDARDS:
        assert s.reaction_class in chem.REACTION_CLASSES and s.density_g_cm3 > 0 and s.drying.text and s.endpoint
    assert chem.titrant("HClO4-AcOH").expansion.kind == "linear"
    assert chem.titrant("KMnO4").expansion is corrections.WATER_LIKE


# ---------------------------------------------------------------------------------------------------------
# The acetic-acid medium


def test_perchloric_in_acetic_acid_refers_to_20c_with_its_own_coefficient():
    # BP 2012 Appendix I B, Perchloric Acid VS: VC = V[1 + 0.0011(t1 − t2)]. A volume delivered at
    # 25 °C is, at 20 °C, V[1 − 0.0011·5] to first order; the molarity found at 25 °C times the
    # referral factor is the 20 °C molarity, higher by the same 0.55 % to first order.
    model = chem.titrant("HClO4-AcOH").expansion
    f = corrections.referral_factor(model, 0.1, 25.0)
    assert f == pytest.approx(1 + 0.0011 * 5, abs=4e-5)
    assert corrections.molarity_at(model, 0.1, 25.0) == pytest.approx(0.1 * (1 - 0.0011 * 5), rel=1e-12)
    # About five times water's expansion (2.07e-4 /K at 20 °C, Tanaka et al. 2001).
    ratio = corrections.expansion_coefficient(model, 0.1, 20.0) / corrections.expansion_coefficient(
        corrections.WATER_LIKE, 0.1, 20.0
    )
    assert 5.0 < ratio < 5.6


# ---------------------------------------------------------------------------------------------------------
# The catalogue endpoint


def test_catalogue_endpoint_lists_classes_pairs_and_models(client):
    resp = client.get("/api/v1/catalogue")
    assert resp.status_code == 200
    body = resp.get_json()
    titrants = {t["key"]: t for t in body["titrants"]}
    assert {"KMnO4", "Na2S2O3", "I2", "Ce(SO4)2", "FAS", "K2Cr2O7", "AgNO3", "NH4SCN", "EDTA", "ZnSO4", "HClO4-AcOH"} <= set(
        titrants
    )
    assert titrants["KMnO4"]["class"] == "redox" and titrants["KMnO4"]["electrons"] == 5
    assert titrants["HClO4-AcOH"]["solvent"] == "anhydrous acetic acid"
    assert titrants["HClO4-AcOH"]["expansion_model"]["coefficient_per_c"] == 0.0011
    assert titrants["NaOH"]["class"] == "acid-base" and titrants["NaOH"]["expansion_model"]["coefficient_per_c"] is None
    standards = {s["key"]: s for s in body["standards"]}
    assert standards["Na2C2O4"]["molar_mass_g_mol"] == pytest.approx(periodictable.formula("Na2C2O4").mass, rel=2e-5)
    pairs = {(p["titrant"], p["partner"]): p for p in body["pairs"]}
    permanganate = pairs[("KMnO4", "Na2C2O4")]
    assert permanganate["mol_titrant_per_mol_partner"] == pytest.approx(0.4)
    assert permanganate["flask_temperature_min_c"] == 60.0 and permanganate["equations"]
    iodate = pairs[("Na2S2O3", "KIO3")]
    assert len(iodate["equations"]) == 2 and iodate["blank"] and iodate["mol_titrant_per_mol_partner"] == 6.0
    assert pairs[("NaOH", "KHP")]["ratio_from"] == "protons given and taken"
    assert ("KMnO4", "NaCl") not in pairs and ("HClO4-AcOH", "Na2CO3") not in pairs
    assert pairs[("I2", "Na2S2O3")]["partner_kind"] == "titrant"


# ---------------------------------------------------------------------------------------------------------
# End to end: register, standardize, release, label, look up


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


def _call(client, method, url, token, body):
    return client.open(
        url, method=method, headers={"Authorization": f"Bearer {token}"}, data=json.dumps(body), content_type="application/json"
    )


def _register(client, token, reagent, nominal):
    body = {
        "reagent": reagent,
        "nominal_molarity": nominal,
        "volume_l": 5,
        "prepared_on": (TODAY - dt.timedelta(days=1)).isoformat(),
        "prepared_by": "Test Person (invented)",
        "water_grade": "purified water",
    }
    resp = _call(client, "POST", "/api/v1/batches", token, body)
    assert resp.status_code == 201, resp.get_json()
    return resp.get_json()["id"]


def _batch(conn, reagent, nominal, volume_l):
    """A batch of reagent (nominal in mol/L, volume in L) prepared yesterday by an invented person."""
    return records.create_batch(
        conn,
        {
            "reagent": reagent,
            "nominal_molarity": nominal,
            "volume_l": volume_l,
            "prepared_on": (TODAY - dt.timedelta(days=1)).isoformat(),
            "prepared_by": "Test Person (invented)",
        },
        "setup",
    )


def _lot(conn, key):
    s = chem.standard(key)
    values = {
        "substance": key,
        "assay": 1.0,
        "assay_expanded_u": 0.0002,
        "assay_k": 2,
        "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
    }
    if s.drying.oven_allowed and s.drying.min_c is not None:
        values.update({"dried_on": TODAY.isoformat(), "dried_at_c": (s.drying.min_c + (s.drying.max_c or s.drying.min_c)) / 2})
    return records.create_lot(conn, values, "setup")


def _release(client, token, code, run):
    resp = _call(client, "POST", f"/api/v1/batches/{code}/runs", token, run)
    assert resp.status_code == 201, resp.get_json()
    result = resp.get_json()["result"]
    assert result["accepted"] is True, result
    decided = _call(client, "POST", f"/api/v1/runs/{resp.get_json()['run_id']}/decision", token, {"decision": "accept"})
    assert decided.status_code == 200, decided.get_json()
    return result


def _pdf_text(pdf: bytes) -> str:
    return re.sub(r"\s+", " ", " ".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages))


# The label line each titrant's usual strength carries (hazards.OTHER_CLASSIFICATIONS; from memory).
LABEL_TEXT = {
    "KMnO4": "Harmful to aquatic life with long lasting effects.",
    "AgNO3": "Very toxic to aquatic life with long lasting effects.",
    "HClO4-AcOH": "Flammable liquid and vapour.",
    "K2Cr2O7": "May cause cancer.",
    "EDTA": "May cause damage to organs through prolonged or repeated exposure.",
}


def test_each_new_pair_end_to_end(app, client, conn, make_user, signed_in_client, form_token):
    user = make_user("api-staff", "staff")
    token = tokens.create(conn, user.id, user.username, "e2e script")[1]
    certified: dict[str, tuple[str, float]] = {}  # titrant key -> (batch code, certified mol/L)
    codes: dict[tuple[str, str], str] = {}

    # Primary pairs: invented masses chosen for a 40 mL titre at 1.002 × nominal.
    for titrant_key, standard_key, _ in BY_HAND:
        t, s = chem.titrant(titrant_key), chem.standard(standard_key)
        nominal = records.policies(conn)[t.key].nominal_molarities[0]
        code = _register(client, token, t.key, nominal)
        lot = _lot(conn, s.key)
        nu = chem.stoichiometric_factor(t, s)
        m_mol = s.molar_mass.value
        true_c = nominal * 1.002
        buoyancy = corrections.buoyancy_factor(s.density_g_cm3)
        reps, expected = [], []
        for factor in (1.0, 1.012, 0.991):
            mass = round(true_c * 40.0 * m_mol / (1000.0 * nu) * factor, 4)
            titre = round(1000.0 * mass * buoyancy * nu / (m_mol * true_c), 2)
            reps.append({"mass_g": mass, "initial_ml": 0.0, "final_ml": titre})
            # c = 1000·m·b·P·ν/(M·V), worked by hand for each replicate (P = 1, 20 °C).
            expected.append(1000.0 * mass * buoyancy * nu / (m_mol * titre))
        run = {
            "purpose": "certify",
            "standard_lot_id": lot["id"],
            "performed_on": TODAY.isoformat(),
            "analyst": "Test Person (invented)",
            "burette_capacity_ml": 50,
            "replicates": reps,
        }
        pair = chem.pair_for(t, s)
        if pair is not None and pair[0].hot_min_c is not None:
            # Titrated hot: the run is refused until the solution's temperature is given, and given warm.
            refused = _call(client, "POST", f"/api/v1/batches/{code}/runs", token, run)
            assert refused.status_code == 422
            assert refused.get_json()["errors"][0]["field"] == "titration_temperature_c"
            cool = _call(client, "POST", f"/api/v1/batches/{code}/runs", token, {**run, "titration_temperature_c": 30})
            assert cool.status_code == 422 and "too cool" in cool.get_json()["errors"][0]["message"]
            run["titration_temperature_c"] = 75
        result = _release(client, token, code, run)
        assert result["molarity"] == pytest.approx(sum(expected) / 3, rel=2e-5), (titrant_key, standard_key)
        # Iodometric pairs ask for a blank; a run without one says so (common practice).
        assert any("no blank was recorded" in w for w in result["warnings"]) == bool(pair and pair[0].blank)
        certified.setdefault(t.key, (code, result["molarity"]))
        codes[(t.key, s.key)] = code

    hot = conn.execute("SELECT count(*) FROM runs WHERE titration_temperature_c = 75").fetchone()[0]
    assert hot == 2  # permanganate and cerium(IV) against oxalate, stored with the run

    # Secondary pairs: aliquots of the new batch titrated with a certified reference batch.
    secondary = [("I2", "Na2S2O3"), ("NH4SCN", "AgNO3"), ("ZnSO4", "EDTA"), ("FAS", "Ce(SO4)2"), ("FAS", "KMnO4")]
    secondary += [("K2Cr2O7", "FAS"), ("Na2S2O3", "I2")]
    for titrant_key, ref_key in secondary:
        t, ref = chem.titrant(titrant_key), chem.titrant(ref_key)
        nominal = records.policies(conn)[t.key].nominal_molarities[0]
        code = _register(client, token, t.key, nominal)
        ref_code, ref_c = certified[ref.key]
        nu = chem.stoichiometric_factor(t, ref)
        true_c = nominal * 1.002
        reps, expected = [], []
        for aliquot in (25.0, 25.0, 20.0):
            titre = round(true_c * aliquot / (nu * ref_c), 2)
            reps.append({"aliquot_ml": aliquot, "initial_ml": 0.0, "final_ml": titre})
            expected.append(ref_c * titre * nu / aliquot)  # c_x = c_ref·V_ref·ν/V_x, by hand
        run = {
            "method": "secondary",
            "purpose": "certify",
            "reference_batch": ref_code,
            "performed_on": TODAY.isoformat(),
            "analyst": "Test Person (invented)",
            "burette_capacity_ml": 50,
            "replicates": reps,
        }
        result = _release(client, token, code, run)
        assert result["molarity"] == pytest.approx(sum(expected) / 3, rel=2e-5), (titrant_key, ref_key)
        certified.setdefault(t.key, (code, result["molarity"]))
        codes[(t.key, ref.key)] = code

    # Labelled: each batch prints, with its hazard lines where its strength carries any.
    staff = signed_in_client("staff")
    for (titrant_key, _), code in codes.items():
        url = f"/batches/{code}/labels"
        resp = staff.post(url, data={"layout": "bottle", "copies": "1", "csrf_token": form_token(staff, url)})
        assert resp.status_code == 200 and resp.mimetype == "application/pdf", (titrant_key, resp.get_data(as_text=True)[:400])
        text = _pdf_text(resp.data)
        assert code in text
        if titrant_key in LABEL_TEXT:
            assert LABEL_TEXT[titrant_key] in text, titrant_key

    # Looked up on the lab day, by an alias, with the value certified.
    aliases = {t.key: t.aliases[0] for t in chem.OTHER_TITRANTS}
    for key, (code, molarity) in certified.items():
        body = client.get(f"/api/v1/lab-day?date={TODAY}&titrant={aliases[key]}").get_json()
        found = {b["batch_id"]: b for b in body["batches"]}
        assert code in found, (key, body)
        assert found[code]["molarity"] == pytest.approx(molarity, rel=1e-12)

    # The bench value of perchloric acid in acetic acid follows its own expansion (BP 2012 App. I B).
    code, c20 = certified["HClO4-AcOH"]
    body = client.get(f"/api/v1/lab-day?date={TODAY}&titrant=HClO4-AcOH&bench_temperature_c=25").get_json()
    entry = next(b for b in body["batches"] if b["batch_id"] == code)
    assert entry["use_temperature_c"] == 25
    assert entry["use_molarity"] == pytest.approx(c20 * (1 - 0.0011 * 5), rel=1e-9)


# ---------------------------------------------------------------------------------------------------------
# Preparation of the new titrants


@pytest.mark.parametrize(
    ("key", "molarity", "assay", "grams", "source"),
    [
        # 0.1 mol/L × 1 L × 248.18 g/mol (periodictable) / 0.995; USP thiosulfate VS takes "about 26 g" (from memory).
        ("Na2S2O3", 0.1, 0.995, 0.1 * periodictable.formula("Na2S2O3+5H2O").mass / 0.995, "USP"),
        # USP permanganate VS 0.02 M dissolves "about 3.3 g" per litre (from memory).
        ("KMnO4", 0.02, 0.99, 0.02 * periodictable.formula("KMnO4").mass / 0.99, "USP"),
        # Ph. Eur. 4.2.2 sodium edetate 0.05 M: 18.6 g of the dihydrate per litre (from memory).
        ("EDTA", 0.05, 1.0, 18.61, "Ph. Eur."),
        ("AgNO3", 0.1, 1.0, 16.99, "Ph. Eur."),  # silver nitrate 0.1 M: 17.0 g per litre (from memory)
    ],
)
def test_solid_titrants_are_weighed_as_the_form_on_the_bottle(key, molarity, assay, grams, source):
    plan = prep.preparation_plan(key, molarity, 1.0, assay, form="solid")
    assert plan.concentrate_mass_g == pytest.approx(grams, rel=1e-3)
    assert plan.concentrate_volume_ml is None
    text = " ".join(plan.instructions + plan.cautions)
    assert plan.cautions[-1] == prep.DEFER
    assert "acid to water, never the reverse" not in text or key in ("Ce(SO4)2", "FAS")


def test_perchloric_acid_in_acetic_acid_is_diluted_with_anhydride_and_its_cautions():
    # BP 2012 Appendix I B, Perchloric Acid VS: 8.5 mL of perchloric acid per litre of 0.1 M (looked up);
    # 0.1 mol/L × 100.46 g/mol / 0.70 / 1.67 g/mL = 8.59 mL (periodictable's molar mass).
    plan = prep.preparation_plan("HClO4-AcOH", 0.1, 1.0, 0.70, 1.67, form="liquid")
    by_hand = 0.1 * periodictable.formula("HClO4").mass / 0.70 / 1.67
    assert plan.concentrate_volume_ml == pytest.approx(by_hand, rel=1e-9)
    assert plan.concentrate_volume_ml == pytest.approx(8.5, abs=0.15)
    text = " ".join(plan.instructions)
    assert "acetic anhydride" in text and "glacial" in text and "24 hours" in text
    cautions = " ".join(plan.cautions)
    assert "flammable" in cautions and "acetyl perchlorate" in cautions and plan.cautions[-1] == prep.DEFER
    assert prep.caution_kind("HClO4-AcOH", "liquid") == prep.ACETIC_PERCHLORIC


@pytest.mark.parametrize(
    ("key", "kind", "phrase"),
    [
        ("KMnO4", prep.OXIDIZING_SOLID, "sintered-glass"),
        ("K2Cr2O7", prep.OXIDIZING_SOLID, "chromium(VI) waste"),
        ("AgNO3", prep.OXIDIZING_SOLID, "amber glass"),
        ("I2", prep.OXIDIZING_SOLID, "potassium iodide"),
        ("Na2S2O3", prep.SALT_SOLID, "sodium carbonate"),
        ("EDTA", prep.SALT_SOLID, "polyethylene"),
    ],
)
def test_each_new_titrant_gets_its_own_cautions_and_steps(key, kind, phrase):
    c = next(c for c in prep.CONCENTRATES if c.reagent == key)
    plan = prep.preparation_plan(key, 0.05, 1.0, c.assay_w_w, form=c.form)
    assert prep.caution_kind(key, "solid") == kind
    assert phrase in " ".join(plan.instructions + plan.cautions)
    # No acid-base line leaks in: no pellets, no CO2-free water for a redox or complexometric titrant.
    assert "pellets" not in " ".join(plan.cautions) and "CO2-free" not in " ".join(plan.instructions)


# ---------------------------------------------------------------------------------------------------------
# Chemistry-specific rules on the pages


def test_run_form_shows_the_pairs_rules_and_asks_the_flask_temperature(conn, signed_in_client):
    batch = _batch(conn, "KMnO4", 0.02, 5)
    html = signed_in_client("staff").get(f"/batches/{batch['code']}/runs/new").get_data(as_text=True)
    assert 'name="titration_temperature_c"' in html and "Temperature of the titrated solution" in html
    assert "How potassium permanganate is standardized" in html
    assert "2 MnO4⁻ + 5 C2O4²⁻ + 16 H⁺ → 2 Mn²⁺ + 10 CO2 + 8 H2O" in html
    assert "Titrate hot" in html and "amber glass" in html
    assert "6.700 mg Na2C2O4" in html


def test_bench_cautions_name_the_new_titrants():
    from types import SimpleNamespace

    from stockroom import labday

    entries = [SimpleNamespace(batch=SimpleNamespace(reagent=k, nominal_molarity=0.1)) for k in ("AgNO3", "HClO4-AcOH", "EDTA")]
    lines = labday.cautions(entries)
    text = " ".join(lines)
    assert "silver residue bottle" in text and "flammable and corrosive" in text
    assert "chromium" not in text  # only the titrants on the bench
    assert lines[-1].startswith("These are the usual cautions only")


def test_the_acetic_medium_enters_the_run_and_its_budget():
    from stockroom import standardization as std

    # The same invented KHP replicates at 23 °C, once as perchloric acid in acetic acid, once as if it
    # expanded like water: only the referral to 20 °C and the budget's temperature term differ.
    spec = std.standard_spec("HClO4-AcOH", "KHP")
    reps = tuple(
        std.Replicate(volume_ml=v, mass_g=m, temperature_c=23.0) for v, m in [(40.0, 0.8176), (40.4, 0.8259), (39.6, 0.8094)]
    )
    inst = std.Instruments.from_settings({})
    got = {}
    for key in ("HClO4-AcOH", "HClO4"):
        run = std.PrimaryRun(standard=spec, replicates=reps, nominal_molarity=0.1, titrant=chem.titrant(key))
        r = std.standardize_primary(run, inst)
        line = next(x for x in r.gum.lines if x.source == "titre temperature")
        got[key] = (r.molarity, line.contribution_rel)
    acetic, water = chem.titrant("HClO4-AcOH").expansion, corrections.WATER_LIKE
    # c(20 °C) = c(T)·ρ(20)/ρ(T) for each medium (the glass term is common and cancels in the ratio).
    ratio = corrections.referral_factor(acetic, 0.1, 23.0) / corrections.referral_factor(water, 0.1, 23.0)
    assert got["HClO4-AcOH"][0] / got["HClO4"][0] == pytest.approx(ratio, rel=1e-9)
    # The temperature term scales with the medium's expansion coefficient at 23 °C (about 4.6 times water's).
    alphas = corrections.expansion_coefficient(acetic, 0.1, 23.0) / corrections.expansion_coefficient(water, 0.1, 23.0)
    assert got["HClO4-AcOH"][1] / got["HClO4"][1] == pytest.approx(alphas, rel=1e-3)


def test_preview_takes_the_new_pairs_by_name_and_refuses_a_wrong_one(client):
    # Invented replicates: about 0.02 mol/L KMnO4 against sodium oxalate, titrated hot.
    body = {
        "titrant": "potassium permanganate",
        "standard": "sodium oxalate",
        "purity": 1.0,
        "purity_U": 0.0002,
        "purity_k": 2,
        "nominal_molarity": 0.02,
        "replicates": [
            {"mass_g": 0.2680, "volume_ml": 40.00},
            {"mass_g": 0.2712, "volume_ml": 40.48},
            {"mass_g": 0.2655, "volume_ml": 39.62},
        ],
    }
    resp = client.post("/api/v1/standardizations/preview", json=body)
    assert resp.status_code == 200, resp.get_json()
    j = resp.get_json()
    # c = 1000·m·b·ν/(M·V), ν = 2/5, by hand for the first replicate (buoyancy at 0.0012 g/cm3, 2.34 g/cm3).
    b = corrections.buoyancy_factor(2.34)
    first = 1000 * 0.2680 * b * 0.4 / (periodictable.formula("Na2C2O4").mass * 40.00)
    assert j["replicates"][0]["molarity"] == pytest.approx(first, rel=5e-5)
    wrong = client.post("/api/v1/standardizations/preview", json={**body, "standard": "NaCl"})
    assert wrong.status_code == 422
    assert "sodium oxalate" in json.dumps(wrong.get_json()) or "Na2C2O4" in json.dumps(wrong.get_json())


def test_batch_page_says_how_the_titrant_is_kept_and_its_medium(conn, client):
    batch = _batch(conn, "HClO4-AcOH", 0.1, 1)
    html = client.get(f"/batches/{batch['code']}").get_data(as_text=True)
    assert "Made in anhydrous acetic acid" in html and "0.0011 per °C" in html
    assert "Perchloric Acid VS" in html


def test_plan_api_weighs_thiosulfate_pentahydrate_and_refuses_a_solid_acid(client):
    resp = client.post(
        "/api/v1/preparation/plan",
        json={
            "reagent": "sodium thiosulfate",
            "nominal_molarity": "0.1",
            "volume_l": 2,
            "source_form": "solid",
            "concentrate_assay_pct": "99.5",
        },
    )
    assert resp.status_code == 200, resp.get_json()
    body = resp.get_json()
    # 2 L · 0.1 mol/L · M(Na2S2O3·5H2O) / 0.995 (periodictable's molar mass).
    grams = 2 * 0.1 * periodictable.formula("Na2S2O3+5H2O").mass / 0.995
    assert body["plan"]["concentrate_mass_g"] == pytest.approx(grams, rel=1e-4)
    assert body["display"]["figures"][0]["value"] == f"{grams:.2f} g"
    assert body["display"]["cautions"][-1] == prep.DEFER
    assert not any("CO2-free" in w for w in body["warnings"])
    acid = client.post(
        "/api/v1/preparation/plan",
        json={"reagent": "HCl", "nominal_molarity": "0.1", "volume_l": 2, "source_form": "solid", "concentrate_assay_pct": "37"},
    )
    assert acid.status_code == 422 and acid.get_json()["errors"][0]["field"] == "source_form"


def test_the_run_form_refuses_a_cold_permanganate_run_beside_the_field(app, conn, signed_in_client, form_token):
    from formposts import count, error_beside, post

    batch = _batch(conn, "KMnO4", 0.02, 5)
    lot = _lot(conn, "Na2C2O4")
    form = {
        "purpose": "certify",
        "standard_lot_id": str(lot["id"]),
        "performed_on": TODAY.isoformat(),
        "analyst": "Test Person",
        "burette_capacity_ml": "50.0",
        "titration_temperature_c": "22",
        "action": "record",
    }
    for i, (m, v) in enumerate([("0.2680", "40.00"), ("0.2712", "40.48"), ("0.2655", "39.62")], start=1):
        form.update({f"r{i}_mass_g": m, f"r{i}_initial_ml": "0.00", f"r{i}_final_ml": v})
    staff = signed_in_client("staff")
    before = count(app, "runs")
    page = post(staff, form_token, f"/batches/{batch['code']}/runs/new", form)
    assert page.status_code == 422
    assert "too cool" in error_beside(page.get_data(as_text=True), "titration_temperature_c")
    assert count(app, "runs") == before


def test_a_pair_titrates_only_when_its_reaction_is_recorded_or_it_is_aqueous_acid_base():
    # The whole catalogue, titrant × partner: nothing reacts by accident across classes or media.
    for t in chem.TITRANTS:
        for partner in (*chem.STANDARDS, *chem.TITRANTS):
            if partner is t:
                continue
            recorded = chem.pair_for(t, partner) is not None
            refused = frozenset({t.key, partner.key}) in chem.REFUSED
            aqueous_acid_base = (
                t.reaction_class == partner.reaction_class == chem.ACID_BASE
                and t.solvent == "water"
                and getattr(partner, "solvent", "water") == "water"
                and t.role != partner.role
            )
            assert chem.reacts(t, partner) == (recorded or (aqueous_acid_base and not refused)), (t.key, partner.key)


@settings(max_examples=60, deadline=None)
@given(st.sampled_from([s for p in chem.PAIRS for s in p.steps]), st.integers(min_value=2, max_value=7), st.data())
def test_scaled_equations_balance_and_a_changed_coefficient_does_not(step, k, data):
    # Conservation of atoms and charge: k times a balanced equation still balances; changing one
    # coefficient of a species that carries atoms or charge breaks it.
    left, right = chem.parse_equation(step)

    def text(lhs, rhs):
        return " + ".join(f"{n:g} {sp}" for n, sp in lhs) + " -> " + " + ".join(f"{n:g} {sp}" for n, sp in rhs)

    assert chem.imbalance(text([(n * k, sp) for n, sp in left], [(n * k, sp) for n, sp in right])) is None
    i = data.draw(st.integers(min_value=0, max_value=len(left) - 1))
    changed = [(n + 1 if j == i else n, sp) for j, (n, sp) in enumerate(left)]
    assert chem.imbalance(text(changed, right)) is not None
