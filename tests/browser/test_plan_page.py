"""The prep plan and the lab schedule in a real browser: the demo's coming shortfall, a session entered
through the form changing the plan, a phone's width and the printed page."""

from __future__ import annotations

import datetime as dt

import pytest

pytestmark = pytest.mark.browser


def _no_sideways_scroll(page) -> None:
    width = page.evaluate("document.documentElement.scrollWidth")
    assert width <= page.viewport_size["width"], f"the page is {width} px wide"


def test_plan_shows_the_demo_shortfall(page, demo_server, screenshot):
    page.goto(demo_server + "/plan")
    assert page.locator("h1").inner_text() == "Prep plan"
    short = page.locator("section.plan-short")
    assert short.count() == 1  # the invented term runs short of one titrant
    verdict = short.locator(".plan-verdict").inner_text()
    assert "H2SO4" in short.locator("h2").inner_text()
    assert "First shortfall on" in verdict and "Make a new batch by" in verdict
    # The row that runs short shows what it lacks, in litres.
    lacking = short.locator("tr.plan-line-short td.num strong").first.inner_text()
    assert lacking.endswith(" L") and float(lacking.split()[0]) > 0
    assert page.locator("section.plan-enough").count() == 1
    screenshot(page, "plan-desktop")
    page.set_viewport_size({"width": 390, "height": 844})
    page.reload()
    _no_sideways_scroll(page)
    screenshot(page, "plan-phone")
    page.emulate_media(media="print")
    assert page.locator("form.filters").is_hidden() and page.locator("nav[aria-label=Main]").is_hidden()
    assert page.locator("section.plan-short").is_visible()


def test_today_names_the_low_stock(page, demo_server):
    page.goto(demo_server + "/")
    low = page.locator("#low-stock")
    assert low.is_visible() and "H2SO4" in low.inner_text() and "make a new batch by" in low.inner_text()
    low.locator("a", has_text="See the plan").click()
    page.wait_for_load_state()
    assert page.locator("section.plan-titrant").count() == 1  # the plan for that titrant only


def test_a_session_entered_on_the_schedule_changes_the_plan(staff_page, staff_demo_server, screenshot):
    page = staff_page
    day = (dt.date.today() + dt.timedelta(days=20)).isoformat()
    page.goto(staff_demo_server + "/schedule")
    page.fill("#f-session_on", day)
    page.fill("#f-course", "CHM 301")
    page.fill("#f-section", "X")
    page.fill("#f-room", "B12")
    page.select_option("#f-titrant", "HCl")
    page.fill("#f-nominal_molarity", "1")
    page.fill("#f-volume_needed_l", "45")
    page.locator("section.schedule-add button[type=submit]").click()
    page.wait_for_load_state()
    assert "Entered CHM 301 · section X · room B12" in page.locator("main").inner_text()
    assert page.locator("td", has_text="CHM 301 · section X · room B12").count() == 1
    screenshot(page, "schedule-desktop")
    page.goto(staff_demo_server + "/plan?titrant=HCl")
    hcl = page.locator("section.plan-titrant", has=page.locator("h2", has_text="1.000 mol/L HCl"))
    assert "plan-short" in (hcl.get_attribute("class") or "")
    assert f"First shortfall on {day}" in hcl.locator(".plan-verdict").inner_text()
    page.set_viewport_size({"width": 390, "height": 844})
    page.goto(staff_demo_server + "/schedule?from=" + day)
    _no_sideways_scroll(page)
    screenshot(page, "schedule-phone")
