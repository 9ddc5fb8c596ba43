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


def test_a_row_added_by_the_script_gets_a_curve_box_stored_like_a_first_rows(staff_page, staff_demo_server):
    """Add a row, paste a curve in its box: the run stores it as it stores row 1's, and exports both back."""
    from stockroom import csvio, curve_synth

    page = staff_page
    base = staff_demo_server
    # A batch of this test's own, so the demo's batches keep their runs as the scenario made them.
    page.goto(base + "/batches/new")
    page.select_option("#f-reagent", "NaOH")
    page.fill("#f-nominal_molarity", "0.1")
    page.fill("#f-volume_l", "10")
    page.fill("#f-water_grade", "boiled, CO2-free deionized")
    page.fill("#f-container", "10 L polyethylene carboy (invented)")
    page.click("button[value=register]")
    page.wait_for_load_state()
    code = page.locator("h1 .batch-code").inner_text()
    page.goto(f"{base}/batches/{code}/runs/new")
    page.select_option("#f-standard_lot_id", index=1)
    boxes = page.locator("#curves details.curve-box")
    served = boxes.count()
    page.click("#add-row")
    n = served + 1
    assert boxes.count() == n
    added = boxes.nth(n - 1)
    # The same box as the server's: its name, label and a closed summary, empty.
    assert added.locator("summary").inner_text() == f"Replicate {n}"
    assert added.locator("label").text_content().strip() == f"Replicate {n}, titration curve (volume mL, reading)"
    assert added.get_attribute("open") is None  # closed, as the served empty boxes are
    assert added.locator("textarea").get_attribute("name") == f"r{n}_curve"
    assert page.input_value(f"#f-r{n}_curve") == ""
    # Invented curves: 0.8179 g and 0.8012 g KHP with 0.1 mol/L NaOH (curve_synth, exact charge balance).
    masses = ("0.8179", "0.8012")
    pasted = [curve_synth.khp_curve(float(m), 0.1, seed=s) for m, s in zip(masses, (4, 5), strict=True)]
    page.fill("#f-r1_mass_g", masses[0])
    page.locator("#curves details").first.locator("summary").click()
    page.fill("#f-r1_curve", curve_synth.as_text(pasted[0]))
    page.fill(f"#f-r{n}_mass_g", masses[1])
    added.locator("summary").click()
    page.fill(f"#f-r{n}_curve", curve_synth.as_text(pasted[1]))
    # The live result reads the added box too: row n's molarity comes from its curve.
    expect(page.locator(f'td.live-molarity[data-row="{n}"]')).to_contain_text("0.10", timeout=10_000)
    page.click("button[value=record]")
    page.wait_for_load_state()
    assert "/runs/" in page.url, page.locator("main").inner_text()[:1500]
    # Both curves drawn; the added row is the run's replicate 2 (blank rows between are skipped).
    captions = page.locator("figure.curve figcaption")
    assert captions.count() == 2
    assert captions.nth(1).inner_text().startswith(f"Replicate 2 · {len(pasted[1])} points in pH · end point ")
    # The export gives each curve back point for point, as pasted.
    link = page.locator("#curves a", has_text="Download the curves as CSV")
    resp = page.request.get(base + link.get_attribute("href"))
    assert resp.status == 200
    sheet = csvio.read_curve_sheet(resp.text(), 2, 500)
    assert sheet.problems == [] and sheet.reading == "ph"
    for number, points in ((1, pasted[0]), (2, pasted[1])):
        got = [tuple(float(x) for x in line.split(",")) for line in sheet.curves[number]]
        assert got == [(float(f"{v:g}"), round(e, 2)) for v, e in points]
    # Each end point sits where the invented mass puts it: V_e = 1000 m / (M c), M(KHP) 204.22 g/mol
    # (IUPAC atomic weights), 40.05 and 39.23 mL; the page shows it to U's place.
    for i, m in enumerate(masses):
        ve = 1000 * float(m) / curve_synth.KHP_MOLAR_MASS_G_MOL / 0.1
        assert f"end point {ve:.1f}" in captions.nth(i).inner_text(), (captions.nth(i).inner_text(), ve)
