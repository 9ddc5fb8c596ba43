"""JSON writes with per-user API tokens: the same rules and roles as the forms, revocation at once."""

from __future__ import annotations

import datetime as dt
import json

import pytest

from stockroom import db as dbmod
from stockroom import records, tokens

TODAY = dt.date.today()
ROWS = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


@pytest.fixture
def token_for(conn, make_user):
    def _make(role):
        user = make_user(f"api-{role}", role)
        return tokens.create(conn, user.id, user.username, f"{role} script")[1]

    return _make


def call(client, method, url, token=None, body=None):
    headers = {"Authorization": f"Bearer {token}"} if token else {}
    return client.open(url, method=method, headers=headers, data=json.dumps(body or {}), content_type="application/json")


def batch_body(**extra):
    body = {
        "reagent": "NaOH",
        "nominal_molarity": 0.1,
        "volume_l": 20,
        "prepared_on": TODAY.isoformat(),
        "prepared_by": "API Person",
        "water_grade": "boiled, CO2-free",
    }
    body.update(extra)
    return body


def test_token_writes_and_role_checks(client, conn, token_for):
    staff = token_for("staff")
    resp = call(client, "POST", "/api/v1/batches", staff, batch_body())
    assert resp.status_code == 201, resp.get_json()
    code = resp.get_json()["id"]
    assert records.batch_by_code(conn, code)["recorded_by"] == "api-staff"
    assert call(client, "POST", "/api/v1/batches", None, batch_body()).status_code == 401
    assert call(client, "POST", "/api/v1/batches", "srt_not-a-token", batch_body()).status_code == 401
    assert call(client, "POST", "/api/v1/batches", token_for("instructor"), batch_body()).status_code == 403
    # The secret itself is never stored, only its SHA-256.
    assert conn.execute("SELECT count(*) FROM api_tokens WHERE token_sha256 = ?", [staff]).fetchone()[0] == 0


def test_cookie_session_cannot_write_json(client, signed_in_client):
    staff = signed_in_client("staff")
    resp = staff.post("/api/v1/batches", data=json.dumps(batch_body()), content_type="application/json")
    assert resp.status_code == 401 and "API token" in resp.get_json()["errors"][0]["message"]


def test_revocation_takes_effect_at_once(client, conn, token_for):
    staff = token_for("staff")
    assert call(client, "POST", "/api/v1/batches", staff, batch_body()).status_code == 201
    uid = conn.execute("SELECT id FROM users WHERE username = 'api-staff'").fetchone()[0]
    tokens.revoke(conn, tokens.list_for(conn, uid)[0].id, uid, "api-staff")
    assert call(client, "POST", "/api/v1/batches", staff, batch_body()).status_code == 401


def test_bad_batch_json_is_422_naming_the_field(client, conn, token_for):
    staff = token_for("staff")
    before = conn.execute("SELECT count(*) FROM batches").fetchone()[0]
    resp = call(client, "POST", "/api/v1/batches", staff, batch_body(volume_l="20,5"))
    assert resp.status_code == 422
    assert resp.get_json()["errors"][0]["field"] == "volume_l"
    assert conn.execute("SELECT count(*) FROM batches").fetchone()[0] == before


def test_record_and_release_a_run_through_the_api(client, conn, token_for):
    staff = token_for("staff")
    code = call(client, "POST", "/api/v1/batches", staff, batch_body()).get_json()["id"]
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )
    run = {
        "purpose": "certify",
        "standard_lot_id": lot["id"],
        "performed_on": TODAY.isoformat(),
        "analyst": "API Person",
        "burette_capacity_ml": 50,
        "replicates": [
            {"gross_g": float(g), "tare_g": float(t), "initial_ml": float(i), "final_ml": float(f)} for g, t, i, f in ROWS
        ],
    }
    bad = json.loads(json.dumps(run))
    bad["replicates"][1]["final_ml"] = 0.2
    resp = call(client, "POST", f"/api/v1/batches/{code}/runs", staff, bad)
    assert resp.status_code == 422
    assert resp.get_json()["errors"][0]["field"] == "replicates[1].final_ml"
    resp = call(client, "POST", f"/api/v1/batches/{code}/runs", staff, run)
    assert resp.status_code == 201, resp.get_json()
    body = resp.get_json()
    assert body["result"]["n"] == 4 and body["result"]["accepted"] is True
    resp = call(client, "POST", f"/api/v1/runs/{body['run_id']}/decision", staff, {"decision": "accept"})
    assert resp.status_code == 200 and resp.get_json()["release_id"]
    batch = client.get(f"/api/v1/batches/{code}").get_json()
    assert batch["status"] == "in_service"
    assert batch["molarity"] == pytest.approx(body["result"]["molarity"])


def test_token_page_shows_the_secret_once(signed_in_client, form_token, app):
    staff = signed_in_client("staff")
    resp = staff.post("/account/tokens", data={"label": "bench tablet", "csrf_token": form_token(staff, "/")})
    html = resp.get_data(as_text=True)
    assert resp.status_code == 200 and "shown only this once" in html
    secret = html.split('<pre class="token-secret">')[1].split("</pre>")[0]
    assert secret.startswith("srt_")
    listing = staff.get("/account/tokens").get_data(as_text=True)
    assert secret not in listing and secret[:10] in listing
    assert staff.post("/account/tokens", data={"label": "", "csrf_token": form_token(staff, "/")}).status_code == 422
