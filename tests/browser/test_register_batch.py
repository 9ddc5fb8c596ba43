"""What prep staff do to register a batch and a standard lot, in a real browser, with the live calculator.

Amounts are re-derived by arithmetic here: 20 L of 0.1 mol/L HCl from 37 % w/w at 1.19 g/mL takes
20·0.1·36.46/(0.37·1.19) ≈ 165.6 mL; 20 L of 0.1 mol/L NaOH from 98 % pellets takes 20·0.1·40.00/0.98
≈ 81.6 g (molar masses from periodictable, CIAAW standard atomic weights).
"""

from __future__ import annotations

import datetime as dt
import re

import periodictable
import pytest
from playwright.sync_api import expect

pytestmark = pytest.mark.browser

M_HCL = periodictable.formula("HCl").mass
M_NAOH = periodictable.formula("NaOH").mass


def test_register_a_batch_with_the_live_plan(staff_page, staff_demo_server, screenshot):
    page = staff_page
    page.click("nav[aria-label=Main] >> text=New batch")
    page.wait_for_url(staff_demo_server + "/batches/new")
    assert page.locator("h1").inner_text() == "Register a batch"
    screenshot(page, "batch-new-empty")

    page.select_option("#f-reagent", "HCl")
    page.fill("#f-nominal_molarity", "0.1")
    page.fill("#f-volume_l", "20")
    page.fill("#f-concentrate_lot", "INV-HC-3310 (invented)")
    page.fill("#f-concentrate_assay_pct", "37")
    page.fill("#f-concentrate_density_g_ml", "1.19")
    # Arithmetic check of the figure the calculator must show (periodictable molar mass).
    expected = f"{20 * 0.1 * M_HCL / (0.37 * 1.19):.1f} mL"
    assert expected == "165.6 mL"
    # The page's CSP forbids evaluated script, so waits go through locators.
    expect(page.locator("#plan .plan-value").first).to_have_text(expected)
    caution = page.locator("#calculator .caution").inner_text()
    assert "Add acid to water, never the reverse" in caution and "chemical hygiene plan" in caution
    assert "fume hood" in page.locator("#plan-steps .plan-steps").inner_text()
    page.fill("#f-water_grade", "deionized, Type II")
    page.fill("#f-container", "20 L HDPE carboy (invented)")
    screenshot(page, "batch-new-plan")

    # An ambiguous comma (a thousands separator or a decimal sign?): the live calculator names the
    # field by its label, and registering is refused beside it.
    page.fill("#f-volume_l", "20,500")
    expect(page.locator("#plan")).to_contain_text("Volume made up: '20,500' could be 20.500 or 20500")
    page.click("button[value=register]")
    page.wait_for_load_state()
    error = page.locator("#e-volume_l")
    assert error.inner_text().startswith("'20,500' could be 20.500 or 20500")
    assert page.locator("#f-volume_l").input_value() == "20,500"
    # An unambiguous decimal comma reads as the form will read it.
    page.fill("#f-volume_l", "20,5")
    expect(page.locator("#plan")).not_to_contain_text("comma")
    assert page.locator("#f-concentrate_lot").input_value() == "INV-HC-3310 (invented)"
    screenshot(page, "batch-new-error")

    page.fill("#f-volume_l", "20")
    page.click("button[value=register]")
    page.wait_for_url(re.compile(r".*/batches/HCL-\d{4}-\d{2}$"))
    code = page.url.rsplit("/", 1)[1]
    assert f"Registered batch {code}" in page.locator(".notice").first.inner_text()
    assert page.locator(".chip").first.inner_text() == "Awaiting standardization"
    assert "INV-HC-3310 (invented), 37.0 % w/w, 1.190 g/mL" in page.locator("section.panel").nth(1).inner_text()
    screenshot(page, "batch-registered")


def test_pellets_plan_turns_off_the_density(staff_page, staff_demo_server):
    page = staff_page
    page.goto(staff_demo_server + "/batches/new")
    page.select_option("#f-reagent", "NaOH")
    page.select_option("#f-source_form", "solid")
    assert page.locator("#f-concentrate_density_g_ml").is_disabled()
    page.fill("#f-nominal_molarity", "0.1")
    page.fill("#f-volume_l", "20")
    page.fill("#f-concentrate_assay_pct", "98")
    grams = f"{20 * 0.1 * M_NAOH / 0.98:.2f} g"  # arithmetic check: c·V·M / assay
    expect(page.locator("#plan .plan-value").first).to_have_text(grams)
    assert "strongly exothermic" in page.locator("#calculator .caution").inner_text()
    page.fill("#f-water_grade", "deionized")  # not CO2-free: a warning for a base
    expect(page.locator("#plan-warnings")).to_contain_text("boiled, CO2-free water")
    # Acids are never made from pellets here: the choice is off for HCl.
    page.select_option("#f-reagent", "HCl")
    assert page.locator("#f-source_form option[value=solid]").is_disabled()
    assert page.locator("#f-source_form").input_value() == "liquid"


def test_register_lots_and_see_the_list(staff_page, staff_demo_server, screenshot):
    page = staff_page
    page.click("nav[aria-label=Main] >> text=Standard lots")
    page.wait_for_url(staff_demo_server + "/lots/")
    # The demo server is shared by this session's browser tests: others may have registered lots already.
    rows_before = page.locator("table.grid tbody tr").count()
    in_date_before = page.locator("table.grid tbody .lot-chip-in_date").count()
    assert rows_before >= 3  # at least the demo's three lots
    page.click("text=Register a lot")
    page.select_option("#f-substance", "borax")
    page.fill("#f-supplier", "Invented Fine Chemicals")
    page.fill("#f-supplier_lot", "IFC-BX-0101 (invented)")
    page.fill("#f-assay_pct", "99.9")
    page.fill("#f-assay_u_pct", "0.1")
    page.fill("#f-expires_on", (dt.datetime.now(dt.UTC).date() + dt.timedelta(days=365)).isoformat())
    page.fill("#f-dried_on", dt.datetime.now(dt.UTC).date().isoformat())
    page.fill("#f-dried_at_c", "105")
    screenshot(page, "lot-new")
    page.click("text=Register lot")
    page.wait_for_load_state()
    message = page.locator("#e-dried_at_c").inner_text()
    assert "must not be oven-dried" in message and "from about 60 °C" in message
    screenshot(page, "lot-new-borax-refused")

    page.fill("#f-dried_on", "")
    page.fill("#f-dried_at_c", "")
    page.fill("#f-storage_note", "constant-humidity jar over saturated NaCl and sucrose")
    page.click("text=Register lot")
    page.wait_for_url(re.compile(r".*/lots/STD-BORAX-\d+$"))  # a lot is addressed by its code
    assert "Registered standard lot STD-BORAX-" in page.locator(".notice").first.inner_text()
    page.goto(staff_demo_server + "/lots/")
    table = page.locator("table.grid tbody")
    assert table.locator("tr").count() == rows_before + 1  # the lots there before and this one
    assert "constant-humidity jar" in table.inner_text()
    assert table.locator(".lot-chip-in_date").count() == in_date_before + 1
    screenshot(page, "lots-list")


def test_adjust_and_withdraw_pages(staff_page, staff_demo_server, screenshot):
    page = staff_page
    page.goto(staff_demo_server + "/batches/?status=in_service")
    page.locator("a.batch-code").first.click()
    page.wait_for_load_state()
    tools = page.locator("nav.batch-actions")
    assert "Adjustment calculator" in tools.inner_text()
    screenshot(page, "batch-with-tools")
    tools.locator("text=Adjustment calculator").click()
    page.wait_for_load_state()
    page.fill("#f-volume_l", "12")
    page.click("text=Work out the adjustment")
    page.wait_for_load_state()
    result = page.locator("section.calculator").inner_text()
    assert "Measured" in result and "Safety" in result and "chemical hygiene plan" in result
    screenshot(page, "batch-adjust")
    page.go_back()
    page.go_back()
    page.locator("nav.batch-actions >> text=Withdraw this batch").click()
    page.wait_for_load_state()
    page.click("main button[type=submit]")
    page.wait_for_load_state()
    assert page.locator("#e-reason").inner_text().startswith("is required")
    screenshot(page, "batch-withdraw-refused")
