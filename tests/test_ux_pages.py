"""Issue 16's "Also" list as pages show it: Today's undecided runs and first steps, a re-check against the
certified value, the expiry an acceptance sets, the print prompt and confirmation, the class correction's
carried choices, lab times, and catalogue notes read as defaults to check.
"""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

import pytest
from ux_world import make_batch, make_lot, released, run, today

from stockroom import db as dbmod
from stockroom import records, workflow
from stockroom.web.formatting import on_screen


def _text(resp) -> str:
    """A page's text without tags and with entities read, spaces collapsed."""
    html = resp.get_data(as_text=True)
    html = re.sub(r"<(script|style)\b.*?</\1>", " ", html, flags=re.S)
    return re.sub(r"\s+", " ", unescape(re.sub(r"<[^>]+>", " ", html)))


def _section(html: str, element_id: str) -> str:
    found = re.search(rf'id="{element_id}".*?</(section|div)>', html, re.S)
    assert found, f"no element #{element_id} on the page"
    return re.sub(r"\s+", " ", unescape(re.sub(r"<[^>]+>", " ", found.group(0))))


# ---------------------------------------------------------------- Today


def test_today_lists_runs_awaiting_a_decision_with_links(app, database, signed_in_client):
    lot = make_lot(database)
    batch = make_batch(database)
    run_id, _ = run(database, app.config, batch, lot)
    staff = signed_in_client("staff")
    html = staff.get("/").get_data(as_text=True)
    panel = _section(html, "undecided")
    assert batch["code"] in panel and "standardization" in panel and "R. Okafor" in panel
    assert f'href="/runs/{run_id}">Review and decide</a>' in html
    # Decided, it leaves the list.
    records.decide_run(database, run_id, "reject", "invented: wrong standard", "setup")
    panel = _section(staff.get("/").get_data(as_text=True), "undecided")
    assert batch["code"] not in panel and "No run is waiting" in panel


def test_first_steps_show_on_an_empty_database_and_go_once_done(app, database, signed_in_client):
    admin = signed_in_client("admin")
    html = admin.get("/").get_data(as_text=True)
    steps = _section(html, "first-steps")
    assert "Set the reagent policies" in steps and "Register a primary-standard lot" in steps and "Register a batch" in steps
    assert 'href="/admin/policy"' in html and 'href="/lots/new"' in html and 'href="/batches/new"' in html
    assert "done:" not in steps
    make_lot(database)
    steps = _section(admin.get("/").get_data(as_text=True), "first-steps")
    assert steps.count("done:") == 1 and re.search(r"done: Register a primary-standard lot", steps)
    make_batch(database)
    assert 'id="first-steps"' not in admin.get("/").get_data(as_text=True)


def test_first_steps_name_who_does_a_step_a_reader_cannot(app, signed_in_client):
    instructor = signed_in_client("instructor")
    html = instructor.get("/").get_data(as_text=True)
    steps = _section(html, "first-steps")
    assert "(an administrator does this)" in steps and "(prep staff do this)" in steps
    assert 'href="/admin/policy"' not in html


# ---------------------------------------------------------------- the run page


def test_a_recheck_shows_its_deviation_from_the_certified_value(app, database, signed_in_client):
    lot = make_lot(database)
    batch = make_batch(database, days_ago=10)
    released(database, app.config, batch, lot, days_ago=5)
    release = database.execute("SELECT molarity, tolerance_rel FROM releases").fetchone()
    # Masses 1 % larger give a molarity 1 % higher (c = m·P / (M·V)), beyond a 0.5 % tolerance.
    far_id, far = run(database, app.config, batch, lot, purpose="recheck", days_ago=1, scale=1.01)
    near_id, near = run(database, app.config, batch, lot, purpose="recheck", days_ago=1, scale=1.001)
    staff = signed_in_client("staff")
    far_text = _section(staff.get(f"/runs/{far_id}").get_data(as_text=True), "recheck-against")
    rel_dev = (far.molarity - release[0]) / release[0]
    assert rel_dev == pytest.approx(0.01, abs=1e-4)  # masses are kept to 0.1 mg, so not exactly 1 %
    assert f"(+{rel_dev * 100:.2f} %)" in far_text  # +1.00 %
    assert "tolerance ±0.50 %" in far_text and "beyond tolerance" in far_text
    assert re.search(r"Difference \+0\.00\d+ mol/L", far_text)
    near_text = _section(staff.get(f"/runs/{near_id}").get_data(as_text=True), "recheck-against")
    assert "+0.10 %" in near_text and "within tolerance" in near_text
    # The batch page says the same beside each re-check.
    batch_text = _text(staff.get(f"/batches/{batch['code']}"))
    assert "(+1.00 %), tolerance ±0.50 %: beyond tolerance" in batch_text
    assert "(+0.10 %), tolerance ±0.50 %: within tolerance" in batch_text


def test_accepting_shows_the_expiry_it_will_set(app, database, signed_in_client):
    lot = make_lot(database)
    batch = make_batch(database, days_ago=3)
    run_id, _ = run(database, app.config, batch, lot)
    staff = signed_in_client("staff")
    text = _section(staff.get(f"/runs/{run_id}").get_data(as_text=True), "expiry-preview")
    # The starting NaOH policy: 90 days of shelf life from preparation (stockroom/schema.py's literal rows).
    expected = (today() - dt.timedelta(days=3) + dt.timedelta(days=90)).isoformat()
    assert f"It will expire on {expected}" in text and "shelf life of 90 days" in text
    release_id = workflow.accept(database, run_id, "setup")  # the page's promise is what accepting writes
    row = database.execute("SELECT expires_on FROM releases WHERE id = ?", [release_id]).fetchone()
    assert row[0] == expected


# ---------------------------------------------------------------- release -> labels


def test_a_release_prompts_printing_labels_until_one_is_printed(app, database, signed_in_client, form_token):
    lot = make_lot(database)
    batch = make_batch(database)
    released(database, app.config, batch, lot, days_ago=1)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}"
    html = staff.get(url).get_data(as_text=True)
    assert "no label shows this value yet" in _section(html, "print-prompt")
    assert f'<a class="button" href="/batches/{batch["code"]}/labels">Print labels</a>' in html
    labels = f"/batches/{batch['code']}/labels"
    resp = staff.post(labels, data={"layout": "bottle", "copies": "2", "csrf_token": form_token(staff, labels)})
    assert resp.mimetype == "application/pdf"
    assert 'id="print-prompt"' not in staff.get(url).get_data(as_text=True)
    # An instructor (who cannot print) is not prompted.
    assert 'id="print-prompt"' not in signed_in_client("instructor").get(url).get_data(as_text=True)


def test_the_labels_page_confirms_a_print_and_lists_it(app, database, signed_in_client, form_token):
    lot = make_lot(database)
    batch = make_batch(database)
    released(database, app.config, batch, lot, days_ago=1)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}/labels"
    page = staff.get(url).get_data(as_text=True)
    assert 'name="then" value="confirm"' in page
    form_id = re.search(r'name="form_id" value="([^"]+)"', page).group(1)
    data = {"layout": "bottle", "copies": "3", "start": "1", "then": "confirm", "form_id": form_id}
    resp = staff.post(url, data={**data, "csrf_token": form_token(staff, url)})
    assert resp.status_code == 303
    row = database.execute("SELECT id, serial_first, serial_last, value_printed FROM label_prints").fetchone()
    assert resp.headers["Location"].endswith(f"{url}?printed={row[0]}&start=1")
    confirm = staff.get(resp.headers["Location"]).get_data(as_text=True)
    done = _section(confirm, "print-done")
    assert f"3 labels of {batch['code']}" in done and "serials 000001–000003" in done and row[3] in done
    assert f'http-equiv="refresh" content="0; url=/label-prints/{row[0]}.pdf?start=1"' in confirm
    listed = re.search(r"Labels printed for this batch.*?</table>", confirm, re.S).group(0)
    assert "000001–000003" in listed and "staff-user" in listed
    pdf = staff.get(f"/label-prints/{row[0]}.pdf?start=1")
    assert pdf.status_code == 200 and pdf.mimetype == "application/pdf"
    assert pdf.headers["Content-Disposition"] == f'attachment; filename="labels-{batch["code"]}-000001.pdf"'
    # The same form sent again makes nothing and lands on the same confirmation.
    again = staff.post(url, data={**data, "csrf_token": form_token(staff, url)})
    assert again.status_code == 303 and again.headers["Location"] == resp.headers["Location"]
    assert database.execute("SELECT count(*) FROM label_prints").fetchone()[0] == 1


def test_a_print_pdf_is_refused_once_the_label_would_say_something_else(app, database, signed_in_client, form_token):
    lot = make_lot(database)
    batch = make_batch(database)
    released(database, app.config, batch, lot, days_ago=1)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}/labels"
    resp = staff.post(url, data={"layout": "bottle", "copies": "1", "then": "confirm", "csrf_token": form_token(staff, url)})
    print_id = database.execute("SELECT id FROM label_prints").fetchone()[0]
    assert resp.status_code == 303
    records.withdraw_batch(database, batch["id"], today(), "invented: carboy cracked", "setup")
    again = staff.get(f"/label-prints/{print_id}.pdf")
    assert again.status_code == 409 and "print again" in again.get_data(as_text=True)
    assert signed_in_client("instructor").get(f"/label-prints/{print_id}.pdf").status_code == 403


# ---------------------------------------------------------------- class correction


def test_the_class_correction_keeps_the_lab_day_choices(app, database, signed_in_client):
    lot = make_lot(database)
    first = make_batch(database, days_ago=10)
    second = make_batch(database, days_ago=9)
    released(database, app.config, first, lot, days_ago=5)
    released(database, app.config, second, lot, days_ago=4)
    instructor = signed_in_client("instructor")
    day = today().isoformat()
    page = instructor.get(f"/lab-day?date={day}&titrant=NaOH&bench_temperature_c=23.5").get_data(as_text=True)
    link = re.search(r'href="(/lab-day/correct\?[^"]*batch=' + re.escape(second["code"]) + r'[^"]*)"', page)
    assert link, "each batch of the lab day offers the correction with it"
    form = instructor.get(unescape(link.group(1))).get_data(as_text=True)
    assert re.search(r'<option value="NaOH"\s+selected', form)
    assert re.search(r'name="bench_temperature_c"[^>]*value="23.5"', form)
    assert re.search(rf'id="f-lab_day"[^>]*value="{day}"|value="{day}"[^>]*id="f-lab_day"', form)
    assert re.search(rf'<option value="{second["code"]}" selected>', form)
    assert not re.search(rf'<option value="{first["code"]}" selected>', form)


# ---------------------------------------------------------------- formats and wording


def test_times_show_in_the_lab_time_zone(app, database, signed_in_client):
    app.config["LAB_TIMEZONE"] = "Pacific/Auckland"
    with dbmod.clock_at(dt.datetime(2026, 3, 1, 23, 30, tzinfo=dt.UTC)):
        batch = make_batch(database)
    html = signed_in_client("staff").get(f"/batches/{batch['code']}").get_data(as_text=True)
    # 23:30 UTC on 1 March is 12:30 on 2 March in Auckland (NZDT, UTC+13; IANA tz database).
    assert "2026-03-02 12:30" in html and "When (Pacific/Auckland)" in html
    assert "2026-03-01T23:30" not in html


@pytest.mark.parametrize(
    "path, says_default",
    [
        ("/batches/new", True),  # the typical concentrates, in the form's catalogue
        ("/lots/new", True),  # the drying rules
        ("/admin/hazards", True),
        ("/instruments/new", True),
        ("/batches/{code}/labels", True),  # the hazard classification's source
        ("/batches/{code}/adjust", False),
    ],
)
def test_no_screen_says_from_memory_or_verify(app, database, signed_in_client, path, says_default):
    lot = make_lot(database)
    batch = make_batch(database)
    released(database, app.config, batch, lot, days_ago=1)
    resp = signed_in_client("admin").get(path.format(code=batch["code"]))
    assert resp.status_code == 200
    # The whole page, attributes and the form script's data included (what a script may show).
    html = unescape(resp.get_data(as_text=True))
    assert "from memory" not in html and not re.search(r"\bverify\b", html, re.I), path
    if says_default:
        assert re.search(r"defaults? to check against", html), path


def test_catalogue_notes_read_as_defaults_to_check():
    assert on_screen("NaOH pellets, about 98 % (from memory — verify against the supplier's certificate).") == (
        "NaOH pellets, about 98 % (a default to check against the supplier's certificate)."
    )
    assert on_screen("Dry 2 h at 105–120 °C (common practice; from memory — verify)") == (
        "Dry 2 h at 105–120 °C (common practice; a default to check against the supplier's certificate or safety data sheet)"
    )
    eyewash = "know where the eyewash is (common practice; from memory)."
    assert on_screen(eyewash) == "know where the eyewash is (common practice)."


def test_a_runs_decision_is_spelt_the_same_on_every_page(app, database, signed_in_client):
    lot = make_lot(database)
    batch = make_batch(database)
    open_id, _ = run(database, app.config, batch, lot, days_ago=2)
    shut_id, _ = run(database, app.config, batch, lot, days_ago=1)
    records.decide_run(database, shut_id, "reject", "invented: wrong standard", "setup")
    staff = signed_in_client("staff")
    pages = [_text(staff.get(p)) for p in ("/", f"/batches/{batch['code']}", f"/runs/{open_id}", f"/runs/{shut_id}")]
    assert all("undecided" not in t.lower() for t in pages)
    assert "awaiting a decision" in pages[1] and "rejected" in pages[1]
    assert "awaiting a decision" in pages[2] and "rejected by setup" in pages[3]
