"""The run page's titration curves in a real browser, under the app's content security policy.

The demo's potentiometric run (the newest run with curves) is opened at phone and desktop size: the
drawings must fit the screen and keep their colours and text sizes (a strict policy drops style
attributes, so the SVG carries presentation attributes instead).
"""

from __future__ import annotations

from urllib.parse import urlparse

import pytest
from playwright.sync_api import expect

pytestmark = pytest.mark.browser


@pytest.mark.parametrize("width", [390, 1366])
def test_the_curves_fit_the_screen_and_keep_their_look(browser, demo_server, width):
    context = browser.new_context(viewport={"width": width, "height": 900})
    page = context.new_page()
    # The demo adds its potentiometric run last: the newest run page that answers shows the curves.
    run_link = None
    for run_id in range(30, 0, -1):
        resp = page.goto(f"{demo_server}/runs/{run_id}")
        if resp is not None and resp.status == 200 and page.locator("svg.curve-drawing").count():
            run_link = run_id
            break
    assert run_link is not None, "the demo has a run with curves"
    svgs = page.locator("svg.curve-drawing")
    assert svgs.count() == 3
    scroll, inner = page.evaluate("[document.documentElement.scrollWidth, window.innerWidth]")
    assert scroll <= inner, f"the page is {scroll} px wide in a {inner} px window"
    for i in range(3):
        box = svgs.nth(i).bounding_box()
        assert box is not None and box["x"] >= 0 and box["x"] + box["width"] <= inner + 0.5
        # Drawn at its aspect ratio (360 × 340), not squashed.
        assert box["height"] == pytest.approx(box["width"] * 340 / 360, rel=0.02)
    # The band keeps its light blue and the axis text its small size: the presentation attributes applied.
    fill = page.evaluate("getComputedStyle(document.querySelector('svg.curve-drawing rect[fill^=\"rgb(86%\"]')).fill")
    assert fill.replace(" ", "") in ("rgb(219,230,242)", "rgb(219,229,242)", "rgb(220,230,242)")
    size = page.evaluate("getComputedStyle(document.querySelector('svg.curve-drawing text')).fontSize")
    assert size in ("7.5px", "8px")
    assert urlparse(page.url).path == f"/runs/{run_link}"
    context.close()


def test_a_pasted_curve_gives_the_titre_in_the_live_result(staff_page, staff_demo_server):
    """Paste a replicate's pH curve and leave its burette readings empty: the live result computes from it."""
    from stockroom import curve_synth

    page = staff_page
    page.goto(staff_demo_server + "/batches/")
    code = page.locator("a.batch-code", has_text="NAOH").first.inner_text()
    page.goto(f"{staff_demo_server}/batches/{code}/runs/new")
    page.select_option("#f-standard_lot_id", index=1)
    page.fill("#f-r1_mass_g", "0.8179")
    page.locator("#curves details").first.locator("summary").click()
    # 0.8179 g KHP with 0.1 mol/L NaOH: V_e = 1000 · 0.8179 / (204.22 · 0.1) = 40.05 mL (invented curve).
    page.fill("#f-r1_curve", curve_synth.as_text(curve_synth.khp_curve(0.8179, 0.1, seed=4)))
    cell = page.locator('td.live-molarity[data-row="1"]')
    expect(cell).to_contain_text("0.10", timeout=10_000)
    # A reading past the range is named at its box's label, live.
    page.fill("#f-r1_curve", "0, 3.2\n1, 3.9\n2, 4.1\n3, 4.3\n4, 17.5")
    expect(page.locator("#preview-body")).to_contain_text("line 5: the reading must be", timeout=10_000)
