"""HEAD answers like GET on every route and never writes (it skips the CSRF check, so it must not write)."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from werkzeug.routing import IntegerConverter

from stockroom import accounts, create_app
from stockroom import db as dbmod
from stockroom.demo import build_demo

TODAY = dt.date(2026, 12, 1)
PASSWORD = "copper lantern by the sink"  # invented, for this test database only

# A plausible body for any of the app's forms: if a view ran its POST branch on HEAD, this would write.
FORM = {
    "decision": "accept",
    "reason": "written by a HEAD request",
    "position": "1",
    "withdrawn_on": TODAY.isoformat(),
    "released_on": TODAY.isoformat(),
    "suspect_from": TODAY.isoformat(),
    "subject": "lot:1",
    "label": "head token",
    "username": "head-user",
    "display_name": "Head User",
    "role": "staff",
    "password": "a long enough invented password",
    "new_password": "another long invented password",
    "current_password": PASSWORD,
    "reagent": "NaOH",
    "nominal_molarity": "0.1",
    "volume_l": "5",
    "prepared_on": TODAY.isoformat(),
    "prepared_by": "Head User",
    "substance": "KHP",
    "assay": "1.0",
    "assay_expanded_u": "0.0002",
    "assay_k": "2",
    "expires_on": "2027-06-01",
    "effective_from": TODAY.isoformat(),
    "action": "record",
}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("head") / "demo.db"
    saved = accounts.HASH_METHOD
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    try:
        build_demo(str(path), today=TODAY, password=PASSWORD)
    finally:
        accounts.HASH_METHOD = saved
    # CSRF off: a POST branch reached by HEAD would then write for sure, which is what this test looks for.
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "t", "TESTING": True, "WTF_CSRF_ENABLED": False})
    return app, str(path)


def counts(path):
    conn = dbmod.connect(path)
    try:
        names = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'")]
        got = {n: conn.execute(f'SELECT count(*) FROM "{n}"').fetchone()[0] for n in names}
        # A refusal (admin lacks the instructor's class-data permission) is logged, not written by the view.
        got["events"] = conn.execute("SELECT count(*) FROM events WHERE action != 'access.refused'").fetchone()[0]
        return got
    finally:
        conn.close()


def test_head_on_every_route_writes_nothing_and_never_fails(demo):
    app, path = demo
    conn = dbmod.connect(path)
    code = conn.execute("SELECT code FROM batches ORDER BY id LIMIT 1").fetchone()[0]
    conn.close()
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "demo-admin", "password": PASSWORD}).status_code == 303
    before = counts(path)
    seen = []
    for rule in app.url_map.iter_rules():
        if "HEAD" not in (rule.methods or ()) or rule.endpoint == "static":
            continue
        values = {}
        for arg in rule.arguments:
            whole = isinstance(rule._converters[arg], IntegerConverter)
            values[arg] = 1 if whole else code if arg == "code" else "x"
        url = rule.build(values, append_unknown=False)[1]
        resp = client.open(url, method="HEAD", data=FORM)
        assert resp.status_code < 500, (url, resp.status_code)
        assert resp.data == b"", url
        seen.append(url)
        assert counts(path) == before, f"HEAD {url} wrote"
    assert len(seen) > 40  # every route of the app, not a handful
    # The same client's HEAD answers like its GET (status and type) on the pages with forms.
    for url in ("/recalls/new", f"/batches/{code}/withdraw", "/account/tokens", "/admin/users"):
        get, head = client.get(url), client.head(url, data=FORM)
        assert (head.status_code, head.mimetype) == (get.status_code, get.mimetype), url


def test_a_flood_of_refused_requests_writes_a_handful_of_entries(app, signed_in_client):
    instructor = signed_in_client("instructor")
    conn = dbmod.connect(app.config["DATABASE"])
    before = conn.execute("SELECT count(*) FROM events").fetchone()[0]
    for _ in range(500):
        assert instructor.get("/recalls/new").status_code == 403
    after = conn.execute("SELECT count(*) FROM events").fetchone()[0]
    refused = conn.execute("SELECT detail FROM events WHERE action = 'access.refused' ORDER BY id").fetchall()
    conn.close()
    # One entry per client and minute: 1, or 2 when the loop crosses a minute boundary.
    assert 1 <= after - before <= 2 and len(refused) == after - before
    first = json.loads(refused[0][0])
    assert first["path"] == "/recalls/new" and first["refused_unlogged_before"] == 0
    if len(refused) == 2:  # the second minute's entry counts the refusals the first minute did not log
        assert 0 <= json.loads(refused[1][0])["refused_unlogged_before"] <= 498


def test_pages_for_signed_in_users_are_not_stored(client, signed_in_client):
    assert "no-store" not in client.get("/sign-in").headers.get("Cache-Control", "")
    staff = signed_in_client("staff")
    for url in ("/", "/account/tokens"):
        resp = staff.get(url)
        assert resp.status_code == 200 and resp.headers["Cache-Control"] == "no-store", url
        assert "Cookie" in resp.headers["Vary"]
