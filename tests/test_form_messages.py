"""A refused form lists each problem under the label the form shows, never under an internal field name."""

from __future__ import annotations

import re

import pytest
from formposts import post

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
