"""The instrument register, a batch's drawn chain and a recall's impact report in a real browser.

Runs on staff_demo_server (shared with other browser tests), so the recall it opens is cleared at the end.
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

TODAY = dt.date.today()
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"  # where the screenshot fixture saves


def _iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


def _code(page, base, titrant, nominal):
    body = page.request.get(f"{base}/api/v1/batches?titrant={titrant}").json()
    return next(b["id"] for b in body["batches"] if b["nominal_molarity"] == nominal)


def test_instruments_chain_and_recall_report(staff_page, staff_demo_server, screenshot, tmp_path):
    page, base = staff_page, staff_demo_server
    errors: list[str] = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)

    # Register a burette (Class A 50 mL: tolerance from the class table) and an overdue pipette.
    for code, kind, capacity, cal, due in (("BUR-DEMO-1", "burette", "50", -20, 345), ("PIP-DEMO-1", "pipette", "25", -400, -35)):
        page.goto(base + "/instruments/new")
        page.fill("#f-code", code)
        page.select_option("#f-kind", kind)
        page.fill("#f-capacity", capacity)
        page.select_option("#f-accuracy_class", "A")
        page.fill("#f-calibrated_on", _iso(cal))
        page.fill("#f-next_due_on", _iso(due))
        page.fill("#f-certificate_ref", f"CAL-{code} (invented)")
        page.locator("main button[type=submit]").click()
        page.wait_for_url(f"{base}/instruments/*")
    page.goto(base + "/instruments/")
    rows = page.locator("table.grid tbody tr")
    assert rows.count() == 2
    assert "OVERDUE" in page.locator("tr", has_text="PIP-DEMO-1").inner_text()
    assert "in calibration" in page.locator("tr", has_text="BUR-DEMO-1").inner_text()
    screenshot(page, "instruments-list")

    # The 1 M NaOH of the demo was standardized against the 1 M HCl, which rests on the TRIS lot.
    naoh, hcl = _code(page, base, "NaOH", 1.0), _code(page, base, "HCl", 1.0)
    page.goto(f"{base}/batches/{naoh}")
    panel = page.locator("#traceability")
    tree = panel.locator("svg.chain-tree")
    assert tree.is_visible()
    labels = tree.locator("text").all_text_contents()
    assert f"{naoh} · certified value" in labels and f"{hcl} · certified value" in labels
    assert any(t.endswith("· primary-standard lot") and "TRIS" in t for t in labels)
    box = tree.bounding_box()
    assert box is not None and box["width"] > 300 and box["height"] > 200
    panel.scroll_into_view_if_needed()
    screenshot(page, "batch-chain-tree")

    # Mark the TRIS lot suspect from before it was used.
    page.goto(base + "/recalls/new")
    tris = page.locator("#f-subject option", has_text="TRIS").first.get_attribute("value")
    page.select_option("#f-subject", tris)
    page.fill("#f-suspect_from", _iso(-365))
    page.fill("#f-reason", "Lot found caked and damp on opening (invented for the demo)")
    page.locator("main button[type=submit]").click()
    page.wait_for_url(f"{base}/recalls/*")
    report_url = page.url
    batches = page.locator("#under-review table tbody tr")
    assert batches.count() == 2
    assert {batches.nth(i).locator("td").first.inner_text() for i in range(2)} == {naoh, hcl}
    assert page.locator("#under-review .chip-drifting").count() == 2
    screenshot(page, "recall-report")

    # The batch page now says so, and its drawing marks the lot and both values.
    page.goto(f"{base}/batches/{naoh}")
    assert "Under review" in page.locator("main .notice-error").first.inner_text()
    assert page.locator("svg.chain-tree text", has_text="SUSPECT").count() == 3
    page.locator("#traceability").scroll_into_view_if_needed()
    screenshot(page, "batch-chain-under-review")

    # The PDF, rendered to an image for a person to look at.
    pdf = page.request.get(report_url + ".pdf")
    assert pdf.ok and pdf.headers["content-type"] == "application/pdf"
    out = tmp_path / "recall.pdf"
    out.write_bytes(pdf.body())
    if shutil.which("pdftoppm"):
        ARTIFACTS.mkdir(exist_ok=True)
        subprocess.run(
            ["pdftoppm", "-png", "-r", "80", "-f", "1", "-l", "1", str(out), str(ARTIFACTS / "recall-report-pdf")], check=True
        )

    # Clear it again, so the other tests on this server see the demo as it was.
    page.goto(report_url)
    page.select_option("#f-scope", "all")
    page.fill("#f-clear_reason", "Re-assayed within its certificate (invented for the demo)")
    page.locator("#clear button[type=submit]").click()
    page.wait_for_url(report_url)
    assert "cleared" in page.locator("h1 + .chip, .heading-row .chip").first.inner_text()
    assert errors == []
