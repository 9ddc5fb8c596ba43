"""Walk the application's URL map so that no state-changing route can slip through without a rule."""

from __future__ import annotations

import pytest

from stockroom import accounts, create_app

WRITE_METHODS = {"POST", "PUT", "PATCH", "DELETE"}
# Routes that take anonymous posts on purpose, and why.
PUBLIC_WRITES = {
    "account.sign_in": "signing in is how a person stops being anonymous",
    "account.first_run": "creates the first admin, and only while no user exists",
    "preview.preview": "computes without storing; follows OPEN_READS itself",
    "curves.end_points": "locates end points without storing; follows OPEN_READS itself",
    "account.sign_out": "ending one's own session must work even when it has already expired",
}
# Public computations that store nothing may be added here with their reason.
PUBLIC_COMPUTE_PREFIXES = ("/api/v1/preparation/",)


def _app(tmp_path):
    return create_app({"DATABASE": str(tmp_path / "map.db"), "TESTING": True, "SECRET_KEY": "t", "WTF_CSRF_ENABLED": False})


def _write_rules(app):
    out = []
    for rule in app.url_map.iter_rules():
        methods = (rule.methods or set()) & WRITE_METHODS
        if not methods or rule.endpoint == "static":
            continue
        values = {arg: (1 if "int" in str(rule._converters.get(arg, "")).lower() else "X-0000-00") for arg in rule.arguments}
        out.append((rule, sorted(methods)[0], values))
    return out


def test_every_write_route_has_an_access_rule(tmp_path):
    app = _app(tmp_path)
    missing = []
    for rule, _, _ in _write_rules(app):
        view = app.view_functions[rule.endpoint]
        access = getattr(view, "access_rule", None)
        if access is None:
            missing.append(rule.rule)
        elif access == "public" and rule.endpoint not in PUBLIC_WRITES and not rule.rule.startswith(PUBLIC_COMPUTE_PREFIXES):
            missing.append(f"{rule.rule} (public without a stated reason)")
    assert not missing, f"write routes without an access rule: {missing}"
    assert len(_write_rules(app)) >= 5  # the walk itself found the app's forms


def test_anonymous_writes_are_refused_everywhere(tmp_path):
    app = _app(tmp_path)
    client = app.test_client()
    for rule, method, values in _write_rules(app):
        view = app.view_functions[rule.endpoint]
        if getattr(view, "access_rule", None) == "public":
            continue
        with app.test_request_context():
            from flask import url_for

            url = url_for(rule.endpoint, **values)
        resp = client.open(url, method=method, data={})
        assert resp.status_code in (303, 401), f"{method} {url} answered {resp.status_code} to an anonymous request"
        if resp.status_code == 303:
            assert "/sign-in" in resp.headers["Location"]


def _role_without(permission):
    return next((r for r in accounts.ROLES if not accounts.role_can(r, permission)), None)


def test_wrong_role_writes_are_refused_everywhere(tmp_path, make_user, quick_password_hashing):
    app = _app(tmp_path)
    from stockroom import db as dbmod
    from stockroom import tokens

    conn = dbmod.connect(app.config["DATABASE"])
    passwords, bearer = {}, {}
    for role in accounts.ROLES:
        user = accounts.create_user(conn, f"map-{role}", role.title(), role, "mapping-Test-2b8f1c", "test")
        passwords[role] = "mapping-Test-2b8f1c"
        bearer[role] = tokens.create(conn, user.id, user.username, "map test")[1]
    conn.close()
    clients = {}
    for role in accounts.ROLES:
        c = app.test_client()
        assert c.post("/sign-in", data={"username": f"map-{role}", "password": passwords[role]}).status_code == 303
        clients[role] = c
    checked = 0
    for rule, method, values in _write_rules(app):
        permission = getattr(app.view_functions[rule.endpoint], "access_rule", None)
        if permission in (None, "public", "user"):
            continue
        role = _role_without(permission)
        if role is None:
            continue
        with app.test_request_context():
            from flask import url_for

            url = url_for(rule.endpoint, **values)
        if url.startswith("/api/"):  # JSON writes take API tokens, never the session cookie
            resp = clients[role].open(url, method=method, json={}, headers={"Authorization": f"Bearer {bearer[role]}"})
        else:
            resp = clients[role].open(url, method=method, data={})
        assert resp.status_code == 403, f"{method} {url} let a {role} through ({resp.status_code})"
        checked += 1
    assert checked >= 3


@pytest.fixture
def app(tmp_path):  # the shared fixtures (make_user) need an `app`; this one matches _app's database
    return _app(tmp_path)


def test_no_get_changes_anything(tmp_path, quick_password_hashing):
    """Every GET route, visited by a signed-in user, leaves every record table as it was."""
    import sqlite3

    from flask import url_for

    from stockroom.demo import build_demo

    path = tmp_path / "get.db"
    build_demo(str(path), password="visiting-Test-4d2a")
    app = create_app(
        {"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "t", "LAB_TIMEZONE": "UTC", "WTF_CSRF_ENABLED": False}
    )
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "okafor", "password": "visiting-Test-4d2a"}).status_code == 303
    from stockroom import db as dbmod

    conn = dbmod.connect(path)
    code = conn.execute("SELECT code FROM batches ORDER BY id LIMIT 1").fetchone()[0]
    conn.close()

    def snapshot():
        c = sqlite3.connect(path)
        try:
            tables = [r[0] for r in c.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
            # Session bookkeeping of the visitor is not a record; refused authorisations are logged on
            # purpose (the audit trail keeps them), so they are the one entry a GET may add.
            counts = {
                t: c.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables if t not in ("web_sessions", "events")
            }
            counts["events"] = c.execute("SELECT count(*) FROM events WHERE action != 'access.refused'").fetchone()[0]
            return counts
        finally:
            c.close()

    before = snapshot()
    visited = 0
    for rule in app.url_map.iter_rules():
        if "GET" not in (rule.methods or set()) or rule.endpoint == "static":
            continue
        values = {arg: (1 if "int" in str(rule._converters.get(arg, "")).lower() else code) for arg in rule.arguments}
        with app.test_request_context():
            url = url_for(rule.endpoint, **values)
        resp = client.get(url)
        assert resp.status_code < 500, url
        resp.close()
        visited += 1
    assert visited > 20
    after = snapshot()
    if after != before:
        c = sqlite3.connect(path)
        new = c.execute(
            "SELECT action, detail FROM events WHERE action != 'access.refused' ORDER BY id DESC LIMIT ?",
            [max(1, after["events"] - before["events"])],
        ).fetchall()
        c.close()
        raise AssertionError(f"GET requests wrote: {new}")
