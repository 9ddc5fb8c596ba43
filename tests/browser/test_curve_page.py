"""The run page's titration curves in a real browser, under the app's content security policy.

The demo's potentiometric run (the newest run with curves) is opened at phone and desktop size: the
drawings must fit the screen and keep their colours and text sizes (a strict policy drops style
attributes, so the SVG carries presentation attributes instead).
"""

from __future__ import annotations

from urllib.parse import urlparse

import pytest

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
