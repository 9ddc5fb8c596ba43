"""Hypothesis fuzzing of the dispensing doors (JSON API and form): only 4xx, never 5xx, nothing stored when refused,
and the batch never below zero."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from stock_world import released_batch

from stockroom import accounts, create_app, tokens
from stockroom import db as dbmod
from stockroom.records import containers

TODAY = dt.date.today()
_text = st.one_of(
    st.sampled_from(["", " ", "NaN", "inf", "1e309", "0,5", "-1", "0", "５", "<script>", "\x00", "9" * 300, "bench bottle"]),
    st.text(max_size=20),
)
_number = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(10**20), max_value=10**20),
    st.sampled_from([0, 0.5, 4.99, 5.01, True, None]),
)
_leaf = st.one_of(_text, _number)
_value = (
    _leaf | st.lists(_leaf, max_size=2) | st.dictionaries(st.sampled_from(["room", "course", "section", "x"]), _leaf, max_size=3)
)
FUZZ = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
KEYS = ["volume_l", "dispensed_on", "container", "destination", "room", "course", "section", "notes", "extra"]


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    path = tmp_path_factory.mktemp("fuzzstock") / "f.db"
    app = create_app(
        {"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "t", "WTF_CSRF_ENABLED": False, "LAB_TIMEZONE": "UTC"}
    )
    conn = dbmod.connect(path)
    method, accounts.HASH_METHOD = accounts.HASH_METHOD, "pbkdf2:sha256:1000"  # cheap hashes, restored after
    user = accounts.create_user(conn, "fuzzer", "Fuzzer", "staff", "fuzzing-Test-91ab", "test")
    token = tokens.create(conn, user.id, user.username, "fuzzing")[1]
    batch, _ = released_batch(conn, app.config, prepared_on=TODAY - dt.timedelta(days=5), volume_l=5.0)
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "fuzzer", "password": "fuzzing-Test-91ab"}).status_code == 303
    yield {"client": client, "batch": batch, "conn": conn, "token": token}
    conn.close()
    accounts.HASH_METHOD = method


def _count(world):
    return world["conn"].execute("SELECT count(*) FROM containers").fetchone()[0]


def _check(world, resp, before):
    assert resp.status_code < 500, resp.get_data(as_text=True)[:500]
    if resp.status_code >= 400:
        assert _count(world) == before
    assert containers.volume_remaining_l(world["conn"], world["batch"]["id"]) >= 0.0
    out = world["conn"].execute("SELECT coalesce(sum(volume_l), 0) FROM containers").fetchone()[0]
    assert out <= 5.0 + 1e-9  # never more dispensed than the 5 L registered


@FUZZ
@given(body=st.dictionaries(st.sampled_from(KEYS), _value, max_size=6))
def test_dispensing_api_never_fails_with_5xx(world, body):
    base = {"volume_l": 0.01, "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "destination": "CHM 110"}
    try:
        data = json.dumps({**base, **body})
    except (ValueError, TypeError):
        return
    before = _count(world)
    resp = world["client"].post(
        f"/api/v1/batches/{world['batch']['code']}/dispensings",
        data=data,
        content_type="application/json",
        headers={"Authorization": f"Bearer {world['token']}"},
    )
    _check(world, resp, before)
    if resp.status_code >= 400:
        assert all(e["field"] and e["message"] for e in resp.get_json()["errors"])


@FUZZ
@given(form=st.dictionaries(st.sampled_from(KEYS), _text, max_size=7))
def test_dispensing_form_never_fails_with_5xx(world, form):
    before = _count(world)
    resp = world["client"].post(f"/batches/{world['batch']['code']}/dispense", data=form)
    _check(world, resp, before)
