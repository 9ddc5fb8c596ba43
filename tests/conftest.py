"""Shared fixtures: a fresh app on a temporary SQLite file per test (through the real SQLite)."""

from __future__ import annotations

import pytest

from stockroom import create_app
from stockroom import db as dbmod


@pytest.fixture
def app(tmp_path):
    app = create_app({"DATABASE": str(tmp_path / "stockroom.db"), "TESTING": True, "SECRET_KEY": "test-only",
                      "LAB_TIMEZONE": "UTC"})
    yield app


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def runner(app):
    return app.test_cli_runner()


@pytest.fixture
def database(app):
    conn = dbmod.connect(app.config["DATABASE"])
    yield conn
    conn.close()
