"""Posting forms the way a browser does (with the page's CSRF token) and counting rows, for the form tests."""

from __future__ import annotations

from stockroom import db as dbmod


def post(client, form_token, url, data):
    """POST a form with a CSRF token read from a page (form_token is the conftest fixture)."""
    data = dict(data)
    data["csrf_token"] = form_token(client, "/")
    return client.post(url, data=data)


def count(app, table):
    """Rows in a table of the app's database (to show that a refused form stored nothing)."""
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return conn.execute(f"SELECT count(*) FROM {table}").fetchone()[0]
    finally:
        conn.close()
