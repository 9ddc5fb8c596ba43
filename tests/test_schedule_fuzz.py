"""Hypothesis fuzzing of the schedule's doors and the plan's query: only 4xx, never 5xx, nothing stored when refused."""

from __future__ import annotations

import datetime as dt
import io
import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockroom import accounts, create_app, tokens
from stockroom import db as dbmod
from stockroom.schedule_input import KEYS

TODAY = dt.date.today()
FUZZ = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])

nasty_text = st.one_of(
    st.sampled_from(
        [
            "",
            " ",
            "NaN",
            "inf",
            "1e309",
            "0,25",
            "2,5",
            "１２",
            "٣",
            "12 L",
            "<b>x</b>",
            "\x00",
            "9" * 400,
            "-1",
            "NaOH",
            "HCl",
            TODAY.isoformat(),
            "2026-02-30",
            "CHM 110/B",
            "a/b/c",
            "/B",
        ]
    ),
    st.text(max_size=30),
)
nasty_number = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.sampled_from([0, -1, 1e-300, 1e300, True, False, None]),
)
leaf = st.one_of(nasty_number, nasty_text)
json_value = leaf | st.lists(leaf, max_size=3) | st.dictionaries(st.text(max_size=8), leaf, max_size=3)
field_names = st.sampled_from([*KEYS, "extra"])


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    path = tmp_path_factory.mktemp("schedfuzz") / "f.db"
    app = create_app({"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "t", "WTF_CSRF_ENABLED": False})
    conn = dbmod.connect(path)
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    user = accounts.create_user(conn, "fuzzer", "Fuzzer", "staff", "fuzzing-Test-91ab", "test")
    token = tokens.create(conn, user.id, user.username, "fuzzing")[1]
    conn.close()
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "fuzzer", "password": "fuzzing-Test-91ab"}).status_code == 303
    return {"client": client, "path": path, "token": token}


def _count(world):
    conn = dbmod.connect(world["path"])
    try:
        return conn.execute("SELECT count(*) FROM lab_sessions").fetchone()[0]
    finally:
        conn.close()


def _check(resp):
    assert resp.status_code < 500, resp.get_data(as_text=True)[:500]


@FUZZ
@given(body=st.one_of(json_value, st.dictionaries(field_names, json_value, max_size=8)))
def test_session_api_never_fails_with_5xx(world, body):
    before = _count(world)
    resp = world["client"].post(
        "/api/v1/lab-sessions",
        data=json.dumps(body),
        content_type="application/json",
        headers={"Authorization": f"Bearer {world['token']}"},
    )
    _check(resp)
    assert _count(world) == before + (1 if resp.status_code == 201 else 0)


@FUZZ
@given(form=st.dictionaries(field_names, nasty_text, max_size=8))
def test_session_form_never_fails_with_5xx(world, form):
    before = _count(world)
    resp = world["client"].post("/schedule", data=form)
    _check(resp)
    assert _count(world) == before + (1 if resp.status_code == 303 else 0)


@FUZZ
@given(
    text=st.one_of(
        st.text(max_size=300),
        st.lists(
            st.lists(nasty_text, min_size=1, max_size=9).map(lambda c: ",".join(x.replace("\n", " ") for x in c)), max_size=5
        ).map(lambda rows: "\n".join([",".join(KEYS), *rows])),
    )
)
def test_schedule_import_check_never_fails_with_5xx_and_stores_nothing(world, text):
    before = _count(world)
    data = {"sheet": (io.BytesIO(text.encode("utf-8", "surrogatepass")), "s.csv")}
    _check(world["client"].post("/schedule/import", data=data, content_type="multipart/form-data"))
    assert _count(world) == before


@FUZZ
@given(query=st.dictionaries(st.sampled_from(["from", "to", "titrant", "course", "x"]), nasty_text, max_size=4))
def test_plan_and_schedule_reads_never_fail_with_5xx(world, query):
    for url in ("/api/v1/plan", "/plan", "/schedule", "/api/v1/lab-sessions"):
        _check(world["client"].get(url, query_string=query))


@FUZZ
@given(destination=nasty_text)
def test_lab_day_destination_never_fails_with_5xx(world, destination):
    q = {"date": TODAY.isoformat(), "titrant": "NaOH", "destination": destination}
    _check(world["client"].get("/api/v1/lab-day", query_string=q))
    _check(world["client"].get("/lab-day", query_string=q))
