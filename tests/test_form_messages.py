"""A refused form lists each problem under the label the form shows, never under an internal field name."""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

import pytest
from formposts import post

from stockroom.web import forms

# (url, fields posted, field refused, the label the page shows for it)
REFUSALS = [
    ("/admin/users", {"username": "newbie", "display_name": "New Person", "role": "staff", "password": "x"}, "password"),
    ("/admin/policy", {"reagent": "NaOH", "shelf_life_days": "-3", "effective_from": "2026-01-01", "reason": "r"}, None),
]


@pytest.mark.parametrize(("url", "data", "field"), REFUSALS)
def test_refused_form_names_fields_by_label(signed_in_client, form_token, url, data, field):
    client = signed_in_client("admin")
    answer = post(client, form_token, url, data)
    assert answer.status_code == 422
    page = answer.get_data(as_text=True)
    summary = re.search(r'<div class="notice notice-error" role="alert">(.*?)</div>', page, re.S)
    assert summary, "a refused form lists its problems at the top"
    items = re.findall(r'<li><a href="#f-([^"]+)">(.*?)</a>:', summary.group(1))
    assert items
    labels = dict(re.findall(r'<label for="f-([^"]+)">([^<]+)', page))
    for name, shown in items:
        assert "_" not in shown and shown != name or name not in labels or shown == labels[name].strip()
        if name in labels:
            assert shown == labels[name].strip()
    if field:
        assert field in dict(items)
    assert not re.search(r"\b[a-z]+_[a-z_0-9]+:", summary.group(1))


def _password_inputs(page: str) -> list[str]:
    return re.findall(r"<input\b[^>]*\btype=\"password\"[^>]*>", page)


@pytest.mark.parametrize(
    ("path", "role"), [("/account/password", "staff"), ("/admin/users", "admin")], ids=["own password", "new account"]
)
def test_new_password_fields_say_new_password(signed_in_client, path, role):
    page = signed_in_client(role).get(path).get_data(as_text=True)
    inputs = _password_inputs(page)
    assert inputs
    for tag in inputs:
        name = re.search(r'name="([^"]+)"', tag).group(1)
        want = "current-password" if name == "current_password" else "new-password"
        assert f'autocomplete="{want}"' in tag, tag


def test_first_run_password_fields_say_new_password(client):
    page = client.get("/first-run").get_data(as_text=True)
    inputs = _password_inputs(page)
    assert len(inputs) == 2 and all('autocomplete="new-password"' in tag for tag in inputs)


def test_skip_link_is_the_first_focusable_element(signed_in_client):
    page = signed_in_client("staff").get("/batches/").get_data(as_text=True)
    body = page.split("<body>", 1)[1]
    first = re.search(r"<(a|button|input|select|textarea|summary)\b[^>]*>([^<]*)", body)
    assert first.group(1) == "a" and 'class="skip"' in first.group(0) and 'href="#content"' in first.group(0)
    assert first.group(2).strip() == "Skip to content"
    assert '<main id="content" tabindex="-1">' in page


# ---------------------------------------------------------------- every form, one bad value each

TODAY = "2026-12-01"  # the demo scenario's today (invented)
BATCH = "HCL-2608-01"  # a batch of the demo scenario with a release
RUN = 17  # the demo's last run (decided)

# (method, url, fields sent, the internal field refused, the words the person must read for it).
# A form on its own page re-shows it with the list of problems; a form that is one button on another
# page (a decision, a leave-out, disabling an account, a correction) answers with the error page.
EVERY_FORM = [
    (
        "POST",
        "/admin/users",
        {"username": "newbie", "display_name": "N", "role": "staff", "password": "x"},
        "password",
        "First password",
    ),
    ("POST", "/admin/users/okafor/disable", {"reason": ""}, "reason", "Reason"),
    ("POST", "/admin/policy", {"reagent": "NaOH", "shelf_life_days": "-3", "reason": "r"}, "shelf_life_days", "Shelf life"),
    ("POST", "/admin/hazards", {"reagent": "HCl", "min_molarity": "lots", "reason": "r"}, "min_molarity", "From (inclusive)"),
    (
        "POST",
        "/account/password",
        {"current_password": "", "new_password": "a", "confirm_password": "a"},
        "current_password",
        "Current password",
    ),
    ("POST", "/account/tokens", {"label": "bad\x00label"}, "label", "What will use it"),
    (
        "POST",
        f"/batches/{BATCH}/amend",
        {"field": "volume_l", "new_value": "lots", "reason": "typo"},
        "new_value",
        "Corrected value",
    ),
    ("POST", f"/batches/{BATCH}/labels", {"layout": "no-such-layout", "copies": "1"}, "layout", "Layout"),
    ("POST", f"/batches/{BATCH}/withdraw", {"withdrawn_on": TODAY, "reason": ""}, "reason", "Reason"),
    (
        "POST",
        f"/batches/{BATCH}/runs/new",
        {"purpose": "recheck", "r3_initial_ml": "0.10", "r3_final_ml": "20.1", "r3_exclude": "on"},
        "r3_exclude_reason",
        "Replicate 3, reason for leaving it out",
    ),
    ("POST", "/batches/new", {"reagent": "HCl", "nominal_molarity": "0.1", "volume_l": "lots"}, "volume_l", "Volume made up"),
    ("POST", "/instruments/new", {"code": "BUR-99", "kind": "burette", "capacity": "lots"}, "capacity", "Capacity"),
    (
        "POST",
        "/instruments/{instrument}/calibrations",
        {"calibrated_on": "yesterday", "outcome": "pass"},
        "calibrated_on",
        "Calibrated on",
    ),
    ("POST", "/lab-day/correct", {"lab_day": "someday", "titrant": "HCl"}, "lab_day", "Lab day"),
    ("POST", "/lots/new", {"substance": "KHP", "assay_pct": "lots"}, "assay_pct", "Certificate assay"),
    ("POST", "/recalls/new", {"subject": "", "suspect_from": TODAY, "reason": "r"}, "subject", None),
    ("POST", f"/runs/{RUN}/exclude", {"position": "first", "reason": "bubble"}, "position", "Replicate"),
    ("POST", f"/runs/{RUN}/decide", {"decision": "maybe"}, "decision", "Decision"),
    ("GET", f"/batches/{BATCH}/adjust?basis=certified&volume_l=lots", None, "volume_l", "Volume left in the container"),
    ("GET", "/lab-day?date=2026-12-01&bench_temperature_c=99", None, "bench_temperature_c", "Bench temperature"),
]


@pytest.fixture(scope="module")
def demo_admin(tmp_path_factory):
    from stockroom import create_app
    from stockroom.demo import build_demo

    path = tmp_path_factory.mktemp("forms") / "demo.db"
    password = "violet kettle under the stairs"  # the test password of tests/conftest.py (invented)
    build_demo(str(path), today=dt.date.fromisoformat(TODAY), password=password)
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "t", "TESTING": True, "LAB_TIMEZONE": "UTC"})
    clients = {}
    for username in ("demo-admin", "demo-instructor"):
        client = clients[username] = app.test_client()
        page = client.get("/sign-in").get_data(as_text=True)
        token = re.search(r'name="csrf_token" value="([^"]+)"', page).group(1)
        resp = client.post("/sign-in", data={"username": username, "password": password, "csrf_token": token})
        assert resp.status_code == 303
    admin = clients["demo-admin"]
    token = re.search(r'name="csrf_token" value="([^"]+)"', admin.get("/").get_data(as_text=True)).group(1)
    made = admin.post(
        "/instruments/new",
        data={"code": "BUR-01", "kind": "burette", "capacity": "50", "accuracy_class": "A", "csrf_token": token},
    )
    assert made.status_code == 303, made.get_data(as_text=True)[:800]
    clients["instrument"] = made.headers["Location"].rsplit("/", 1)[-1]
    return app, clients


def _visible(page: str) -> str:
    page = re.sub(r"<(script|style)\b.*?</\1>", " ", page, flags=re.S)
    return " ".join(unescape(re.sub(r"<[^>]+>", " ", page)).split())


def _records(app) -> tuple[int, ...]:
    from formposts import count

    return tuple(count(app, t) for t in ("events", "batches", "runs", "releases", "withdrawals", "standard_lots", "users"))


@pytest.mark.parametrize(("method", "url", "data", "key", "label"), EVERY_FORM, ids=[row[1] for row in EVERY_FORM])
def test_every_form_names_a_refused_field_by_its_label(demo_admin, method, url, data, key, label):
    app, clients = demo_admin
    client = clients["demo-instructor" if url.startswith("/lab-day/correct") else "demo-admin"]
    url = url.format(instrument=clients["instrument"])
    before = _records(app)
    if method == "GET":
        answer = client.get(url)
    else:
        token = re.search(r'name="csrf_token" value="([^"]+)"', client.get("/").get_data(as_text=True)).group(1)
        answer = client.post(url, data={**data, "csrf_token": token})
    assert 400 <= answer.status_code < 500, (answer.status_code, answer.headers.get("Location"))
    text = _visible(answer.get_data(as_text=True))
    if label is None:  # a select whose label the page itself shows: read it from the page
        label = forms.labels_in(answer.get_data(as_text=True))[key]
    assert f"{label}:" in text or f"{label} :" in text, text[:1500]
    assert f"{key}:" not in text
    if "_" in key:
        assert key not in text
    assert not re.search(r"\b[a-z]+_[a-z0-9_]+\b:", text)
    assert _records(app) == before


def test_first_run_lists_its_problems_by_label(client, form_token, quick_password_hashing):
    token = form_token(client, "/first-run")
    data = {"username": "first", "display_name": "First Admin", "password": "a long enough phrase here"}
    answer = client.post("/first-run", data={**data, "confirm_password": "another phrase", "csrf_token": token})
    assert answer.status_code == 422
    text = _visible(answer.get_data(as_text=True))
    assert "Password again :" in text or "Password again:" in text
    assert "confirm_password" not in text and "Confirm password" not in text
