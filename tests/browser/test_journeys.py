"""The three journeys a new user takes, in a real browser at phone (390×844) and desktop (1366×900) size.

Prep staff: register a batch (pellets, the amount weighed) → record a standardization → see it on Today
awaiting a decision → accept (the expiry shown first) → print labels (confirmed, then listed).
Instructor: look up a lab day → the printable sheet → correct a class's data with the batch and bench
temperature carried from the look-up. Admin: accounts → reagent policy → the audit trail.

Every page visited is checked for horizontal overflow (document.documentElement.scrollWidth must not
exceed window.innerWidth) and for its key text. Full-page screenshots are saved under test-artifacts/
(journey-<size>-<step>.png) for a person to look at.
"""

from __future__ import annotations

import datetime as dt
import re

import pytest
from livesite import DEMO_PASSWORD
from playwright.sync_api import expect

pytestmark = pytest.mark.browser

SIZES = {"phone": {"width": 390, "height": 844}, "desktop": {"width": 1366, "height": 900}}
# Four replicates of ~0.1 mol/L NaOH against KHP: (gross g, tare g, initial mL, final mL), invented.
ROWS = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]
# An invented class: three benches titrating 25.00 mL aliquots of an acid with the batch's NaOH.
CLASS_CSV = b"group,aliquot_ml,titrant_ml,ratio,reported_molarity\nbench 1,25.00,24.62,1:1,0.0985\nbench 2,25.00,24.70,1:1,\n"


@pytest.fixture(params=sorted(SIZES))
def size(request):
    return request.param


def _sign_in(browser, base: str, size: str, username: str):
    context = browser.new_context(viewport=SIZES[size], accept_downloads=True)
    page = context.new_page()
    page.set_default_timeout(15_000)
    page.goto(base + "/sign-in")
    page.fill("#f-username", username)
    page.fill("#f-password", DEMO_PASSWORD)
    page.locator("main button[type=submit]").click()
    page.wait_for_url(base + "/")
    return context, page


def _fits(page, size: str, step: str, screenshot) -> None:
    """The page is no wider than the window (no sideways scrolling), and a screenshot is kept."""
    page.wait_for_load_state()
    scroll, inner = page.evaluate("[document.documentElement.scrollWidth, window.innerWidth]")
    screenshot(page, f"journey-{size}-{step}")
    assert scroll <= inner, f"{step} at {size} size: {scroll} px wide in a {inner} px window"


def _open_menu(page, size: str) -> None:
    if size == "phone":
        page.locator("header summary").click()


def test_prep_staff_register_standardize_accept_release_print(browser, staff_demo_server, size, screenshot):
    base = staff_demo_server
    context, page = _sign_in(browser, base, size, "okafor")
    try:
        _fits(page, size, "staff-today", screenshot)
        expect(page.locator("#undecided h2")).to_have_text("Runs awaiting a decision")

        # 1. Register a batch made from pellets, with the grams actually weighed.
        _open_menu(page, size)
        page.locator("nav[aria-label=Main] a", has_text="New batch").click()
        page.wait_for_url(base + "/batches/new")
        page.select_option("#f-reagent", "NaOH")
        page.fill("#f-nominal_molarity", "0.1")
        page.fill("#f-volume_l", "10")
        page.select_option("#f-source_form", "solid")
        expect(page.locator("label[for=f-measured_amount] .unit")).to_have_text("(g of pellets)")
        page.fill("#f-concentrate_assay_pct", "98")
        # 10 L × 0.1 mol/L × 39.997 g/mol (NaOH) / 0.98 = 40.81 g: the calculator's figure.
        expect(page.locator("#plan .plan-value").first).to_contain_text("40.8")
        page.fill("#f-measured_amount", "40.85")
        page.fill("#f-water_grade", "boiled, CO2-free deionized")
        page.fill("#f-container", "10 L polyethylene carboy (invented)")
        _fits(page, size, "staff-batch-new", screenshot)
        page.click("button[value=register]")
        page.wait_for_load_state()
        code = page.locator("h1 .batch-code").inner_text()
        assert re.fullmatch(r"NAOH-\d{4}-\d\d", code)
        assert page.locator(".chip").first.inner_text() == "Awaiting standardization"
        measured = page.locator("#amount-measured").inner_text()
        assert "40.85 g of pellets" in measured and "the calculator gave 40.81 g" in measured
        _fits(page, size, "staff-batch-registered", screenshot)

        # 2. Record a standardization against a KHP lot of the demo.
        page.click("text=Record a standardization")
        page.wait_for_load_state()
        page.select_option("#f-standard_lot_id", index=1)
        for n, (gross, tare, initial, final) in enumerate(ROWS, start=1):
            page.fill(f"#f-r{n}_gross_g", gross)
            page.fill(f"#f-r{n}_tare_g", tare)
            page.fill(f"#f-r{n}_initial_ml", initial)
            page.fill(f"#f-r{n}_final_ml", final)
        expect(page.locator("#preview-body .verdict-pass")).to_have_text("Meets the acceptance rule.")
        _fits(page, size, "staff-run-form", screenshot)
        page.click("button[value=record]")
        page.wait_for_load_state()
        run_url = page.url
        assert "/runs/" in run_url
        # Accepting shows the expiry it will set before anyone confirms: the NaOH policy's shelf life
        # from the preparation date (today) — the demo's NaOH policy, checked against the page's own date.
        preview = page.locator("#expiry-preview").inner_text()
        days = int(re.search(r"shelf life of (\d+) days", preview).group(1))
        assert (dt.date.today() + dt.timedelta(days=days)).isoformat() in preview
        _fits(page, size, "staff-run", screenshot)

        # 3. Today lists the run as awaiting a decision, with a link to it.
        page.goto(base + "/")
        row = page.locator("#undecided tr", has_text=code)
        expect(row).to_contain_text("standardization")
        _fits(page, size, "staff-today-undecided", screenshot)
        row.locator("a", has_text="Review and decide").click()
        page.wait_for_url(run_url)

        # 4. Accept and release: the batch page prompts for labels.
        page.click("button:has-text('Accept and release')")
        page.wait_for_url(f"{base}/batches/{code}")
        assert page.locator(".chip").first.inner_text() == "In service"
        expect(page.locator("#print-prompt")).to_contain_text("no label shows this value yet")
        _fits(page, size, "staff-released", screenshot)
        page.locator("#print-prompt a", has_text="Print labels").click()
        page.wait_for_url(f"{base}/batches/{code}/labels")
        _fits(page, size, "staff-labels", screenshot)

        # 5. Print: the page confirms what was printed, the PDF downloads, and the print is listed.
        page.check("input[name=layout][value=bottle]")
        page.fill("#f-copies", "2")
        with page.expect_download() as download:
            page.click("button:has-text('Record the print')")
        assert download.value.suggested_filename.startswith(f"labels-{code}-")
        done = page.locator("#print-done").inner_text()
        assert f"2 labels of {code}" in done and "mol/L" in done and "bottle" in done.lower()
        listed = page.locator("section.panel", has=page.locator("h2", has_text="Labels printed")).inner_text()
        serials = re.search(r"serials (\d{6}–\d{6})", done).group(1)
        assert serials in listed
        _fits(page, size, "staff-printed", screenshot)
        page.goto(f"{base}/batches/{code}")
        assert page.locator("#print-prompt").count() == 0
    finally:
        context.close()


def test_instructor_lab_day_sheet_and_class_correction(browser, staff_demo_server, size, screenshot):
    base = staff_demo_server
    context, page = _sign_in(browser, base, size, "demo-instructor")
    try:
        _open_menu(page, size)
        page.locator("nav[aria-label=Main] a", has_text="Lab day").click()
        page.wait_for_load_state()
        page.select_option("#f-titrant", "NaOH")
        page.fill("#f-bench_temperature_c", "23")
        page.click("button:has-text('Look up')")
        page.wait_for_load_state()
        assert "Titrants for the lab day" in page.locator("h1").inner_text()
        expect(page.locator(".labday-entry").first).to_be_visible()
        # A batch on hold says so in a word and a shape beside its status, not by colour alone.
        held = page.locator(".labday-held").first
        chips = held.locator(".chip, .status-mark").evaluate_all(
            "cs => cs.map(c => [c.innerText.trim(), getComputedStyle(c, '::before').content])"
        )
        words = [w for w, _ in chips]
        assert "On hold" in words and len({g for _, g in chips}) == len(chips), chips
        _fits(page, size, "instructor-labday", screenshot)
        sheet = page.locator("a", has_text="Printable sheet (PDF)").get_attribute("href")
        answer = page.request.get(base + sheet)
        assert answer.status == 200 and answer.headers["content-type"] == "application/pdf"

        link = page.locator("p.entry-tools a").first
        code = re.search(r"with (\S+)…", link.inner_text()).group(1)
        link.click()
        page.wait_for_load_state()
        # Carried from the look-up: the titrant, the bench temperature, the day and the batch.
        assert page.locator("#f-titrant").input_value() == "NaOH"
        assert page.locator("#f-bench_temperature_c").input_value() == "23"
        assert page.locator("#f-lab_day").input_value() == dt.date.today().isoformat()
        assert page.locator("#f-batch").input_value() == code
        _fits(page, size, "instructor-correct", screenshot)
        page.set_input_files("#f-sheet", files=[{"name": "class.csv", "mimeType": "text/csv", "buffer": CLASS_CSV}])
        page.click("button:has-text('Correct the results')")
        page.wait_for_load_state()
        assert "/lab-day/corrections/" in page.url
        text = page.locator("main").inner_text()
        assert code in text and "bench 1" in text and "mol/L" in text
        _fits(page, size, "instructor-corrected", screenshot)
    finally:
        context.close()


def test_admin_accounts_policy_and_audit(browser, staff_demo_server, size, screenshot):
    base = staff_demo_server
    context, page = _sign_in(browser, base, size, "demo-admin")
    try:
        _open_menu(page, size)
        page.locator("nav[aria-label=Main] a", has_text="Admin").click()
        page.wait_for_url(base + "/admin/users")
        username = f"newstaff{size}"
        page.fill("#f-username", username)
        page.fill("#f-display_name", f"New Staff ({size}, invented)")
        page.select_option("#f-role", "staff")
        page.fill("#f-password", "bench-Test-long-9f invented")
        _fits(page, size, "admin-users", screenshot)
        page.click("button:has-text('Create account')")
        page.wait_for_load_state()
        expect(page.locator("main table")).to_contain_text(username)
        _fits(page, size, "admin-user-made", screenshot)

        page.goto(base + "/admin/policy")
        assert page.title().startswith("Reagent policy")
        expect(page.locator("main h2").first).to_have_text("Policy in force today")
        expect(page.locator("main table").first).to_contain_text("NaOH")
        _fits(page, size, "admin-policy", screenshot)

        _open_menu(page, size)
        page.locator("nav[aria-label=Main] a", has_text="Audit").click()
        page.wait_for_load_state()
        trail = page.locator("main table").inner_text()
        assert "created an account" in trail and "demo-admin" in trail
        _fits(page, size, "admin-audit", screenshot)
    finally:
        context.close()


@pytest.fixture
def empty_site(tmp_path_factory):
    """A live stockroom on a new database with one administrator and nothing else; yields its base URL."""
    import threading

    from livesite import _free_port
    from waitress.server import create_server

    from stockroom import accounts, create_app
    from stockroom import db as dbmod

    path = tmp_path_factory.mktemp("empty") / "new.db"
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "browser-empty", "LAB_TIMEZONE": "UTC"})
    conn = dbmod.connect(path)
    try:
        accounts.create_user(conn, "first-admin", "First Admin", "admin", DEMO_PASSWORD, actor="test-setup")
    finally:
        conn.close()
    server = create_server(app, host="127.0.0.1", port=_free_port(), threads=2)
    threading.Thread(target=server.run, daemon=True).start()
    yield f"http://127.0.0.1:{server.effective_port}"
    server.close()


def test_first_steps_on_a_new_database(browser, empty_site, size, screenshot):
    base = empty_site
    context, page = _sign_in(browser, base, size, "first-admin")
    try:
        steps = page.locator("#first-steps")
        expect(steps.locator("h2")).to_have_text("Getting started")
        items = steps.locator("li")
        assert items.count() == 3 and steps.locator(".step-done").count() == 0
        assert [a.inner_text() for a in steps.locator("a").all()] == [
            "Set the reagent policies",
            "Register a primary-standard lot",
            "Register a batch",
        ]
        _fits(page, size, "first-steps", screenshot)
        steps.locator("a", has_text="Register a primary-standard lot").click()
        page.wait_for_url(base + "/lots/new")
        today = dt.date.today()
        page.select_option("#f-substance", "KHP")
        page.fill("#f-supplier", "Invented Fine Chemicals")
        page.fill("#f-supplier_lot", f"IFC-{size}-1 (invented)")
        page.fill("#f-assay_pct", "99.995")
        page.fill("#f-assay_u_pct", "0.02")
        page.fill("#f-expires_on", (today + dt.timedelta(days=365)).isoformat())
        page.fill("#f-dried_on", today.isoformat())
        page.fill("#f-dried_at_c", "120")
        page.click("main button[type=submit]")
        page.wait_for_load_state()
        page.goto(base + "/")
        done = page.locator("#first-steps .step-done")
        expect(done).to_have_count(1)
        assert "Register a primary-standard lot" in done.inner_text() and done.inner_text().startswith("done:")
        _fits(page, size, "first-steps-lot-done", screenshot)
    finally:
        context.close()
