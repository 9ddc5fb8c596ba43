"""Certificates of standardization: read back with pypdf and checked against the records they state."""

from __future__ import annotations

import datetime as dt
import io
import math
import re

import pypdf
import pytest
from click.testing import CliRunner
from recorded_runs import record

from stockroom import readmodel, records, workflow
from stockroom.formatting import molarity as format_molarity
from stockroom.pdf import certificates

# Invented replicates: about 0.1 mol/L NaOH against KHP (gross, tare in g; initial, final in mL).
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def lab_today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC


def text_of(pdf: bytes) -> str:
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    return "\n".join(page.extract_text() for page in reader.pages)


def flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


@pytest.fixture
def world(app, database):
    db, config = database, app.config
    today = lab_today()
    lot = records.create_lot(
        db,
        {
            "substance": "KHP",
            "assay": 0.9998,
            "assay_expanded_u": 0.0004,
            "assay_k": 2,
            "supplier": "Invented Chemicals",
            "supplier_lot": "K-7781",
            "expires_on": (today + dt.timedelta(days=300)).isoformat(),
            "dried_on": today.isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )
    naoh = records.create_batch(
        db,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": (today - dt.timedelta(days=5)).isoformat(),
            "prepared_by": "R. Okafor (invented)",
            "water_grade": "CO2-free",
        },
        "setup",
    )
    reps = [
        {
            "mass_gross_g": float(g),
            "mass_tare_g": float(t),
            "initial_ml": float(i),
            "final_ml": float(f),
            "volume_ml": round(float(f) - float(i), 2),
        }
        for g, t, i, f in GOOD
    ]
    reps.append(
        {"mass_gross_g": 12.1000, "mass_tare_g": 11.2800, "initial_ml": 0.10, "final_ml": 41.90, "volume_ml": 41.80}
    )  # a fifth, spoiled titration, left out with its reason
    meta = {
        "purpose": "certify",
        "performed_on": (today - dt.timedelta(days=2)).isoformat(),
        "analyst": "R. Okafor",
        "burette_capacity_ml": 50.0,
        "endpoint": "phenolphthalein, faint pink for 30 s",
    }
    run_id, _ = record(db, config, naoh, meta, reps, "setup", lot=lot, excluded={5: "overshot the end point"})
    release_id = workflow.accept(db, run_id, "setup")
    return {"db": db, "config": config, "lot": lot, "naoh": naoh, "run_id": run_id, "release_id": release_id}


def test_certificate_of_a_primary_standardization_states_what_the_records_hold(world):
    db = world["db"]
    data = certificates.certificate_data(db, world["release_id"], lab_today())
    text = flat(text_of(certificates.build_certificate(data)))
    rel = data["release"]
    run = records.run_by_id(db, world["run_id"])
    assert "Certificate of standardization" in text
    assert f"Batch {world['naoh']['code']} · sodium hydroxide (NaOH), 0.1 mol/L nominal" in text
    assert f"{format_molarity(rel['molarity'], rel['expanded_u'], rel['k'])} at 20 °C" in text
    assert f"Expires {rel['expires_on']}" in text
    # The lot and its certificate.
    assert "STD-KHP-001" in text and "K-7781" in text and "99.980 ± 0.040 % (k = 2)" in text
    # Every replicate with its molarity; the excluded one with its reason.
    # Each to the decimal place of U's second significant figure, as the value is (JCGM 100:2008, 7.2.6).
    places = 1 - math.floor(math.log10(run["current"]["result"]["U"]))
    for rep in run["replicates"]:
        assert f"{rep['molarity']:.{places}f}" in text
    assert "excluded: overshot the end point" in text
    assert "Replicates used 4 of 5" in text
    # The budget: the purity's relative standard uncertainty is U/(k x) = 0.0004 / (2 x 0.9998)
    # (JCGM 100:2008, 4.3.3: a quoted expanded uncertainty divided by its coverage factor).
    # 0.0004 / (2 x 0.9998) = 2.0004e-4, i.e. 0.020 % to two significant figures.
    assert "0.020 %" in text
    for b in run["current"]["result"]["budget"]:
        assert b["source"] in text
        assert f"{b['share'] * 100:.1f} %" in text
    # The screening as computed, people and signature lines.
    assert "Grubbs" in text and "Dixon" in text
    assert "Standardized by R. Okafor on " + run["performed_on"] in text
    assert "Accepted and released by setup at" in text
    assert "Standardized by (signature)" in text and "Released by (signature)" in text
    assert "SUPERSEDED" not in text and "WITHDRAWN" not in text
    assert "chemical hygiene plan" in text


def test_the_drift_chart_is_embedded(world):
    data = certificates.certificate_data(world["db"], world["release_id"], lab_today())
    assert data["drift"] is not None
    chart = certificates._drift_flowable(data["drift"], 500)
    from reportlab.graphics.shapes import Drawing

    assert isinstance(chart, Drawing) and chart.width == 500
    assert "its tolerance band and the re-checks of this release" in flat(text_of(certificates.build_certificate(data)))


def test_a_superseded_release_says_so_at_the_top(world):
    db = world["db"]
    first = world["release_id"]
    reps = [
        {
            "mass_gross_g": float(g),
            "mass_tare_g": float(t),
            "initial_ml": float(i),
            "final_ml": float(f),
            "volume_ml": round(float(f) - float(i), 2),
        }
        for g, t, i, f in GOOD
    ]
    meta = {"purpose": "certify", "performed_on": lab_today().isoformat(), "analyst": "M. Lindqvist", "burette_capacity_ml": 50.0}
    run_id, _ = record(db, world["config"], world["naoh"], meta, reps, "setup", lot=world["lot"])
    second = workflow.accept(db, run_id, "setup", reason="re-standardized")
    old = flat(text_of(certificates.build_certificate(certificates.certificate_data(db, first, lab_today()))))
    new_release = readmodel.batch_history(db, world["naoh"]["id"])["releases"][-1]
    assert f"SUPERSEDED: release {second} of {new_release['released_on']}" in old
    assert format_molarity(new_release["molarity"], new_release["expanded_u"], new_release["k"]) in old
    current = certificates.certificate_data_for_batch(db, world["naoh"]["code"], lab_today())
    assert current["release"]["id"] == second and f"release {first}" in flat(
        text_of(certificates.build_certificate(current))
    )  # "Supersedes release <first>"


def test_a_withdrawn_batch_certificate_says_withdrawn(world):
    records.withdraw_batch(world["db"], world["naoh"]["id"], lab_today(), "carbonate found", "setup")
    data = certificates.certificate_data(world["db"], world["release_id"], lab_today())
    assert f"WITHDRAWN: the batch was withdrawn from use on {lab_today().isoformat()} (carbonate found)." in flat(
        text_of(certificates.build_certificate(data))
    )


def test_a_secondary_standardization_shows_the_traceability_chain(world):
    db, config = world["db"], world["config"]
    hcl = records.create_batch(
        db,
        {
            "reagent": "HCl",
            "nominal_molarity": 0.1,
            "volume_l": 10,
            "prepared_on": (lab_today() - dt.timedelta(days=1)).isoformat(),
            "prepared_by": "J. Abara (invented)",
        },
        "setup",
    )
    # 25.00 mL aliquots of the HCl titrated with the certified NaOH (invented readings).
    reps = [
        {"aliquot_ml": 25.00, "initial_ml": 0.10, "final_ml": v, "volume_ml": round(v - 0.10, 2)}
        for v in (25.12, 25.15, 25.10, 25.13)
    ]
    meta = {"purpose": "certify", "performed_on": lab_today().isoformat(), "analyst": "J. Abara", "burette_capacity_ml": 50.0}
    run_id, _ = record(db, config, hcl, meta, reps, "setup", reference=world["naoh"])
    release_id = workflow.accept(db, run_id, "setup")
    data = certificates.certificate_data(db, release_id, lab_today())
    assert [step["batch"]["code"] for step in data["chain"]] == [world["naoh"]["code"]]
    text = flat(text_of(certificates.build_certificate(data)))
    ref = readmodel.batch_history(db, world["naoh"]["id"])["releases"][0]
    assert "Secondary standardization" in text
    assert world["naoh"]["code"] in text and f"release {ref['id']} of {ref['released_on']}" in text
    assert format_molarity(ref["molarity"], ref["expanded_u"], ref["k"]) in text
    assert "lot STD-KHP-001" in text  # the bottom of the chain: the primary standard
    assert "Aliquot (mL)" in text and "25.00" in text


def test_certificates_over_the_web(app, client, world):
    code = world["naoh"]["code"]
    resp = client.get(f"/releases/{world['release_id']}/certificate.pdf")  # a read: open to the lab network
    assert resp.status_code == 200 and resp.mimetype == "application/pdf"
    assert resp.headers["Content-Disposition"] == (f'attachment; filename="certificate-{code}-release-{world["release_id"]}.pdf"')
    assert code in text_of(resp.data)
    assert client.get(f"/batches/{code}/certificate.pdf").status_code == 200
    assert client.get("/releases/9999/certificate.pdf").status_code == 404
    fresh = records.create_batch(
        world["db"],
        {"reagent": "HCl", "nominal_molarity": 0.1, "volume_l": 10, "prepared_on": lab_today().isoformat(), "prepared_by": "x"},
        "setup",
    )
    missing = client.get(f"/batches/{fresh['code']}/certificate.pdf")
    assert missing.status_code == 404 and "not been released" in missing.get_data(as_text=True)
    page = client.get(f"/batches/{code}").get_data(as_text=True)
    assert f"/releases/{world['release_id']}/certificate.pdf" in page


def test_cli_writes_the_certificate(app, world, tmp_path):
    from stockroom.cli import main

    out = tmp_path / "cert.pdf"
    result = CliRunner().invoke(main, ["certificate", world["naoh"]["code"], "--db", app.config["DATABASE"], "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "Certificate of standardization" in text_of(out.read_bytes())
    missing = CliRunner().invoke(main, ["certificate", "NOPE-0000-00", "--db", app.config["DATABASE"], "--out", str(out)])
    assert missing.exit_code == 1 and "no batch with ID" in missing.output
