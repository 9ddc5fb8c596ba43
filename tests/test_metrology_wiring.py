"""The metrology reaches every door: overrides with reasons, k from ν_eff, glassware classes, referral models.

Each test goes through a real door (the run form, the JSON API, the preview, the certificate and label
PDFs read back with pypdf) rather than the pure modules, which tests/test_standardization.py covers.
"""

from __future__ import annotations

import datetime as dt
import io
import json
import math
import re

import pypdf
import pytest
import scipy.stats
from formposts import post
from recorded_runs import record

from stockroom import create_app, records, standardization, tokens, workflow
from stockroom import db as dbmod
from stockroom import instruments as inst_mod
from stockroom.pdf import certificates, layouts
from stockroom.pdf.labels import build_labels, label_content

TODAY = dt.date.today()
# Invented replicates: about 0.1 mol/L NaOH against KHP (gross, tare in g; initial, final in mL).
ROWS = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
]
# Three invented replicates scattered by about 0.15 % RSD (within the 0.2 % rule): the repeatability,
# with ν = 2, then dominates u, so ν_eff is small and k = t(ν_eff) is well above 2.
SCATTERED = [
    ("12.0000", "11.1800", "0.00", "40.14"),
    ("12.0000", "11.1800", "0.00", "40.20"),
    ("12.0000", "11.1800", "0.00", "40.26"),
]
REASON = "batch made at twice strength on purpose for the stock bottle (invented)"


def _text(pdf: bytes) -> str:
    return re.sub(r"\s+", " ", "\n".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages))


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


def _batch(conn, nominal=0.1, reagent="NaOH"):
    return records.create_batch(
        conn,
        {
            "reagent": reagent,
            "nominal_molarity": nominal,
            "volume_l": 20,
            "prepared_on": (TODAY - dt.timedelta(days=2)).isoformat(),
            "prepared_by": "Test Person (invented)",
            "water_grade": "CO2-free",
        },
        "setup",
    )


def _lot(conn):
    return records.create_lot(
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


def _form(lot, rows=ROWS, **extra):
    form = {
        "purpose": "certify",
        "standard_lot_id": str(lot["id"]),
        "performed_on": TODAY.isoformat(),
        "analyst": "Test Person",
        "burette_capacity_ml": "50.0",
    }
    for i, (g, t, a, b) in enumerate(rows, start=1):
        form.update({f"r{i}_gross_g": g, f"r{i}_tare_g": t, f"r{i}_initial_ml": a, f"r{i}_final_ml": b})
    form.update(extra)
    return form


def _reps(rows=ROWS):
    return [
        {"mass_gross_g": float(g), "mass_tare_g": float(t), "initial_ml": float(a), "final_ml": float(b)} for g, t, a, b in rows
    ]


# ------------------------------------------------------------------------------------------- overrides


def test_twice_nominal_run_by_the_form_shows_a_reason_box_then_is_stored_with_the_reason(app, conn, signed_in_client, form_token):
    # ~0.1 mol/L entries on a batch labelled 0.05 mol/L: twice the nominal, refused unless gone ahead
    # despite with a reason (the ±10 % band around 2x is common practice, standardization.py).
    batch, lot = _batch(conn, nominal=0.05), _lot(conn)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}/runs/new"
    page = post(staff, form_token, url, _form(lot, action="preview"))
    html = page.get_data(as_text=True)
    assert page.status_code == 200
    assert 'name="overrides[nominal-twice-or-half]"' in html and "to go ahead, override" in html
    # A reason past the limit is refused beside its box, nothing stored.
    long = post(staff, form_token, url, _form(lot, action="record", **{"overrides[nominal-twice-or-half]": "x" * 501}))
    assert long.status_code == 422
    assert 'name="overrides[nominal-twice-or-half]"' in long.get_data(as_text=True)
    assert conn.execute("SELECT count(*) FROM runs").fetchone()[0] == 0
    # With a reason: stored, the check marked gone ahead, the reason on the run page and in the trail.
    resp = post(staff, form_token, url, _form(lot, action="record", **{"overrides[nominal-twice-or-half]": REASON}))
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    stored = records.run_by_id(conn, run_id)["current"]["result"]
    assert stored["overrides"] == {"nominal-twice-or-half": REASON}
    assert stored["overridden_by"] == "staff-user"
    assert [c["code"] for c in stored["checks"]] == ["nominal-twice-or-half"]
    assert stored["checks"][0]["override_reason"] == REASON
    assert stored["accepted"] is True and stored["nominal_ratio"] == pytest.approx(2.0, rel=0.05)
    page = staff.get(f"/runs/{run_id}").get_data(as_text=True)
    assert f"overridden by staff-user: {REASON}" in page
    detail = json.loads(
        conn.execute("SELECT detail FROM events WHERE action = 'run.record.certify' ORDER BY id DESC").fetchone()[0]
    )
    assert detail["overrides"] == {"nominal-twice-or-half": REASON} and detail["checks"] == ["nominal-twice-or-half"]
    # Leaving a replicate out recomputes with the same override: it still stands.
    workflow.exclude(conn, app.config, run_id, 3, "spilled (invented)", "staff-user")
    assert records.run_by_id(conn, run_id)["current"]["result"]["checks"][0]["override_reason"] == REASON


def test_overrides_by_json_and_their_refusals(client, conn, make_user):
    batch, lot = _batch(conn, nominal=0.05), _lot(conn)
    user = make_user("api-staff", "staff")
    token = tokens.create(conn, user.id, user.username, "script")[1]
    run = {
        "purpose": "certify",
        "standard_lot_id": lot["id"],
        "performed_on": TODAY.isoformat(),
        "analyst": "API Person",
        "burette_capacity_ml": 50,
        "replicates": [
            {"gross_g": float(g), "tare_g": float(t), "initial_ml": float(a), "final_ml": float(b)} for g, t, a, b in ROWS
        ],
    }

    def call(body):
        return client.post(
            f"/api/v1/batches/{batch['code']}/runs",
            headers={"Authorization": f"Bearer {token}"},
            data=json.dumps(body),
            content_type="application/json",
        )

    for overrides, field in (
        ({"nominal-twice-or-half": "  "}, "overrides[nominal-twice-or-half]"),
        ({"no-such-check": "because"}, "overrides[no-such-check]"),
        ({"nominal-twice-or-half": "y" * 501}, "overrides[nominal-twice-or-half]"),
        ("go ahead", "overrides"),
    ):
        resp = call({**run, "overrides": overrides})
        assert resp.status_code == 422, resp.get_json()
        assert [e["field"] for e in resp.get_json()["errors"]] == [field]
    assert conn.execute("SELECT count(*) FROM runs").fetchone()[0] == 0
    refused = call(run).get_json()["result"]
    assert refused["accepted"] is False and refused["checks"][0]["override_reason"] is None
    body = call({**run, "overrides": {"nominal-twice-or-half": REASON}}).get_json()
    assert body["result"]["accepted"] is True and body["result"]["overrides"] == {"nominal-twice-or-half": REASON}


def test_the_preview_takes_overrides_as_the_run_doors_do(client):
    body = {
        "titrant": "NaOH",
        "standard": "KHP",
        "purity": 1.0,
        "nominal_molarity": 0.05,
        "replicates": [
            {"mass_g": round(float(g) - float(t), 4), "initial_ml": float(a), "final_ml": float(b)} for g, t, a, b in ROWS
        ],
    }
    refused = client.post("/api/v1/standardizations/preview", json=body).get_json()
    assert refused["accepted"] is False and refused["checks"][0]["code"] == "nominal-twice-or-half"
    gone = client.post("/api/v1/standardizations/preview", json={**body, "overrides": {"nominal-twice-or-half": REASON}})
    assert gone.status_code == 200 and gone.get_json()["accepted"] is True
    bad = client.post("/api/v1/standardizations/preview", json={**body, "overrides": {"nominal-twice-or-half": ""}})
    assert bad.status_code == 422 and bad.get_json()["errors"][0]["field"] == "overrides[nominal-twice-or-half]"


# --------------------------------------------------------------------------------------- k and ν_eff


def _released(app, conn, config=None):
    batch, lot = _batch(conn), _lot(conn)
    meta = {"purpose": "certify", "performed_on": TODAY.isoformat(), "analyst": "Test Person", "burette_capacity_ml": 50.0}
    run_id, result = record(conn, config or app.config, batch, meta, _reps(SCATTERED), "setup", lot=lot)
    return batch, run_id, result, workflow.accept(conn, run_id, "setup")


def test_three_replicates_under_effective_dof_state_k_from_t_on_the_certificate_and_label(app, conn):
    assert app.config["COVERAGE_K_POLICY"] == "effective-dof"  # the declared default (settings.py)
    batch, run_id, result, release_id = _released(app, conn)
    # k = t_0.975(ν_eff), ν_eff by Welch-Satterthwaite truncated to the next lower integer (GUM G.4.1);
    # the quantile from scipy independently.
    assert math.isfinite(result.nu_eff) and 2 < result.nu_eff < 20
    assert result.k == pytest.approx(scipy.stats.t.ppf(0.975, math.floor(result.nu_eff)), rel=1e-9)
    assert result.k > 2.0 and result.U == pytest.approx(result.k * result.u)
    k_text = f"k = {result.k:.3g}"
    data = certificates.certificate_data(conn, release_id, TODAY)
    text = _text(certificates.build_certificate(data))
    assert k_text in text and "95 % coverage" in text and f"ν_eff = {result.nu_eff:.1f}" in text
    found, _ = layouts.load_all()
    label = _text(build_labels(label_content(conn, app.config, batch, TODAY), next(iter(found.values())), copies=1))
    assert k_text in label
    page = app.test_client().get(f"/runs/{run_id}").get_data(as_text=True)
    assert f"{k_text} for 95 % coverage" in page and f"ν_eff = {result.nu_eff:.1f}" in page


def test_the_fixed_k_setting_prints_k_2_and_says_the_procedure_fixed_it(app, conn):
    config = {**app.config, "COVERAGE_K_POLICY": "fixed"}
    _, _, result, release_id = _released(app, conn, config)
    assert result.k == 2.0 and result.coverage is None
    text = _text(certificates.build_certificate(certificates.certificate_data(conn, release_id, TODAY)))
    assert "k = 2 fixed by the laboratory's procedure" in text
    assert "95 % coverage" not in text


def test_preview_display_strings_carry_k_and_nu_eff(client):
    body = {
        "titrant": "NaOH",
        "standard": "KHP",
        "purity": 1.0,
        "replicates": [
            {"mass_g": round(float(g) - float(t), 4), "initial_ml": float(a), "final_ml": float(b)} for g, t, a, b in SCATTERED
        ],
    }
    j = client.post("/api/v1/standardizations/preview", json=body).get_json()
    # scipy's t quantile at ν_eff truncated to an integer (GUM G.4.1).
    assert j["k"] == pytest.approx(scipy.stats.t.ppf(0.975, math.floor(j["nu_eff"])), rel=1e-9) and j["k"] > 2.1
    assert j["display"]["k"] == f"k = {j['k']:.3g}"
    assert j["display"]["nu_eff"] == f"{j['nu_eff']:.1f}"
    assert j["display"]["coverage"].startswith(f"k = {j['k']:.3g} for 95 % coverage")
    assert f"(k = {j['k']:.3g})" in j["display"]["molarity"]


def test_settings_refuse_an_unknown_policy():
    with pytest.raises(ValueError, match="COVERAGE_K_POLICY"):
        standardization.Instruments.from_settings({"COVERAGE_K_POLICY": "always-two"})


# ------------------------------------------------------------------------------------ glassware classes


def _titre_line(result):
    budget = standardization.result_as_dict(result)["budget"]
    titre = next(b for b in budget if b["source"] == "titre volume")
    return " ".join(c["derivation"] for c in titre["components"])


def test_a_25_ml_class_a_burette_takes_0_03_ml_in_the_budget(app, conn):
    # ISO 385 Class A 25 mL: ±0.03 mL (glassware.py, from memory of the standard's table; ASTM E287 agrees).
    rows = [
        ("10.4000", "10.0000", "0.10", "19.70"),
        ("10.4050", "10.0000", "0.20", "19.85"),
        ("10.3950", "10.0000", "0.05", "19.55"),
    ]
    batch, lot = _batch(conn), _lot(conn)
    meta = {"purpose": "certify", "performed_on": TODAY.isoformat(), "analyst": "T", "burette_capacity_ml": 25.0}
    _, result = record(conn, app.config, batch, meta, _reps(rows), "setup", lot=lot)
    assert "0.03 mL" in _titre_line(result)
    # The same run with the default 50 mL burette carries the ±0.05 mL figure (ISO 385, confirmed).
    meta50 = {**meta, "burette_capacity_ml": 50.0}
    _, result50 = record(conn, app.config, batch, meta50, _reps(rows), "setup", lot=lot)
    assert "0.05 mL" in _titre_line(result50)


def test_class_b_comes_from_the_table_and_the_register_wins(app):
    # ISO 385 Class B 25 mL: ±0.05 mL (glassware.py; from memory), not twice Class A (0.06).
    assert inst_mod.class_tolerance("burette", "B", 25.0) == 0.05
    assert inst_mod.class_tolerance("burette", "A", 25.0) == 0.03
    assert inst_mod.class_tolerance("pipette", "A", 25.0) == 0.03  # ISO 648 Class A 25 mL (from memory)
    assert inst_mod.class_tolerance("burette", "A", 30.0) is None
    burette = inst_mod.Instrument(id=1, code="BUR-B", kind="burette", capacity=25.0, accuracy_class="B")
    assert inst_mod.figures(app.config, {"burette": burette}, TODAY).burette_tolerance_ml == 0.05
    own = inst_mod.Instrument(id=2, code="BUR-OWN", kind="burette", capacity=25.0, accuracy_class="B", tolerance=0.04)
    assert inst_mod.figures(app.config, {"burette": own}, TODAY).burette_tolerance_ml == 0.04
    pipette = inst_mod.Instrument(id=3, code="PIP-10", kind="pipette", capacity=10.0, accuracy_class="A")
    figs = inst_mod.figures(app.config, {"pipette": pipette}, TODAY)
    assert figs.pipette_capacity_ml == 10.0 and figs.pipette_tolerance_ml == 0.02  # ISO 648 A 10 mL (memory)
    # The settings' class applies to the default burette: Class B 50 mL is ±0.10 mL (ISO 385, confirmed).
    b_app = create_app({"DATABASE": app.config["DATABASE"], "TESTING": True, "BURETTE_CLASS": "B"})
    assert standardization.Instruments.from_settings(b_app.config).burette_tolerance_ml == 0.10


# ----------------------------------------------------------------------------- temperature and lab day


def test_the_secondary_temperature_setting_defaults_to_shared(app):
    assert standardization.Instruments.from_settings(app.config).temperature_terms == "shared"
    assert standardization.Instruments.from_settings({"SECONDARY_TEMPERATURE_TERMS": "independent"}).temperature_terms == (
        "independent"
    )


def test_the_lab_day_page_names_the_referral_model(app, conn):
    batch, _, _, _ = _released(app, conn)
    html = app.test_client().get(f"/lab-day?titrant=NaOH&bench_temperature_c=25&date={TODAY.isoformat()}").get_data(as_text=True)
    assert batch["code"] in html and "referred from 20 °C by water density (Tanaka 2001)" in html
    j = app.test_client().get(f"/api/v1/lab-day?titrant=NaOH&bench_temperature_c=25&date={TODAY.isoformat()}").get_json()
    assert j["batches"][0]["bench_referral_model"] == "water density (Tanaka 2001)"
