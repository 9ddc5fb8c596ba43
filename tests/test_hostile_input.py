"""Hostile input gets a clear 4xx, never a 5xx: one test per kind of malformed request, then a
Hypothesis walk over every write route and a bounded fuzzer over every route (slow tier).

The world is the invented demo scenario with an admin signed in (tests/hostile.py).
"""

from __future__ import annotations

import io
import json
import random
import time

import hostile
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockroom import accounts, create_app, parsing, run_input


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    yield hostile.make_world(tmp_path_factory.mktemp("hostile"))
    hostile.close_readers()


@pytest.fixture(scope="module")
def code(world):
    return hostile._sample_values(world.app, world.path)["code"]


def _api(world, url, body, method="POST", **kw):
    headers = {"Authorization": f"Bearer {world.token}", **kw.pop("headers", {})}
    kw.setdefault("content_type", "application/json")
    return world.client.open(url, method=method, data=body, headers=headers, **kw)


def _errors(resp):
    body = resp.get_json()
    assert body and body["errors"], resp.get_data(as_text=True)[:300]
    assert all(e["field"] and e["message"] for e in body["errors"])
    return {e["field"]: e["message"] for e in body["errors"]}


# ---- 1. dates at the ends of the calendar


@pytest.mark.parametrize("day", ["0001-01-01", "9999-12-31", "1899-12-31", "2024-02-30", "٢٠٢٤-٠١-٠١", "20240101"])
@pytest.mark.parametrize("url", ["/?on=", "/batches/?on=", "/api/v1/batches?on=", "/audit?from=", "/audit?to="])
def test_dates_at_the_ends_of_the_calendar_are_refused_in_query_strings(world, url, day):
    resp = world.client.get(url + day, headers={"Accept": "application/json"})
    assert resp.status_code == 422, (url, day, resp.status_code)
    assert list(_errors(resp)) in (["on"], ["from"], ["to"])


def test_date_bounds_name_the_rule():
    # 1970-01-01: the register's earliest date (a year 0001 or 1899 would make a YYMM batch code).
    assert parsing.date_problem("1969-12-31")[1] == "cannot be earlier than 1970-01-01"
    assert parsing.date_problem("2100-01-01")[1] == "cannot be later than 2099-12-31"
    assert "use the digits 0-9" in parsing.date_problem("٢٠٢٤-٠١-٠١")[1]
    assert parsing.date_problem("2024-02-29") == (parsing.dt.date(2024, 2, 29), None)  # a leap day


def test_a_batch_cannot_be_registered_in_the_year_1899(world):
    resp = _api(
        world,
        "/api/v1/batches",
        json.dumps({"reagent": "HCl", "nominal_molarity": 0.1, "volume_l": 5, "prepared_on": "1899-12-31", "prepared_by": "x"}),
    )
    assert resp.status_code == 422
    assert "1970-01-01" in _errors(resp)["prepared_on"]


# ---- 2. huge page numbers and ids


@pytest.mark.parametrize(
    "url",
    [
        "/batches/?page=" + "9" * 30,
        "/audit?page=99999999999999999999",
        "/api/v1/batches?offset=" + "9" * 25,
        "/api/v1/batches?limit=-5",
        "/batches/?page=١٢",
    ],
)
def test_huge_or_foreign_page_numbers_are_refused(world, url):
    resp = world.client.get(url, headers={"Accept": "application/json"})
    assert resp.status_code == 422, (url, resp.status_code)


def test_ids_past_64_bits_are_not_found(world):
    assert world.client.get("/runs/" + "9" * 30).status_code == 404
    assert _api(world, "/api/v1/runs/" + "9" * 25 + "/decision", "{}").status_code == 404


# ---- 3. very long search strings; LIKE wildcards are literal


def test_a_very_long_search_is_refused(world):
    resp = world.client.get("/batches/?q=" + "x" * 10_000)
    assert resp.status_code == 422
    resp = world.client.get("/batches/?q=" + "x" * 150, headers={"Accept": "application/json"})
    assert resp.status_code == 422 and "100 characters" in _errors(resp)["q"]


def test_batch_search_takes_percent_and_underscore_literally(world, code):
    everything = world.client.get("/batches/?q=%25").get_data(as_text=True)
    assert code not in everything  # no demo batch has a % in its code, name or notes
    assert code not in world.client.get("/batches/?q=_").get_data(as_text=True)
    assert code in world.client.get("/batches/?q=" + code[:4]).get_data(as_text=True)


# ---- 4. malformed Host headers


@pytest.mark.parametrize("host", ["exa mple", "a@b", "[::1", "localhost:99999", "localhost:abc", "ex\u00e4mple", "a" * 300])
def test_a_malformed_host_gets_400_even_on_healthz(world, host):
    resp = world.client.get("/healthz", headers={"Host": host})
    assert resp.status_code == 400
    resp = world.client.get("/api/v1/batches", headers={"Host": host})
    assert (
        resp.status_code == 400
        and _errors(resp) == {"Host": "the Host header is not a valid host name"}
        or ("port" in _errors(resp)["Host"])
    )


def test_trusted_hosts_are_matched_case_insensitively(tmp_path):
    app = create_app(
        {
            "DATABASE": str(tmp_path / "h.db"),
            "TESTING": True,
            "SECRET_KEY": "t",
            "TRUSTED_HOSTS": "Lab.Example.org, .Prep.Example.org",
        }
    )
    c = app.test_client()
    assert c.get("/healthz", headers={"Host": "LAB.example.ORG"}).status_code == 200
    assert c.get("/healthz", headers={"Host": "bench.prep.example.org:8000"}).status_code == 200
    assert c.get("/healthz", headers={"Host": "evil.example.org"}).status_code == 400
    assert c.get("/healthz", headers={"Host": "[::1]:8000"}).status_code == 400  # valid, but not trusted


# ---- 5. deeply nested JSON and the JSON content type, on every JSON endpoint


def _json_posts(world, code):
    return [
        "/api/v1/batches",
        f"/api/v1/batches/{code}/runs",
        "/api/v1/runs/1/decision",
        "/api/v1/preparation/plan",
        "/api/v1/standardizations/preview",
    ]


def test_deeply_nested_json_is_refused_everywhere(world, code):
    for url in _json_posts(world, code):
        for depth in (25, 100_000):
            resp = _api(world, url, json.dumps({"notes": "x"})[:-1] + ', "x": ' + hostile.nested(depth) + "}")
            assert resp.status_code in (400, 422), (url, depth, resp.status_code)
            assert _errors(resp)


def test_json_endpoints_want_a_json_content_type(world, code):
    for url in _json_posts(world, code):
        resp = _api(world, url, "{}", content_type="text/plain")
        assert resp.status_code == 415, url
        assert "Content-Type: application/json" in _errors(resp)["_body"]


# ---- 6. strict types in the run API


@pytest.mark.parametrize("value", [["a"], {"a": 1}, None, 5, 0.1, True])
@pytest.mark.parametrize("key", ["analyst", "performed_on", "endpoint", "notes", "purpose"])
def test_a_run_refuses_non_text_where_text_is_expected(world, code, key, value):
    body = {
        "purpose": "certify",
        "performed_on": "2024-01-01",
        "analyst": "A",
        "burette_capacity_ml": 50,
        "standard_lot_id": 1,
        "replicates": [{"mass_g": 0.2, "initial_ml": 0, "final_ml": 20}],
        key: value,
    }
    resp = _api(world, f"/api/v1/batches/{code}/runs", json.dumps(body))
    assert resp.status_code == 422
    errors = resp.get_json()["errors"]
    assert [e["message"] for e in errors if e["field"] == key] == [f"must be text, not {parsing.kind_of(value)}"]


def test_an_exclusion_reason_must_be_text():
    p = parsing.Parser()
    run_input.read_replicates(
        p, [{"mass_g": 0.2, "initial_ml": 0, "final_ml": 20, "exclude_reason": [1]}], "primary", capacity_ml=50
    )
    assert [(e.field, e.message) for e in p.errors] == [("replicates[0].exclude_reason", "must be text, not a list")]


# ---- 7. digits other than 0-9


@pytest.mark.parametrize("name", ["r²_final_ml", "r١_final_ml", "r٣_mass_g", "r99999999999999999999_final_ml"])
def test_foreign_digits_in_run_form_field_names_are_not_rows(world, code, name):
    resp = world.client.post(f"/batches/{code}/runs/new", data={name: "20", "action": "record"})
    assert resp.status_code == 422
    assert run_input.request_path(name) == name


def test_foreign_digits_in_numbers_are_refused_with_the_rule():
    p = parsing.Parser()
    assert p.number("٢٠.٥", "final_ml") is None and p.integer("１２", "page") is None
    assert [e.message for e in p.errors] == [
        "must be a plain decimal number: use the digits 0-9",
        "must be a whole number: use the digits 0-9",
    ]


# ---- 8. NUL and control characters in one-line fields


@pytest.mark.parametrize("text", ["\x00reason", "a\x1bb", "two\nlines"])
def test_control_characters_and_line_breaks_are_refused_in_one_line_fields(text):
    p = parsing.Parser()
    assert p.text(text, "reason") is None
    assert p.errors[0].field == "reason"
    assert p.text("first\nsecond", "notes") == "first\nsecond"  # notes may span lines
    assert p.text("a\x00", "notes") is None


def test_a_nul_in_a_reason_or_a_label_is_refused(world, code):
    resp = world.client.post(f"/batches/{code}/amend", data={"field": "container", "new_value": "Jar", "reason": "\x00x"})
    assert resp.status_code == 422
    before = hostile.record_counts(world.path)
    resp = world.client.post(f"/batches/{code}/labels", data={"count": "2", "label_text": "\x00", "layout": "\x00a"})
    assert 400 <= resp.status_code < 500
    resp = _api(world, "/api/v1/runs/1/decision", json.dumps({"decision": "reject", "reason": "\x00no"}))
    assert resp.status_code == 422 and "control characters" in _errors(resp)["reason"]
    assert hostile.record_counts(world.path) == before


# ---- 9. an oversized CSV cell


def test_an_oversized_csv_cell_is_refused(world, code):
    before = hostile.record_counts(world.path)
    sheet = "mass_g,initial_ml,final_ml,exclude_reason\n0.2,0,20," + "x" * 100_000 + "\n"
    resp = world.client.post(
        f"/batches/{code}/runs/import", data={"sheet": (io.BytesIO(sheet.encode()), "s.csv")}, content_type="multipart/form-data"
    )
    assert 400 <= resp.status_code < 500
    sheet = "mass_g,initial_ml,final_ml\n" + "9" * 300_000 + ",0,20\n"  # under 500 KB: werkzeug keeps it in memory
    resp = world.client.post(
        f"/batches/{code}/runs/import", data={"sheet": (io.BytesIO(sheet.encode()), "s.csv")}, content_type="multipart/form-data"
    )
    assert 400 <= resp.status_code < 500
    assert hostile.record_counts(world.path) == before


# ---- 10. anonymous previews are capped


def test_anonymous_previews_are_capped_in_draws_and_body(world):
    anon = world.app.test_client()
    url = "/api/v1/standardizations/preview"
    resp = anon.post(url, json={"titrant": "HCl", "monte_carlo_draws": 1_000_000})
    assert resp.status_code == 422 and "100000" in _errors(resp)["monte_carlo_draws"]
    resp = anon.post(url, data=json.dumps({"titrant": "HCl", "notes": "x" * 70_000}), content_type="application/json")
    assert resp.status_code == 413


# ---- the whole app: never 5xx, nothing stored


def _refused_stores_nothing(world, method, url, kwargs):
    before = hostile.record_counts(world.path)
    resp = world.client.open(url, **kwargs)
    status = resp.status_code
    resp.close()
    assert status < 500, (method, url, kwargs)
    if status >= 400:
        assert hostile.record_counts(world.path) == before, (method, url, kwargs)
    return status


CASES_PER_ROUTE = settings(max_examples=500, deadline=None, suppress_health_check=list(HealthCheck), database=None)


def _fuzz_one_write_route(world, method, url, cases):
    @settings(CASES_PER_ROUTE, max_examples=cases)
    @given(seed=st.integers(0, 2**32 - 1))
    def case(seed):
        rng = random.Random(seed)
        _refused_stores_nothing(world, method, url, hostile.random_request(rng, world, method, url))

    case()


@pytest.mark.slow
def test_every_write_route_never_answers_5xx_and_stores_nothing_when_refused(world):
    """Hypothesis over every write route (form and JSON): >= 10,000 cases in all."""
    writes = hostile.write_routes(world.app, world.path)
    assert len(writes) >= 20
    per_route = -(-10_000 // len(writes))
    total = 0
    started = time.perf_counter()
    for _rule, method, url in writes:
        _fuzz_one_write_route(world, method, url, per_route)
        total += per_route
    print(f"\nwrite routes: {len(writes)}, cases: {total}, {time.perf_counter() - started:.1f} s")
    assert total >= 10_000


@pytest.mark.slow
def test_a_bounded_fuzzer_over_every_route_finds_no_5xx(world):
    """10^4 requests, GET and POST, hostile query strings, headers and bodies, across the whole URL map."""
    every = hostile.routes(world.app, world.path)
    rng = random.Random(20240611)
    counts: dict[int, int] = {}
    started = time.perf_counter()
    for _ in range(10_000):
        rule, method, url = rng.choice(every)
        kwargs = hostile.random_request(rng, world, method, url)
        resp = world.client.open(url, **kwargs)
        counts[resp.status_code // 100] = counts.get(resp.status_code // 100, 0) + 1
        resp.close()
        assert resp.status_code < 500, (method, url, kwargs)
    print(f"\nroutes: {len(every)}, requests: 10000, by class: {counts}, {time.perf_counter() - started:.1f} s")
    assert sum(counts.values()) == 10_000
    assert world.client.get("/account/tokens").status_code == 200  # still signed in: the requests reached the views
