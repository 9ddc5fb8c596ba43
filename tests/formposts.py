"""Posting forms the way a browser does (with the page's CSRF token), reading the answer, counting rows."""

from __future__ import annotations

import re
from html import unescape

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


def error_beside(html: str, field: str) -> str | None:
    """The message shown inside the field's own box (label, control, message), or None."""
    for box in re.findall(r'<div class="field[^"]*">(.*?)</div>', html, re.S):
        if f'name="{field}"' in box:
            found = re.search(rf'<span class="field-error" id="e-{re.escape(field)}">(.*?)</span>', box, re.S)
            return unescape(found.group(1)) if found else None
    return None
