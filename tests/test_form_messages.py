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
