"""Pages and the read-only JSON API over the demo scenario."""

from __future__ import annotations

import datetime as dt
import re

import pytest

from stockroom import create_app
from stockroom.demo import build_demo

TODAY = dt.date(2026, 12, 1)


@pytest.fixture(scope="module")
def demo_client(tmp_path_factory):
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    build_demo(str(path), today=TODAY)
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "t", "TESTING": True})
    return app.test_client()


def on(day: dt.date = TODAY) -> str:
    return f"on={day.isoformat()}"


def batches(client, **query):
    q = "&".join(f"{k}={v}" for k, v in query.items())
    return client.get(f"/api/v1/batches?{on()}&{q}").get_json()["batches"]


def test_healthz_is_plain_text(demo_client):
    r = demo_client.get("/healthz")
    assert r.status_code == 200 and r.mimetype == "text/plain" and r.data == b"ok\n"


def test_api_lists_every_batch_with_required_fields(demo_client):
    listed = batches(demo_client)
    assert len(listed) == 9  # the scenario's 8 batches and the potentiometric run's (demo.add_potentiometric_run)
    for b in listed:
        assert {"id", "titrant", "nominal_molarity", "status"} <= set(b)
    statuses = sorted(b["status"] for b in listed)
    assert statuses == sorted(
        ["awaiting", "awaiting", "recheck_due", "drifting", "in_service", "in_service", "in_service", "expired", "withdrawn"]
    )


def test_api_batch_detail_has_releases_rechecks_and_expiry(demo_client):
    expired = batches(demo_client, status="expired")[0]
    body = demo_client.get(f"/api/v1/batches/{expired['id']}?{on()}").get_json()
    assert [r["superseded"] for r in body["releases"]] == [True, False]
    for r in body["releases"]:
        assert {"molarity", "U", "k", "released_on", "superseded"} <= set(r)
        # k = t_0.975(ν_eff) under the default COVERAGE_K_POLICY: between z = 1.96 (ν → ∞) and t(2) = 4.30
        # (scipy.stats.t.ppf(0.975, 2)), the fewest degrees of freedom a three-replicate run can have.
        assert 1.959 < r["k"] < 4.31 and 0.099 < r["molarity"] < 0.1005 and 0 < r["U"] < 0.0005
        dt.date.fromisoformat(r["released_on"])
    assert len(body["rechecks"]) == 1
    # NaOH shelf life 90 days from preparation (starting policy): prepared day -172 -> expired day -82.
    assert body["expires_on"] == (TODAY - dt.timedelta(days=82)).isoformat()


def test_status_is_a_function_of_the_date_asked(demo_client):
    drifting = batches(demo_client, status="drifting")[0]
    # After its first re-check (day -45, -0.1 %), with too few points for a trend, it was in service.
    earlier = (TODAY - dt.timedelta(days=40)).isoformat()
    body = demo_client.get(f"/api/v1/batches/{drifting['id']}?on={earlier}").get_json()
    assert body["status"] == "in_service"
    # Before it was prepared... it did not exist, but was awaiting on the day it was made.
    made = demo_client.get(f"/api/v1/batches/{drifting['id']}?on={body['prepared_on']}").get_json()
    assert made["status"] == "awaiting"


def test_secondary_standardization_carries_reference_uncertainty(demo_client):
    naoh_1m = next(b for b in batches(demo_client, titrant="NaOH") if b["nominal_molarity"] == 1.0)
    hcl_1m = next(b for b in batches(demo_client, titrant="HCl") if b["nominal_molarity"] == 1.0)
    # The new batch's relative U cannot be smaller than its reference's.
    assert naoh_1m["U"] / naoh_1m["molarity"] > hcl_1m["U"] / hcl_1m["molarity"]


def test_dashboard_groups_and_values(demo_client):
    html = demo_client.get(f"/?{on()}").get_data(as_text=True)
    assert "Needs attention" in html and "In service" in html and "Out of use" in html
    assert html.count('class="chip chip-drifting"') == 1
    assert re.search(r"mol/L \(k = [1-4](\.\d{1,2})?\)", html)  # k as the coverage policy gives it


def test_batch_list_filters(demo_client):
    html = demo_client.get(f"/batches/?{on()}&reagent=NaOH").get_data(as_text=True)
    assert html.count('class="batch-code"') == 4  # three in the scenario, one standardized potentiometrically
    html = demo_client.get(f"/batches/?{on()}&q=Lindqvist").get_data(as_text=True)
    assert html.count('class="batch-code"') == 3


def test_batch_page_shows_excluded_replicate_with_reason(demo_client):
    withdrawn = batches(demo_client, status="withdrawn")[0]
    html = demo_client.get(f"/batches/{withdrawn['id']}?{on()}").get_data(as_text=True)
    assert 'class="excluded"' in html
    assert "excluded: end point overshot" in html
    assert "Withdrawn from" in html


@pytest.mark.parametrize(
    "url,field",
    [
        ("/api/v1/batches?on=2026-02-30", "on"),
        ("/api/v1/batches/HCL-2606-01?on=yesterday", "on"),
    ],
)
def test_bad_date_is_422_naming_field(demo_client, url, field):
    r = demo_client.get(url)
    assert r.status_code == 422
    assert r.get_json()["errors"][0]["field"] == field


def test_unknown_batch_is_404(demo_client):
    assert demo_client.get("/api/v1/batches/NOPE-0000-00").status_code == 404
    assert demo_client.get("/batches/NOPE-0000-00").status_code == 404


def test_security_headers(demo_client):
    r = demo_client.get("/")
    assert "script-src 'self'" in r.headers["Content-Security-Policy"]
    assert r.headers["X-Content-Type-Options"] == "nosniff"


def test_assets_served_by_the_app(demo_client):
    html = demo_client.get("/").get_data(as_text=True)
    assert "http://" not in html.split("<body>")[0] and "https://" not in html.split("<body>")[0]
    with demo_client.get("/static/stockroom.css") as css:
        assert css.status_code == 200 and b".chip" in css.data


def test_create_app_without_config_uses_settings(tmp_path, monkeypatch):
    monkeypatch.setenv("STOCKROOM_DATABASE", str(tmp_path / "env.db"))
    app = create_app()
    assert app.config["DATABASE"] == str(tmp_path / "env.db")
    assert (tmp_path / "env.db").exists()
    # No fixed secret: one was generated beside the database and is reused.
    assert len(app.config["SECRET_KEY"]) == 64
    assert create_app().config["SECRET_KEY"] == app.config["SECRET_KEY"]


def test_an_id_beyond_sqlite_range_is_not_found(demo_client):
    assert demo_client.get("/runs/99999999999999999999").status_code == 404


def test_hardening_settings(tmp_path):
    app = create_app(
        {
            "DATABASE": str(tmp_path / "h.db"),
            "SECRET_KEY": "t",
            "TRUSTED_HOSTS": "lab.example, localhost",
            "SESSION_COOKIE_SECURE": True,
        }
    )
    client = app.test_client()
    assert client.get("/healthz", headers={"Host": "evil.example"}).status_code == 400
    assert client.get("/healthz", headers={"Host": "localhost"}).status_code == 200
    resp = client.get("/sign-in", headers={"Host": "localhost"})
    cookie = resp.headers.get("Set-Cookie", "")
    assert "HttpOnly" in cookie and "Secure" in cookie and "SameSite=Lax" in cookie
    assert resp.headers["X-Frame-Options"] == "DENY"
    assert "frame-ancestors 'none'" in resp.headers["Content-Security-Policy"]
    # Bodies past MAX_CONTENT_LENGTH are refused before any view reads them.
    big = client.post(
        "/api/v1/standardizations/preview",
        data=b"x" * (app.config["MAX_CONTENT_LENGTH"] + 1),
        headers={"Host": "localhost"},
        content_type="application/json",
    )
    assert big.status_code == 413
