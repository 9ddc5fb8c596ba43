"""The lab-day look-up, the drift chart and the class-data correction, as a person uses them in a browser.

The demo's numbers are re-derived here by arithmetic: the value at the bench temperature is
c(T) = c(20 °C)·[1 − 2.1×10⁻⁴·(T − 20)] (EURACHEM/CITAC QUAM:2012), and a class result is
c_analyte = c_titrant·V_titrant·(analyte per titrant)/V_aliquot.
"""

from __future__ import annotations

import datetime as dt
import re

import pytest

pytestmark = pytest.mark.browser

# The password staff_demo_server gives every demo user (tests/browser/conftest.py, DEMO_PASSWORD); invented.
DEMO_PASSWORD = "invented lantern for browser tests"


def _number(text: str) -> float:
    return float(re.search(r"\d+\.\d+", text).group(0))


def test_look_up_a_lab_day_with_the_bench_temperature(page, demo_server, screenshot):
    today = dt.datetime.now(dt.UTC).date().isoformat()  # the server runs with LAB_TIMEZONE=UTC
    page.goto(demo_server + "/")
    page.click("nav[aria-label=Main] >> text=Lab day")
    page.wait_for_load_state()
    assert page.locator("h1").inner_text() == f"Titrants for the lab day {today}"
    page.select_option("#f-titrant", "NaOH")
    page.fill("#f-bench_temperature_c", "23")
    page.click("form.panel button[type=submit]")
    page.wait_for_load_state()
    entries = page.locator("section.labday-entry")
    assert entries.count() == 2  # the drifting 0.1 mol/L batch and the 1 mol/L one
    drifting = entries.first
    assert drifting.locator(".chip").inner_text() == "Drifting"
    certified = drifting.locator(".labday-certified").inner_text()
    assert re.fullmatch(r"0\.10\d{3} ± 0\.000\d\d mol/L \(k = [1-4](\.\d{1,2})?\)", certified)
    # Beyond tolerance: on hold, so no value to use and no bench value, the reason in words.
    assert drifting.locator(".labday-use, .labday-bench").count() == 0
    assert "On hold: no value of" in drifting.locator(".labday-hold").inner_text()
    other = entries.nth(1)
    bench = _number(other.locator(".labday-bench").inner_text())
    other_certified = other.locator(".labday-certified").inner_text()
    # 3 K above 20 °C the solution expands by alpha*3: alpha is 2.07e-4 /K for water (Tanaka 2001) and about
    # 3.0e-4 /K for 1 mol/L NaOH (electrolyte density tables, as docs/measurement-model.md cites); the page
    # rounds both figures to 4 decimals (U to 2 figures).
    c = _number(other_certified)
    assert c * (1 - 3.5e-4 * 3) - 1e-4 <= bench <= c * (1 - 2.0e-4 * 3) + 1e-4
    assert "differs from the certified value by -0.69 %" in drifting.locator(".labday-flags").inner_text()
    predicted = _number(drifting.locator(".labday-predicted").inner_text())
    assert predicted < _number(certified) * 0.995  # its trend is below the band
    assert "chemical hygiene plan" in page.locator("aside.caution").inner_text()
    screenshot(page, "labday-naoh")

    sheet = page.locator("a", has_text="Printable sheet (PDF)").get_attribute("href")
    assert "bench_temperature_c=23" in sheet and "titrant=NaOH" in sheet
    pdf = page.request.get(demo_server + sheet)
    assert pdf.status == 200 and pdf.headers["content-type"] == "application/pdf" and pdf.body()[:5] == b"%PDF-"

    page.fill("#f-date", "2001-01-01")
    page.click("form.panel button[type=submit]")
    page.wait_for_load_state()
    assert page.locator("#labday-reason").inner_text() == "No NaOH batch was in force on 2001-01-01."
    assert page.locator("section.labday-entry").count() == 0
    screenshot(page, "labday-empty")

    page.fill("#f-bench_temperature_c", "50")
    page.click("form.panel button[type=submit]")
    page.wait_for_load_state()
    assert page.locator("#e-bench_temperature_c").inner_text() == "must be between 5 and 40 °C"


@pytest.mark.parametrize("width", [1366, 390])
def test_a_held_batch_gives_no_value_to_use_at_desktop_and_phone_width(page, demo_server, screenshot, width):
    page.set_viewport_size({"width": width, "height": 900})
    page.goto(demo_server + "/lab-day?titrant=NaOH")
    held = page.locator("section.labday-held")
    assert held.count() == 1
    hold = held.locator(".labday-hold")
    assert hold.is_visible()
    assert "beyond tolerance" in hold.locator(".labday-hold-reason").inner_text().lower()
    assert held.locator(".labday-use").count() == 0 and "Use this value" not in held.inner_text()
    assert held.locator(".labday-reference-title").inner_text() == "For reference, not for use"
    # The hold box lies within the window (nothing to scroll sideways to find it) and above the reference figures.
    box = hold.bounding_box()
    assert box["x"] >= 0 and box["x"] + box["width"] <= width
    assert page.evaluate("document.documentElement.scrollWidth") <= width
    assert box["y"] < held.locator(".labday-reference").bounding_box()["y"]
    screenshot(page, f"labday-held-{width}")


def test_batch_page_shows_the_drift_chart(page, demo_server, screenshot):
    page.goto(demo_server + "/batches/?status=drifting")
    page.locator("a.batch-code").first.click()
    page.wait_for_load_state("networkidle")
    panel = page.locator("#drift")
    assert "per 30 days" in panel.locator(".drift-summary").inner_text()
    assert "a significant drift" in panel.inner_text()
    chart = panel.locator("img.drift-chart")
    assert chart.evaluate("img => img.complete && img.naturalWidth") == 1080  # the SVG loaded and rendered
    assert "trend" in chart.get_attribute("alt")
    screenshot(page, "batch-drift-chart")


def test_instructor_corrects_a_class_with_the_molarity_in_force(page, staff_demo_server, screenshot, tmp_path):
    page.goto(staff_demo_server + "/sign-in")
    page.fill("#f-username", "demo-instructor")
    page.fill("#f-password", DEMO_PASSWORD)
    page.locator("main button[type=submit]").click()
    page.wait_for_url(staff_demo_server + "/")
    page.goto(staff_demo_server + "/lab-day")
    page.select_option("#f-titrant", "H2SO4")
    page.click("form.panel button[type=submit]")
    page.wait_for_load_state()
    certified = _number(page.locator(".labday-certified").first.inner_text())
    page.click("text=Correct class data for this day…")
    page.wait_for_load_state()
    sheet = tmp_path / "class.csv"
    # Invented class data: the 0.1 mol/L H2SO4 titrating NaOH samples, 1 mol acid : 2 mol base.
    sheet.write_text(
        "group,aliquot_ml,titrant_ml,ratio,reported_molarity\nbench 1,25.00,12.40,1:2,0.0992\nbench 2,25.00,12.46,1:2,\n",
        encoding="utf-8",
    )
    page.set_input_files("#f-sheet", str(sheet))
    page.click("form.panel button[type=submit]")
    page.wait_for_url(re.compile(r".*/lab-day/corrections/\d+$"))
    rows = page.locator("#class-results tbody tr")
    assert rows.count() == 2
    corrected = _number(rows.first.locator("td").nth(6).inner_text())
    # c_analyte = c_titrant · 12.40 mL · 2 / 25.00 mL, with the certified value shown (5 decimals) on the look-up
    assert corrected == pytest.approx(certified * 12.40 * 2 / 25.00, abs=2e-5)
    nominal = _number(rows.first.locator("td").nth(5).inner_text())
    assert nominal == pytest.approx(0.1 * 12.40 * 2 / 25.00, abs=1e-6)
    assert page.locator("a", has_text="Download as CSV").get_attribute("href").endswith(".csv")
    screenshot(page, "labday-class-correction")
