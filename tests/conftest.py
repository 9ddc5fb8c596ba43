"""Shared fixtures: a fresh app on a temporary SQLite file per test (through the real SQLite)."""

from __future__ import annotations

import shutil

import pytest

from stockroom import create_app
from stockroom import db as dbmod


def _config(folder):
    return {"DATABASE": str(folder / "stockroom.db"), "TESTING": True, "SECRET_KEY": "test-only", "LAB_TIMEZONE": "UTC"}


@pytest.fixture(scope="session")
def migrated_template(tmp_path_factory):
    """A folder holding a freshly migrated database (and whatever files stockroom keeps beside it), made once."""
    folder = tmp_path_factory.mktemp("template")
    create_app(_config(folder))
    return folder


@pytest.fixture
def app(tmp_path, migrated_template):
    # Each test gets its own copy of the migrated template instead of migrating anew: the same file a
    # new database would be, at a fraction of the cost (tests/test_db.py still migrates from nothing).
    for item in migrated_template.iterdir():
        if item.is_file():
            shutil.copy2(item, tmp_path / item.name)
    app = create_app(_config(tmp_path))
    yield app


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def database(app):
    conn = dbmod.connect(app.config["DATABASE"])
    yield conn
    conn.close()


# ---------------------------------------------------------------- accounts and signed-in clients

TEST_PASSWORD = "violet kettle under the stairs"  # invented; long, and not on the common list


@pytest.fixture
def form_token():
    """Read the CSRF token out of the page a GET of `path` returns: form_token(client, path) -> str.

    Any page works for a signed-in client (the sign-out form in the header carries the token).
    """
    import re

    def _token(client, path="/sign-in"):
        page = client.get(path)
        found = re.search(r'name="csrf_token" value="([^"]+)"', page.get_data(as_text=True))
        assert found, f"no CSRF token in the page at {path} (status {page.status_code})"
        return found.group(1)

    return _token


@pytest.fixture
def quick_password_hashing(monkeypatch):
    """Hash new passwords with a cheap method for the test's duration (scrypt costs 0.1 s a hash)."""
    from stockroom import accounts

    monkeypatch.setattr(accounts, "HASH_METHOD", "pbkdf2:sha256:1000")


@pytest.fixture
def make_user(app, quick_password_hashing):
    """Create an account through accounts.create_user: make_user(username, role, password=...) -> User.

    Passwords made in a test that uses this fixture are hashed cheaply (quick_password_hashing).
    """
    from stockroom import accounts

    def _make(username, role="staff", password=TEST_PASSWORD, display_name=None):
        conn = dbmod.connect(app.config["DATABASE"])
        try:
            return accounts.create_user(conn, username, display_name or username.title(), role, password, actor="test-setup")
        finally:
            conn.close()

    return _make


@pytest.fixture
def signed_in_client(app, make_user, form_token):
    """A new test client signed in through the real /sign-in form: signed_in_client(role) -> FlaskClient.

    The account is `<role>-user` with TEST_PASSWORD unless username/password are given; it is made
    on first use. The client keeps its session cookie, so later posts need form_token(client, path).
    """
    from stockroom import accounts

    def _client(role="staff", username=None, password=TEST_PASSWORD):
        username = username or f"{role}-user"
        conn = dbmod.connect(app.config["DATABASE"])
        try:
            exists = accounts.user_by_username(conn, username) is not None
        finally:
            conn.close()
        if not exists:
            make_user(username, role, password)
        client = app.test_client()
        token = form_token(client, "/sign-in")
        resp = client.post("/sign-in", data={"username": username, "password": password, "csrf_token": token})
        assert resp.status_code == 303, f"sign-in as {username} failed with {resp.status_code}"
        return client

    return _client
