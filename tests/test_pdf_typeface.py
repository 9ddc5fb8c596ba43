"""Every PDF stockroom makes uses one embedded typeface (DejaVu Sans) and keeps the characters it prints:
Greek letters, the combining bar of the mean-volume symbol, accented names beyond one code page, °, ±, ≤,
×, subscript digits. Checked with poppler's pdffonts and pdftotext, independent of reportlab, which wrote
the files."""

from __future__ import annotations

import datetime as dt
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from recorded_runs import good_replicates, khp_lot, record
from reportlab.graphics import renderPDF

from stockroom import readmodel, records, workflow
from stockroom import recall as recall_mod
from stockroom.pdf import charts, labels, layouts, typeface
from stockroom.pdf.recall_report import recall_report_pdf
from stockroom.policy import drift_on

pytestmark = pytest.mark.skipif(shutil.which("pdffonts") is None, reason="needs poppler-utils (pdffonts, pdftotext)")

# Invented people and places, with letters outside Windows-1252 (Ł, ő, ż) and inside it (ü, ñ, é).
ANALYST = "Zoë Łukasiewicz-Nuñez"
PREPARER = "Ödön Erdős-Müller"
INSTITUTION = "Département de Chimie, Łódź Prep Room (invented)"
# What a note may say: Greek, the mean volume V̄ (V + combining macron), ≤, ×, °, ±, subscripts.
NOTE = "V\u0304 ≤ 25.00 mL; μ, σ, ν, Δ; 2 × 10 mL at 20 °C ± 0.5 °C; CO₂-free H₂O"
REASON = "assay doubt: Δ of 0.3 % (σ ≈ 0.1 %), ≤ 25 °C; reported by Łucja Ősz"
FONT_NAME = re.compile(r"[A-Z]{6}\+DejaVuSans(Condensed)?(-Bold|-Oblique)?")


def lab_today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC


def fonts_of(pdf: bytes, tmp_path: Path) -> list[tuple[str, str]]:
    """(font name, embedded yes/no) of every font pdffonts lists."""
    path = tmp_path / "probe.pdf"
    path.write_bytes(pdf)
    out = subprocess.run(["pdffonts", str(path)], capture_output=True, text=True, check=True).stdout.splitlines()
    rows = []
    for line in out[2:]:  # a header line and a rule
        parts = line.split()
        # name, type (one or two words), encoding, emb, sub, uni, object, id
        rows.append((parts[0], parts[-5]))
    return rows


def text_of(pdf: bytes) -> str:
    out = subprocess.run(["pdftotext", "-", "-"], input=pdf, capture_output=True, check=True).stdout.decode("utf-8")
    return re.sub(r"\s+", " ", out)


def assert_one_embedded_typeface(pdf: bytes, tmp_path: Path) -> None:
    fonts = fonts_of(pdf, tmp_path)
    assert fonts, "the PDF lists no font"
    for name, embedded in fonts:
        assert FONT_NAME.fullmatch(name), f"font {name} is not the embedded typeface"
        assert embedded == "yes", f"font {name} is not embedded"


@pytest.fixture
def world(app, database):
    db, config = database, app.config
    config["INSTITUTION_NAME"] = INSTITUTION
    today = lab_today()
    lot = khp_lot(db, today)
    batch = records.create_batch(
        db,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": (today - dt.timedelta(days=5)).isoformat(),
            "prepared_by": PREPARER,
        },
        "setup",
    )
    reps = good_replicates()
    meta = {
        "purpose": "certify",
        "performed_on": (today - dt.timedelta(days=2)).isoformat(),
        "analyst": ANALYST,
        "burette_capacity_ml": 50.0,
        "notes": NOTE,
    }
    run_id, _ = record(db, config, batch, meta, reps, "setup", lot=lot)
    release_id = workflow.accept(db, run_id, "setup")
    return {"db": db, "config": config, "lot": lot, "batch": batch, "release_id": release_id}


def test_the_typeface_draws_every_character_stockroom_prints():
    for ch in "μσνΔαχ\u0304\u0305ŁłőŐżŻñüé°±≤≥×·−‑—₀₁₂₃₄₅₆₇₈₉²√":
        assert typeface.has_glyph(ch), f"U+{ord(ch):04X} is missing from the typeface"
    assert typeface.printable(NOTE) == NOTE


def test_certificate(client, world, tmp_path):
    resp = client.get(f"/releases/{world['release_id']}/certificate.pdf")
    assert resp.status_code == 200
    assert_one_embedded_typeface(resp.data, tmp_path)
    text = text_of(resp.data)
    assert INSTITUTION in text
    assert ANALYST in text and PREPARER in text
    assert "V\u0304 ≤ 25.00 mL" in text and "μ, σ, ν, Δ" in text and "2 × 10 mL at 20 °C ± 0.5 °C" in text
    assert "CO₂-free H₂O" in text


def test_certificate_without_an_institution_prints_none(client, world, tmp_path):
    world["config"]["INSTITUTION_NAME"] = ""
    text = text_of(client.get(f"/releases/{world['release_id']}/certificate.pdf").data)
    assert INSTITUTION not in text and text.lstrip().startswith("Certificate of standardization")


@pytest.mark.parametrize("name", sorted(layouts.load_all()[0]))
def test_labels_on_every_layout(world, name, tmp_path):
    content = labels.label_content(world["db"], world["config"], world["batch"], lab_today())
    assert content.prepared_by == PREPARER and content.institution == INSTITUTION
    pdf = labels.build_labels(content, layouts.get(name), copies=2)
    assert_one_embedded_typeface(pdf, tmp_path)
    text = text_of(pdf)
    assert "±" in text and "°C" in text
    field_text = " ".join(f.text for f in layouts.get(name).fields)
    if "{prepared_by}" in field_text:
        assert PREPARER in text
    if "{institution}" in field_text:
        assert INSTITUTION in text


def test_lab_day_sheet(client, world, tmp_path):
    resp = client.get(f"/lab-day.pdf?date={lab_today().isoformat()}&titrant=NaOH&bench_temperature_c=23")
    assert resp.status_code == 200
    assert_one_embedded_typeface(resp.data, tmp_path)
    text = text_of(resp.data)
    assert INSTITUTION in text and world["batch"]["code"] in text
    assert "±" in text and "23.0 °C" in text


def test_lab_day_sheet_without_an_institution_prints_none(client, world):
    world["config"]["INSTITUTION_NAME"] = ""
    text = text_of(client.get(f"/lab-day.pdf?date={lab_today().isoformat()}&titrant=NaOH").data)
    assert "Łódź" not in text and text.lstrip().startswith("NaOH for the lab day")


def test_recall_report(world, tmp_path):
    db = world["db"]
    rid = recall_mod.open_recall(db, "lot", world["lot"]["id"], lab_today() - dt.timedelta(days=30), REASON, lab_today(), "setup")
    pdf = recall_report_pdf(recall_mod.impact(db, rid, lab_today()), printed_on=lab_today())
    assert_one_embedded_typeface(pdf, tmp_path)
    assert REASON in text_of(pdf)
    # A character the typeface lacks prints as '?', not as an empty box.
    odd = recall_mod.open_recall(db, "batch", world["batch"]["id"], lab_today(), "label 漢 smudged", lab_today(), "setup")
    assert "label ? smudged" in text_of(recall_report_pdf(recall_mod.impact(db, odd, lab_today()), printed_on=lab_today()))


def test_drift_chart(world, tmp_path):
    facts = readmodel.batch_facts(world["db"], world["batch"]["id"])
    release = next(r for r in facts.releases if r.id == world["release_id"])
    drawing = charts.drift_drawing(drift_on(facts, lab_today(), release), 500, 200)
    pdf = renderPDF.drawToString(drawing)
    assert_one_embedded_typeface(pdf, tmp_path)
    assert "molarity at 20 °C (mol/L)" in text_of(pdf)
