"""What a person sees on the front page and a batch page of the demo, in a real browser."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser


def test_dashboard_shows_demo_batches_by_status(page, demo_server, screenshot):
    page.goto(demo_server + "/")
    assert page.title().startswith("Today")
    heading = page.locator("h1").inner_text()
    assert heading == "Prep room today"
    # The tally counts each status of the invented scenario.
    tally = {
        li.inner_text().split("\n")[-1].strip(): int(li.locator("strong").inner_text())
        for li in page.locator("ul.tally li").all()
    }
    assert tally["Drifting"] == 1
    assert tally["Re-check due"] == 1
    assert tally["Awaiting standardization"] == 2  # the scenario's, and the potentiometric run awaiting review
    assert tally["In service"] == 3
    assert tally["Expired"] == 1
    assert tally["Withdrawn"] == 1
    attention = page.locator("section.panel", has=page.locator("h2", has_text="Needs attention"))
    codes = attention.locator("a.batch-code").all_inner_texts()
    assert len(codes) == 4  # drifting, re-check due, and the two awaiting standardization (one the potentiometric run)
    assert all(re.fullmatch(r"[A-Z0-9]+-\d{4}-\d{2}", c) for c in codes)
    text = attention.inner_text()
    assert "Drifting" in text and "-0.69 %" in text
    assert "overdue by 6 day" in text
    in_service = page.locator("section.panel", has=page.locator("h2", has_text="In service"))
    values = in_service.locator("td.num").all_inner_texts()
    assert values and all("±" in v and "mol/L" in v for v in values)
    screenshot(page, "dashboard")


def test_batch_page_shows_history_and_value(page, demo_server, screenshot):
    page.goto(demo_server + "/batches/?status=drifting")
    page.locator("a.batch-code").first.click()
    page.wait_for_load_state()
    assert page.locator(".chip").first.inner_text() == "Drifting"
    value = page.locator(".big-value").inner_text()
    assert re.fullmatch(r"0\.10\d+ ± 0\.000\d+ mol/L \(k = [1-4](\.\d{1,2})?\)", value)
    runs = page.locator("article.run")
    assert runs.count() == 5  # one standardization, four re-checks
    assert "re-check" in runs.first.locator("h3").inner_text()
    screenshot(page, "batch-drifting")


def test_status_filter_and_print_view(page, demo_server):
    page.goto(demo_server + "/batches/")
    page.select_option("select[name=status]", "expired")
    page.click("form.filters button")
    page.wait_for_load_state()
    rows = page.locator("table.grid tbody tr")
    assert rows.count() == 1
    assert "Expired" in rows.first.inner_text()
    page.emulate_media(media="print")
    assert page.locator("form.filters").is_hidden()
