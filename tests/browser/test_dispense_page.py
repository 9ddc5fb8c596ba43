"""Dispensing from the batch page in a real browser: the form under "Where it went", the container page it
lands on, the refusal of more than remains beside its field, and the page at phone width."""

from __future__ import annotations

import json
import urllib.request

import pytest
from livesite import DEMO_PASSWORD

pytestmark = pytest.mark.browser


def _hcl_in_service(base: str) -> dict:
    with urllib.request.urlopen(base + "/api/v1/batches?titrant=HCl&status=in_service", timeout=10) as r:
        listed = json.load(r)["batches"]
    code = next(b["id"] for b in listed if b["nominal_molarity"] == 0.1)
    with urllib.request.urlopen(f"{base}/api/v1/batches/{code}", timeout=10) as r:
        return json.load(r)


def test_dispense_from_the_batch_page(staff_page, staff_demo_server, screenshot):
    page, base = staff_page, staff_demo_server
    batch = _hcl_in_service(base)
    code, before = batch["id"], batch["volume_remaining_l"]
    page.goto(f"{base}/batches/{code}")
    section = page.locator("#where-it-went")
    assert section.locator("#volume-remaining").inner_text() == f"{before:.3f} L"
    section.locator("summary", has_text="Dispense into a container").click()
    form = section.locator("form.dispense-form")
    form.locator("#f-volume_l").fill("0,75")  # a decimal comma reads as the form's door reads it
    form.locator("#f-container").select_option("bench bottle")
    form.locator("#f-course").fill("CHM 110")
    form.locator("#f-section").fill("D")
    form.locator("#f-room").fill("214")
    screenshot(page, "dispense-form")
    form.locator("button[type=submit]").click()
    page.wait_for_load_state()
    n = len(batch["containers"]) + 1
    assert page.url.endswith(f"/containers/{code}-C{n:02d}")
    assert page.locator("h1").inner_text().startswith(f"{code}-C{n:02d}")
    assert "CHM 110 · section D · room 214" in page.locator("main").inner_text()
    assert "0.750 L" in page.locator("main").inner_text()
    screenshot(page, "container-page")

    # More than remains: refused beside the field, named by its label, nothing stored.
    page.goto(f"{base}/batches/{code}/dispense")
    page.fill("#f-volume_l", "40")
    page.fill("#f-course", "CHM 110")
    page.locator("main button[type=submit]").click()
    page.wait_for_load_state()
    left = before - 0.75
    assert page.locator("#e-volume_l").inner_text() == f"40 L is more than remains in the batch ({left:.3f} L left)"
    assert "Volume dispensed" in page.locator(".form-summary").inner_text()
    assert _hcl_in_service(base)["volume_remaining_l"] == pytest.approx(left)


def test_batch_and_container_pages_fit_a_phone(browser, staff_demo_server, screenshot):
    base = staff_demo_server
    batch = _hcl_in_service(base)
    context = browser.new_context(viewport={"width": 390, "height": 844})
    page = context.new_page()
    try:
        page.goto(base + "/sign-in")
        page.fill("#f-username", "okafor")  # a prep-staff user of the demo scenario
        page.fill("#f-password", DEMO_PASSWORD)
        page.locator("main button[type=submit]").click()
        page.wait_for_url(base + "/")
        for path in (
            f"/batches/{batch['id']}",
            f"/containers/{batch['containers'][0]['code']}",
            f"/batches/{batch['id']}/dispense",
        ):
            page.goto(base + path)
            if path == f"/batches/{batch['id']}":  # open the dispensing form: the widest part of the section
                page.locator("#where-it-went summary").first.click()
            width = page.evaluate("() => document.documentElement.scrollWidth")
            assert width <= 390, f"{path} is {width} px wide at a 390 px phone"
            screenshot(page, "phone" + path.replace("/", "-"))
    finally:
        context.close()
