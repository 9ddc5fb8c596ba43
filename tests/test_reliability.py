"""Reliability on loopback: concurrent writers through HTTP, and the server killed mid-write.

Bounded in time and in request count; only 127.0.0.1 is ever contacted.
"""

from __future__ import annotations

import datetime as dt
import http.client
import http.cookiejar
import os
import re
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.parse
import urllib.request

import pytest

from stockroom import accounts, records, schema
from stockroom import db as dbmod

pytestmark = pytest.mark.slow
PASSWORD = "reliability-Test-7c1e"
TODAY = dt.date.today()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _prepare(path, writers: int):
    conn = dbmod.connect(path)
    schema.migrate(conn)
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    for i in range(writers):
        accounts.create_user(conn, f"writer{i}", f"Writer {i}", "staff", PASSWORD, "test")
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
        "test",
    )
    codes = []
    for _ in range(4):
        b = records.create_batch(
            conn,
            {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": TODAY.isoformat(), "prepared_by": "t"},
            "test",
        )
        codes.append(b["code"])
    conn.close()
    return lot["id"], codes


class Server:
    def __init__(self, path):
        self.port = _free_port()
        env = dict(os.environ, STOCKROOM_SECRET_KEY="reliability", STOCKROOM_LAB_TIMEZONE="UTC")
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "stockroom.cli", "serve", "--db", str(path), "--port", str(self.port)],
            env=env,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        self.base = f"http://127.0.0.1:{self.port}"
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline:
            try:
                with urllib.request.urlopen(self.base + "/healthz", timeout=1):
                    return
            except OSError:
                time.sleep(0.05)
        raise RuntimeError("server did not start")

    def kill(self):
        self.proc.send_signal(signal.SIGKILL)
        self.proc.wait(timeout=10)

    def stop(self):
        self.proc.terminate()
        self.proc.wait(timeout=10)


class Session:
    """A signed-in browser-like client: cookies, CSRF token, no redirects followed."""

    def __init__(self, base, username):
        self.base = base
        jar = http.cookiejar.CookieJar()

        class NoRedirect(urllib.request.HTTPRedirectHandler):
            def redirect_request(self, *a, **k):
                return None

        self.opener = urllib.request.build_opener(urllib.request.HTTPCookieProcessor(jar), NoRedirect)
        status, _, _ = self.post("/sign-in", {"username": username, "password": PASSWORD}, path_for_token="/sign-in")
        assert status == 303

    def get(self, path):
        with self.opener.open(self.base + path, timeout=30) as r:
            return r.status, r.read().decode()

    def token(self, path):
        _, page = self.get(path)
        return re.search(r'name="csrf_token" value="([^"]+)"', page).group(1)

    def post(self, path, data, path_for_token="/"):
        data = dict(data, csrf_token=self.token(path_for_token))
        req = urllib.request.Request(self.base + path, data=urllib.parse.urlencode(data).encode(), method="POST")
        try:
            with self.opener.open(req, timeout=30) as r:
                return r.status, r.headers, r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.headers, e.read().decode()


def run_form(lot_id, k):
    form = {
        "purpose": "certify",
        "standard_lot_id": str(lot_id),
        "performed_on": TODAY.isoformat(),
        "analyst": "writer",
        "burette_capacity_ml": "50.0",
        "action": "record",
    }
    for i in range(1, 4):
        form.update(
            {
                f"r{i}_mass_g": f"{0.80 + 0.01 * i + 0.0001 * (k % 50):.4f}",
                f"r{i}_initial_ml": "0.10",
                f"r{i}_final_ml": f"{39.3 + 0.49 * i + 0.0049 * (k % 50):.2f}",
            }
        )
    return form


def _stored_runs(path):
    conn = sqlite3.connect(path)
    try:
        return {
            row[0]: row[1]
            for row in conn.execute("SELECT r.id, count(p.id) FROM runs r JOIN replicates p ON p.run_id = r.id GROUP BY r.id")
        }
    finally:
        conn.close()


def test_eight_concurrent_writers_lose_nothing(tmp_path):
    path = tmp_path / "busy.db"
    lot_id, codes = _prepare(path, 8)
    server = Server(path)
    acknowledged: list[int] = []
    failures: list[str] = []
    lock = threading.Lock()
    stop_at = time.monotonic() + 20

    def writer(i):
        s = Session(server.base, f"writer{i}")
        k = 0
        while time.monotonic() < stop_at and k < 400:
            status, headers, body = s.post(
                f"/batches/{codes[k % len(codes)]}/runs/new", run_form(lot_id, k), path_for_token=f"/batches/{codes[0]}"
            )
            k += 1
            if status == 303:
                with lock:
                    acknowledged.append(int(headers["Location"].rsplit("/", 1)[1]))
            else:
                with lock:
                    failures.append(f"{status}: {body[:200]}")

    try:
        threads = [threading.Thread(target=writer, args=(i,)) for i in range(8)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
    finally:
        server.stop()
    assert not failures, failures[:3]
    assert not any("locked" in f for f in failures)
    stored = _stored_runs(path)
    assert len(acknowledged) > 50
    assert set(acknowledged) <= set(stored)
    assert all(stored[r] == 3 for r in acknowledged)
    conn = dbmod.connect(path)
    assert records.verify_chain(conn) is None
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_killed_mid_write_twenty_times_keeps_every_acknowledged_write(tmp_path):
    path = tmp_path / "killed.db"
    lot_id, codes = _prepare(path, 2)
    acknowledged: list[int] = []
    for round_no in range(20):
        server = Server(path)
        s = Session(server.base, f"writer{round_no % 2}")
        done = threading.Event()

        def hammer(session=s, start=round_no * 1000, done=done):
            k = start
            while not done.is_set():
                try:
                    status, headers, _ = session.post(
                        f"/batches/{codes[k % 4]}/runs/new", run_form(lot_id, k), path_for_token=f"/batches/{codes[0]}"
                    )
                except (OSError, http.client.HTTPException):
                    return
                if status == 303:
                    acknowledged.append(int(headers["Location"].rsplit("/", 1)[1]))
                k += 1

        t = threading.Thread(target=hammer)
        t.start()
        time.sleep(0.3 + 0.05 * (round_no % 5))
        server.kill()
        done.set()
        t.join(timeout=30)
        conn = sqlite3.connect(path)
        try:
            assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok", f"round {round_no}"
        finally:
            conn.close()
    stored = _stored_runs(path)
    assert len(acknowledged) >= 20
    missing = [r for r in acknowledged if stored.get(r) != 3]
    assert not missing, f"acknowledged runs lost or partial: {missing[:5]}"
    conn = dbmod.connect(path)
    assert records.verify_chain(conn) is None
