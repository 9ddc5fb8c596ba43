"""Every page a signed-in administrator can open, at phone and desktop size, in a real browser.

The walk is the app's own URL map: each GET route that answers with a page, its ids filled from the
invented demo scenario (plus an instrument and a recall added here, which the scenario does not
hold). A route that takes an id the walk cannot fill fails the test, so a new page cannot slip past.

Set LAYOUT_SHOTS=/some/dir to save a full-page screenshot of every page at both sizes.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import threading
from pathlib import Path

import pytest
from livesite import DEMO_PASSWORD, _free_port

pytestmark = pytest.mark.browser

PHONE = {"width": 390, "height": 844}
DESKTOP = {"width": 1366, "height": 900}
ADMIN = "demo-admin"  # the demo scenario's administrator (demo_data/scenario.json)

# Routes that answer with something other than a page, or that an administrator may not open: the
# first-run page (only while no user exists) and the class-data correction (instructors only).
NOT_PAGES = re.compile(r"\.(pdf|svg|csv)$|^/api/|^/static/|^/healthz$|^/first-run$|^/lab-day/correct")


@pytest.fixture(scope="module")
def layout_site(tmp_path_factory):
    """A live demo with one of everything a page can show; yields (base URL, GET paths to walk)."""
    from waitress.server import create_server

    from stockroom import create_app, instruments, recall
    from stockroom import db as dbmod
    from stockroom.demo import build_demo

    path = tmp_path_factory.mktemp("layout") / "demo.db"
    build_demo(str(path), password=DEMO_PASSWORD)
    today = dt.date.today()
    db = dbmod.connect(path)
    inst = instruments.register(
        db,
        {
            "code": "BUR-LAYOUT-1",
            "kind": "burette",
            "description": "50 mL burette (invented)",
            "capacity": 50.0,
            "accuracy_class": "A",
            "tolerance": 0.05,
            "readability": 0.01,
        },
        "layout-test",
        calibration={
            "calibrated_on": (today - dt.timedelta(days=30)).isoformat(),
            "next_due_on": (today + dt.timedelta(days=335)).isoformat(),
            "outcome": "pass",
            "certificate_ref": "CAL-LAYOUT-1 (invented)",
            "calibrated_by": "layout-test",
        },
    )
    lot_id = db.execute("SELECT min(id) FROM standard_lots").fetchone()[0]
    recall_id = recall.open_recall(
        db, "lot", lot_id, today - dt.timedelta(days=200), "Invented for the layout test", today, "layout-test"
    )
    ids = {
        "code": db.execute("SELECT code FROM batches ORDER BY id LIMIT 1").fetchone()[0],
        "run_id": db.execute("SELECT max(id) FROM runs").fetchone()[0],
        "lot_id": lot_id,
        # A lot's pages are addressed by the lot's own code, under the same argument name as a batch's.
        "lot_code": db.execute("SELECT code FROM standard_lots WHERE id = ?", [lot_id]).fetchone()[0],
        "instrument_id": inst.id,
        "recall_id": recall_id,
        "container_code": db.execute("SELECT code FROM containers ORDER BY id LIMIT 1").fetchone()[0],
        "session_id": db.execute("SELECT min(id) FROM lab_sessions").fetchone()[0],  # the demo's term schedule
    }
    db.conn.close()
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "browser-layout", "LAB_TIMEZONE": "UTC"})
    rules = sorted(
        (r for r in app.url_map.iter_rules() if "GET" in (r.methods or ()) and not NOT_PAGES.search(r.rule)),
        key=lambda r: r.rule,
    )
    server = create_server(app, host="127.0.0.1", port=_free_port(), threads=4)
    threading.Thread(target=server.run, daemon=True).start()
    yield f"http://127.0.0.1:{server.effective_port}", rules, ids
    server.close()


def _signed_in(browser, base: str, viewport: dict[str, int], user: str = ADMIN):
    context = browser.new_context(viewport=viewport)
    page = context.new_page()
    page.set_default_timeout(10_000)
    page.goto(base + "/sign-in")
    page.fill("#f-username", user)
    page.fill("#f-password", DEMO_PASSWORD)
    page.locator("main button[type=submit]").click()
    page.wait_for_url(base + "/")
    return context, page


def _paths(page, base: str, rules, ids: dict) -> list[str]:
    """The walk: every page route with its ids filled, and the batch page of every demo batch."""
    paths, seen = [], set()
    for rule in rules:
        if rule.endpoint in seen:  # one path per page (/audit and /audit/ are the same page)
            continue
        seen.add(rule.endpoint)
        missing = set(rule.arguments) - set(ids)
        assert not missing, f"the layout walk has no id for {rule.rule}: add one to layout_site"
        path = rule.rule
        for name in rule.arguments:
            value = ids["lot_code"] if name == "code" and rule.endpoint.startswith("lots.") else ids[name]
            if name == "code" and rule.rule.startswith("/containers/"):  # a container's own code
                value = ids["container_code"]
            path = re.sub(r"<(?:\w+:)?" + name + ">", str(value), path)
        paths.append(path)
    # The batch page of each status (the fullest pages of the product) besides the first batch.
    page.goto(base + "/batches/")
    codes = page.locator("table.grid a.batch-code").all_inner_texts()
    paths += [f"/batches/{c}" for c in codes if f"/batches/{c}" not in paths]
    return paths


def _shot(page, name: str) -> None:
    folder = os.environ.get("LAYOUT_SHOTS")
    if folder:
        Path(folder).mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(Path(folder) / f"{name}.png"), full_page=True)


def _name(size: str, path: str) -> str:
    return size + "-" + (re.sub(r"[^A-Za-z0-9]+", "_", path).strip("_") or "today")


# Batch IDs (e.g. NAOH-2611-01) and ISO dates, with the time when one follows: none may break across lines.
TOKENS_JS = r"""() => {
  const token = /[A-Z][A-Z0-9]*-\d{4}-\d{2}\b|\d{4}-\d{2}-\d{2}(?: \d{2}:\d{2})?/g;
  const walker = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
  const broken = [];
  let checked = 0;
  for (let node = walker.nextNode(); node; node = walker.nextNode()) {
    const parent = node.parentElement;
    if (!parent || parent.closest('script, style, svg, option, textarea')) continue;
    for (const m of node.data.matchAll(token)) {
      const range = document.createRange();
      range.setStart(node, m.index);
      range.setEnd(node, m.index + m[0].length);
      const rects = [...range.getClientRects()].filter(r => r.width > 0);
      if (rects.length === 0) continue;  // not shown (a closed disclosure)
      checked += 1;
      const tops = new Set(rects.map(r => Math.round(r.top)));
      if (tops.size > 1) broken.push(m[0] + ' in <' + parent.tagName.toLowerCase() + '>');
    }
  }
  return {checked, broken};
}"""


def test_no_page_is_wider_than_a_phone(browser, layout_site):
    base, rules, ids = layout_site
    context, page = _signed_in(browser, base, PHONE)
    try:
        paths = _paths(page, base, rules, ids)
        assert len(paths) >= 35
        too_wide, failed = [], []
        for path in paths:
            response = page.goto(base + path)
            assert response is not None
            if response.status >= 400:
                failed.append(f"{path}: {response.status}")
                continue
            width = page.evaluate("[document.documentElement.scrollWidth, window.innerWidth]")
            if width[0] > width[1]:
                too_wide.append(f"{path}: {width[0]} px in a {width[1]} px window")
            _shot(page, _name("phone", path))
        assert not failed and not too_wide, (failed, too_wide)
        # The header folds: the menu is closed on a phone and the first screen is mostly the page.
        page.goto(base + "/")
        header = page.locator("header.masthead").bounding_box()
        assert header is not None and header["height"] <= 0.12 * PHONE["height"]
        assert not page.locator("header nav a", has_text="Batches").is_visible()
        page.locator("header summary").click()
        assert page.locator("header nav a", has_text="Batches").is_visible()
    finally:
        context.close()


def test_desktop_never_breaks_an_id_or_a_date(browser, layout_site):
    base, rules, ids = layout_site
    context, page = _signed_in(browser, base, DESKTOP)
    try:
        paths = _paths(page, base, rules, ids)
        broken, checked = [], 0
        for path in paths:
            page.goto(base + path)
            found = page.evaluate(TOKENS_JS)
            checked += found["checked"]
            broken += [f"{path}: {b}" for b in found["broken"]]
            # The main menu stays on one line.
            nav = page.evaluate(
                "(() => { const links = [...document.querySelectorAll('header nav a')];"
                " return new Set(links.map(a => Math.round(a.getBoundingClientRect().top))).size; })()"
            )
            assert nav == 1, f"{path}: the main menu wraps onto {nav} lines"
            _shot(page, _name("desktop", path))
        assert checked > 200  # the walk really met IDs and dates
        assert not broken, "\n".join(broken)
        # The audit trail's "When" reads in one line, one format, in the lab's time zone.
        page.goto(base + "/audit/")
        when = page.locator("table.grid tbody tr td:nth-child(2)").all_inner_texts()
        assert when and all(re.fullmatch(r"\d{4}-\d{2}-\d{2} \d{2}:\d{2}", w) for w in when)
        cell = page.locator("table.grid tbody tr td:nth-child(2)").first
        assert cell.evaluate("c => c.getClientRects().length") == 1
    finally:
        context.close()


def _luminance(css: str) -> float:
    """Relative luminance of an sRGB colour (WCAG 2.1, definition of relative luminance)."""
    r, g, b = (int(v) / 255 for v in re.findall(r"[\d.]+", css)[:3])

    def lin(c: float) -> float:
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)


def contrast(fg: str, bg: str) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker."""
    a, b = sorted((_luminance(fg), _luminance(bg)), reverse=True)
    return (a + 0.05) / (b + 0.05)


def test_contrast_formula_against_the_wcag_examples():
    # WCAG 2.1 definition: black on white is 21:1, a colour on itself 1:1; #767676 on white is the
    # commonly quoted lightest grey passing 4.5:1 (4.54:1), from memory.
    assert contrast("rgb(0, 0, 0)", "rgb(255, 255, 255)") == pytest.approx(21.0)
    assert contrast("rgb(9, 9, 9)", "rgb(9, 9, 9)") == pytest.approx(1.0)
    assert contrast("rgb(118, 118, 118)", "rgb(255, 255, 255)") == pytest.approx(4.54, abs=0.01)


def test_statuses_read_without_colour_and_with_enough_contrast(browser, layout_site):
    base, _, _ = layout_site
    context, page = _signed_in(browser, base, DESKTOP)
    try:
        chips: dict[str, tuple[str, str]] = {}
        low = []
        batch: dict[str, tuple[str, str]] = {}
        for path in ("/batches/", "/lots/", "/instruments/", "/recalls/"):
            page.goto(base + path)
            for chip in page.locator("main .chip").all():
                # The shape is drawn before the word (CSS generated content, silent to screen readers).
                info = chip.evaluate(
                    "c => { const s = getComputedStyle(c); const g = getComputedStyle(c, '::before').content;"
                    " return {cls: c.className, word: c.innerText.trim(), glyph: g, fg: s.color, bg: s.backgroundColor}; }"
                )
                glyph = re.sub(r'^"(.*?)".*$', r"\1", info["glyph"])
                assert glyph.strip() and info["glyph"] != "none", f"{info['cls']} has no shape beside its word"
                assert re.search(r"[a-z]{3}", info["word"], re.I), f"{info['cls']} has no word"
                chips[info["cls"]] = (glyph, info["word"])
                if path == "/batches/":
                    batch[info["cls"]] = (glyph, info["word"])
                # WCAG 2.1 success criterion 1.4.3 (contrast, minimum): 4.5:1 for text of this size.
                ratio = contrast(info["fg"], info["bg"])
                if ratio < 4.5:
                    low.append(f"{info['cls']}: {ratio:.2f}:1")
        assert not low
        # Each batch status has its own word and its own shape.
        assert len(batch) == 6
        assert len({g for g, _ in batch.values()}) == 6
        assert len({w for _, w in batch.values()}) == 6
    finally:
        context.close()


def test_audit_list_takes_a_trailing_slash_and_pages_print_without_controls(browser, layout_site):
    base, _, _ = layout_site
    context, page = _signed_in(browser, base, DESKTOP)
    try:
        for path in ("/audit/", "/audit"):
            response = page.goto(base + path)
            assert response is not None and response.status == 200
            assert page.locator("h1").inner_text() == "Audit trail"
        page.goto(base + "/batches/")
        assert page.locator("header nav").is_visible()
        page.emulate_media(media="print")
        assert not page.locator("header nav").is_visible()
        assert not page.locator("main button").first.is_visible()
        assert not page.locator("a.skip").is_visible()
        assert page.locator("main table.grid").is_visible()
        pdf = page.pdf(format="A4")
        assert pdf.startswith(b"%PDF")
    finally:
        context.close()


def test_skip_link_and_new_password_fields(browser, layout_site):
    base, _, _ = layout_site
    context, page = _signed_in(browser, base, PHONE)
    try:
        page.goto(base + "/batches/")
        page.keyboard.press("Tab")
        skip = page.locator("a.skip")
        assert skip.evaluate("a => a === document.activeElement")
        assert skip.is_visible() and skip.get_attribute("href") == "#content"
        assert skip.inner_text() == "Skip to content"
        page.keyboard.press("Enter")
        assert page.evaluate("document.activeElement.id") == "content"
        for path, name in (
            ("/account/password", "new_password"),
            ("/account/password", "confirm_password"),
            ("/admin/users", "password"),
        ):
            page.goto(base + path)
            assert page.locator(f"main input[name={name}]").get_attribute("autocomplete") == "new-password"
    finally:
        context.close()
