"""Two dispensings at once from the last litres of a batch, as real concurrent HTTP requests on loopback.

The app is served by waitress in a subprocess (tests/test_reliability.Server); two signed-in staff
sessions (or one session and an API token) post at the same instant (threading.Barrier, as in
tests/test_races.py). A 5 L batch cannot give two 3 L bottles: exactly one dispensing is recorded, the
other is refused with 422 naming what remains, and the batch never goes below zero.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import threading
import urllib.error
import urllib.request

import pytest
from stock_world import released_batch
from test_races import FastSession
from test_reliability import PASSWORD, Server

from stockroom import accounts, create_app, schema, tokens
from stockroom import db as dbmod
from stockroom.records import containers

pytestmark = pytest.mark.slow
TODAY = dt.datetime.now(dt.UTC).date()
ITERATIONS = int(os.environ.get("RACES_ITERATIONS", "30"))


class ApiClient:
    """Posts JSON with a bearer token (the API's writes take tokens, never the session cookie)."""

    def __init__(self, base: str, token: str):
        self.base, self.token = base, token

    def send(self, path, data):
        req = urllib.request.Request(
            self.base + path,
            data=json.dumps(data).encode(),
            method="POST",
            headers={"Content-Type": "application/json", "Authorization": f"Bearer {self.token}"},
        )
        try:
            with urllib.request.urlopen(req, timeout=30) as r:
                return r.status, r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.read().decode()


def _together(*posts):
    barrier = threading.Barrier(len(posts))
    out: list = [None] * len(posts)

    def go(i, post):
        client, path, data = post
        barrier.wait()
        out[i] = client.send(path, data)

    threads = [threading.Thread(target=go, args=(i, p)) for i, p in enumerate(posts)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    return out


@pytest.fixture
def served(tmp_path):
    path = tmp_path / "dispense-races.db"
    conn = dbmod.connect(path)
    schema.migrate(conn)
    method, accounts.HASH_METHOD = accounts.HASH_METHOD, "pbkdf2:sha256:1000"  # cheap hashes, restored after
    users = {name: accounts.create_user(conn, name, name.title(), "staff", PASSWORD, "test") for name in ("ana", "ben")}
    token = tokens.create(conn, users["ben"].id, "ben", "races")[1]
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "races", "LAB_TIMEZONE": "UTC"})
    server = Server(path)
    try:
        yield {"base": server.base, "conn": conn, "app": app, "token": token}
    finally:
        server.stop()
        conn.close()
        accounts.HASH_METHOD = method


def test_two_dispensings_at_once_cannot_take_the_batch_below_zero(served):
    conn = served["conn"]
    ana, ben = FastSession(served["base"], "ana"), FastSession(served["base"], "ben")
    api = ApiClient(served["base"], served["token"])
    for i in range(ITERATIONS):
        batch, _ = released_batch(conn, served["app"].config, prepared_on=TODAY - dt.timedelta(days=3), volume_l=5.0)
        form = {
            "volume_l": "3",
            "dispensed_on": TODAY.isoformat(),
            "container": "bench bottle",
            "course": "CHM 110",
            "section": "A",
        }
        other = (ben, f"/batches/{batch['code']}/dispense", dict(form, section="B"))
        if i % 2:  # a form and a program at once
            body = {"volume_l": 3, "dispensed_on": TODAY.isoformat(), "container": "bench bottle", "destination": "CHM 110"}
            other = (api, f"/api/v1/batches/{batch['code']}/dispensings", body)
        (sa, body_a), (sb, body_b) = _together((ana, f"/batches/{batch['code']}/dispense", form), other)
        won = {303, 201}
        assert sorted([sa in won, sb in won]) == [False, True], f"iteration {i}: {sa} {sb}"
        assert 422 in (sa, sb), f"iteration {i}: {sa} {sb}"
        refused = body_a if sa == 422 else body_b
        assert "3 L is more than remains in the batch (2.000 L left)" in refused.replace("&#39;", "'")
        rows = conn.execute("SELECT volume_l FROM containers WHERE batch_id = ?", [batch["id"]]).fetchall()
        assert [r[0] for r in rows] == [3.0], f"iteration {i}"
        assert containers.volume_remaining_l(conn, batch["id"]) == pytest.approx(2.0)
