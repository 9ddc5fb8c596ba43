"""Releases are numbered within their batch ("release 2 of NAOH-..."), never by the table's row id: pages,
certificates (title, footer, file name), recall pages and report, the audit trail's words."""

from __future__ import annotations

import datetime as dt
import io
import re
import subprocess

import pypdf
import pytest
from recorded_runs import good_replicates, khp_lot, record

from stockroom import readmodel, records, workflow
from stockroom import recall as recall_mod
from stockroom.pdf import certificates
from stockroom.pdf.recall_report import recall_report_pdf


def lab_today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC


def flat_text(pdf: bytes) -> str:
    return re.sub(r"\s+", " ", "\n".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages))


@pytest.fixture
def world(app, database):
    """Batch A released once (row id 1); batch B released twice (row ids 2 and 3: its releases 1 and 2)."""
    db, config = database, app.config
    today = lab_today()
    lot = khp_lot(db, today)

    def batch(days_ago):
        return records.create_batch(
            db,
            {
                "reagent": "NaOH",
                "nominal_molarity": 0.1,
                "volume_l": 20,
                "prepared_on": (today - dt.timedelta(days=days_ago)).isoformat(),
                "prepared_by": "R. Okafor (invented)",
            },
            "setup",
        )

    def release(b, days_ago):
        meta = {
            "purpose": "certify",
            "performed_on": (today - dt.timedelta(days=days_ago)).isoformat(),
            "analyst": "R. Okafor",
            "burette_capacity_ml": 50.0,
        }
        run_id, _ = record(db, config, b, meta, good_replicates(), "setup", lot=lot)
        # Superseding a value in force asks why (the second release of B).
        return workflow.accept(db, run_id, "setup", reason="re-standardized after the carboy was topped up")

    a, b = batch(9), batch(8)
    ids = [release(a, 6), release(b, 5), release(b, 1)]
    return {"db": db, "lot": lot, "a": a, "b": b, "ids": ids}


def test_numbers_count_within_the_batch_not_the_table(world):
    a1, b1, b2 = world["ids"]
    assert (a1, b1, b2) == (1, 2, 3)  # row ids run across batches
    assert records.release_numbers(world["db"], [a1, b1, b2, 999]) == {a1: 1, b1: 1, b2: 2}
    code = world["b"]["code"]
    assert records.release_labels(world["db"], [b2]) == {b2: f"release 2 of {code}"}
    history = readmodel.batch_history(world["db"], world["b"]["id"])
    assert [(r["id"], r["number"]) for r in history["releases"]] == [(b1, 1), (b2, 2)]


def test_certificate_title_footer_and_links_use_the_number(world):
    db, code = world["db"], world["b"]["code"]
    _, b1, b2 = world["ids"]
    pdf = certificates.build_certificate(certificates.certificate_data(db, b2, lab_today()))
    text = flat_text(pdf)
    assert f"release 2 of {code}" in text  # heading line and footer
    assert text.count(f"release 2 of {code}") >= 2
    assert f"Supersedes release 1 of {code}" in text
    assert "release 3" not in text  # the row id
    assert pypdf.PdfReader(io.BytesIO(pdf)).metadata.title == f"Certificate of standardization, release 2 of {code}"
    old = flat_text(certificates.build_certificate(certificates.certificate_data(db, b1, lab_today())))
    assert "SUPERSEDED: release 2 of " in old and f"release 1 of {code}" in old


def test_certificate_file_names_and_batch_page(client, world):
    code = world["b"]["code"]
    _, b1, b2 = world["ids"]
    resp = client.get(f"/releases/{b2}/certificate.pdf")
    assert resp.headers["Content-Disposition"] == f'attachment; filename="certificate-{code}-release-2.pdf"'
    resp = client.get(f"/batches/{code}/certificate.pdf")
    assert resp.headers["Content-Disposition"] == f'attachment; filename="certificate-{code}-release-2.pdf"'
    page = client.get(f"/batches/{code}").get_data(as_text=True)
    assert "certificate of release 1</a>" in page and "certificate of release 2</a>" in page
    assert "release 3" not in page


def test_the_audit_trail_names_releases_by_number(signed_in_client, world):
    page = signed_in_client("admin").get(f"/audit?batch={world['b']['code']}").get_data(as_text=True)
    assert "release: release 2" in page and "supersedes: release 1" in page
    assert "release: release 1" in page and "supersedes: none (first release)" in page
    assert "release 3" not in page


def test_recall_page_and_report_name_releases_by_number(signed_in_client, world):
    db = world["db"]
    rid = recall_mod.open_recall(
        db, "lot", world["lot"]["id"], lab_today() - dt.timedelta(days=30), "assay doubt", lab_today(), "setup"
    )
    report = recall_mod.impact(db, rid, lab_today())
    numbers = sorted((r.batch_code, r.number) for r in report.releases)
    assert numbers == sorted([(world["a"]["code"], 1), (world["b"]["code"], 1), (world["b"]["code"], 2)])
    pdf = recall_report_pdf(report, printed_on=lab_today())
    text = subprocess.run(["pdftotext", "-layout", "-", "-"], input=pdf, capture_output=True, check=True).stdout.decode()
    flat = re.sub(r"\s+", " ", text)
    b_code = world["b"]["code"]
    # The releases reached (batch, release number of its date) and the days in force (batch, number, dates).
    assert re.search(rf"{b_code} 2 0\.\d+ ± ", flat), flat
    assert not re.search(rf"{b_code} 3 ", flat), flat
    assert re.search(rf"{b_code} 2 \d{{4}}-\d{{2}}-\d{{2}} \d{{4}}-\d{{2}}-\d{{2}}", flat), flat
    page = signed_in_client("admin").get(f"/recalls/{rid}").get_data(as_text=True)
    assert ">release 2</a> of" in page and ">release 3</a>" not in page
