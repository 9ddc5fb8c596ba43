"""A double click on a creating form's button makes one record (the one-time form id, stockroom.web.once)."""

from __future__ import annotations

import re

import pytest

pytestmark = pytest.mark.browser


def _hcl_batches(page, base) -> int:
    return page.request.get(base + "/api/v1/batches?titrant=HCl&limit=1000").json()["total"]


def test_double_click_on_register_batch_registers_one_batch(staff_page, staff_demo_server):
    page, base = staff_page, staff_demo_server
    page.goto(base + "/batches/new")
    page.select_option("#f-reagent", "HCl")
    page.fill("#f-nominal_molarity", "0.1")
    page.fill("#f-volume_l", "20")
    page.fill("#f-concentrate_lot", "INV-HC-7001 (invented)")
    page.fill("#f-concentrate_assay_pct", "37")
    page.fill("#f-concentrate_density_g_ml", "1.19")
    page.fill("#f-water_grade", "deionized, Type II")
    page.fill("#f-container", "20 L HDPE carboy (invented)")
    before = _hcl_batches(page, base)
    posts: list[str] = []
    page.on("request", lambda r: posts.append(r.url) if r.method == "POST" and r.url.endswith("/batches/new") else None)
    # Chromium folds a double click's two submissions of one form into one request or, when it sends
    # both, the server answers the second with the first's batch; either way one batch is registered.
    page.dblclick("button[value=register]")
    page.wait_for_url(re.compile(r".*/batches/HCL-\d{4}-\d{2}$"))
    page.wait_for_load_state()
    assert len(posts) >= 1
    assert _hcl_batches(page, base) == before + 1
    if len(posts) == 2:  # the browser did send both: the second was answered with the first's batch
        assert "this form was already submitted" in page.locator("main").inner_text()
