"""The run grid's Tab path: along a row's readings, then on to the next row; the leave-out tick and its
reason are off the path and reached with the arrow keys."""

from __future__ import annotations

import pytest

pytestmark = pytest.mark.browser


def _active(page) -> str:
    return page.evaluate("document.activeElement.name || document.activeElement.id")


def test_tab_goes_along_the_readings_of_a_row(staff_page, staff_demo_server):
    page = staff_page
    base = staff_demo_server
    batches = page.request.get(base + "/api/v1/batches").json()["batches"]
    code = next(b["id"] for b in batches if b["status"] in ("in_service", "recheck_due", "drifting"))
    page.goto(f"{base}/batches/{code}/runs/new")
    page.focus("#f-r1_gross_g")
    path = [_active(page)]
    for _ in range(8):
        page.keyboard.press("Tab")
        path.append(_active(page))
    readings = ["gross_g", "tare_g", "mass_g", "initial_ml", "final_ml", "blank_ml", "temperature_c"]
    assert path[:7] == [f"r1_{k}" for k in readings]
    assert path[7:9] == ["r2_gross_g", "r2_tare_g"]  # on to the next row: no tick, no reason between
    # Back again with Shift+Tab: the same path in reverse.
    page.keyboard.press("Shift+Tab")
    page.keyboard.press("Shift+Tab")
    assert _active(page) == "r1_temperature_c"
    # The arrow keys reach the row's other controls: the leave-out tick, then its reason.
    page.keyboard.press("ArrowRight")
    assert _active(page) == "r1_exclude"
    page.keyboard.press("Space")
    assert _active(page) == "r1_exclude_reason"  # ticking asks for the reason at once
    page.keyboard.type("bubble in the tip")
    page.keyboard.press("Home")
    page.keyboard.press("ArrowLeft")
    assert _active(page) == "r1_exclude"
    assert page.locator("#f-r1_exclude").is_checked()
    # A row added by Enter keeps the same path.
    page.focus("#f-r1_gross_g")
    rows = page.locator("#replicates tbody tr").count()
    page.focus(f"#f-r{rows}_gross_g")
    page.keyboard.press("Enter")
    new = rows + 1
    assert _active(page) == f"r{new}_gross_g"
    page.focus(f"#f-r{new}_temperature_c")
    page.keyboard.press("Tab")
    assert _active(page) not in (f"r{new}_exclude", f"r{new}_exclude_reason")
