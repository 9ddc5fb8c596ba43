"""Hostile requests for the fuzz tests: a demo world, every route of the URL map, nasty values.

Used by tests/test_hostile_input.py. The world is the invented demo scenario (stockroom.demo) with
an admin signed in (every permission but the instructor's class corrections) and an admin API token,
so the fuzzed requests reach the parsers rather than stopping at the access gate.
"""

from __future__ import annotations

import json
import random
import re
import sqlite3
from dataclasses import dataclass
from typing import Any

from stockroom import accounts, commitwatch, create_app, tokens
from stockroom import db as dbmod
from stockroom.demo import build_demo

PASSWORD = "hostile-Test-7c3e1a"  # invented
WRITE_METHODS = {"POST", "PUT", "PATCH", "DELETE"}

# Values an attacker tries first: the ends of the calendar, integers past 64 bits, digits that are
# not 0-9, control characters, LIKE wildcards, markup, long text, odd encodings.
NASTY_TEXT = [
    "",
    " ",
    "0001-01-01",
    "9999-12-31",
    "1899-12-31",
    "0000-00-00",
    "2024-02-30",
    "+002024-01-01",
    "٢٠٢٤-٠١-٠١",
    "9" * 30,
    "-9" + "9" * 25,
    "18446744073709551616",
    "-1",
    "0",
    "1e309",
    "NaN",
    "١٢",
    "１２",
    "²",
    "\x00",
    "\x00reason",
    "a\x00b",
    "line\nbreak",
    "\r\n",
    "\x1b[31m",
    "\u202eevil",
    "%",
    "_",
    "%_%",
    "<script>alert(1)</script>",
    "'; DROP TABLE runs;--",
    "x" * 5000,
    "é" * 300,
    "true",
    "null",
    "[]",
    "{}",
]
NASTY_JSON: list[Any] = [None, True, False, 0, -1, 10**30, -(10**30), 1e300, 0.5, [], {}, ["a"], {"a": 1}, [[[]]], "x" * 3000]
NASTY_KEYS = [
    "r²_final_ml",
    "r١_final_ml",
    "r0_final_ml",
    "r99999999999999999999_final_ml",
    "\x00",
    "csrf_token",
    "replicates[0]",
]
NASTY_HOSTS = [
    "",
    "exa mple",
    "a@b",
    "[::1",
    "localhost:99999",
    "localhost:abc",
    "\x00",
    "ex\u00e4mple.org",
    "..",
    "a" * 300,
    "LOCALHOST",
]


@dataclass
class World:
    app: Any
    client: Any
    path: str
    token: str
    vocabulary: list[str]
    json_keys: list[str]


def make_world(tmp_path: Any) -> World:
    """The demo database, an admin session and token, and the field names every page's forms use."""
    path = str(tmp_path / "hostile.db")
    build_demo(path, password=PASSWORD)
    app = create_app(
        {
            "DATABASE": path,
            "TESTING": True,
            "SECRET_KEY": "t",
            "LAB_TIMEZONE": "UTC",
            "WTF_CSRF_ENABLED": False,
            "MONTE_CARLO_DRAWS": 1000,
        }
    )
    app.config["PROPAGATE_EXCEPTIONS"] = False  # an unhandled error answers 500, as in production
    conn = dbmod.connect(path)
    admin = accounts.user_by_username(conn, "demo-admin")
    assert admin is not None
    token = tokens.create(conn, admin.id, admin.username, "hostile tests")[1]
    conn.close()
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "demo-admin", "password": PASSWORD}).status_code == 303
    vocabulary: set[str] = set()
    for url in get_urls(app, path):
        resp = client.get(url)
        if resp.mimetype == "text/html":
            vocabulary |= set(re.findall(r'name="([^"]+)"', resp.get_data(as_text=True)))
        resp.close()
    vocabulary.discard("csrf_token")
    from stockroom import run_input

    json_keys = sorted(
        {*run_input.COMMON_KEYS, *run_input.PARTNER_KEY.values(), "balance_id", "burette_id", "pipette_id", "replicates"}
        | {"decision", "reason", "released_on", "reagent", "nominal_molarity", "volume_l", "prepared_on", "prepared_by"}
        | {"titrant", "standard", "purity", "reference", "monte_carlo_draws", "target_molarity", "concentrate"}
    )
    return World(app, client, path, token, sorted(vocabulary), json_keys)


def _sample_values(app: Any, path: str) -> dict[str, Any]:
    conn = sqlite3.connect(path)
    try:

        def first(sql: str, default: Any) -> Any:
            row = conn.execute(sql).fetchone()
            return row[0] if row else default

        return {
            "code": first("SELECT code FROM batches ORDER BY id LIMIT 1", "X-0000-00"),
            "run_id": first("SELECT id FROM runs ORDER BY id LIMIT 1", 1),
            "lot_id": first("SELECT id FROM standard_lots ORDER BY id LIMIT 1", 1),
            "release_id": first("SELECT id FROM releases ORDER BY id LIMIT 1", 1),
            "instrument_id": first("SELECT id FROM instruments ORDER BY id LIMIT 1", 1),
            "recall_id": first("SELECT id FROM recalls ORDER BY id LIMIT 1", 1),
            "cid": first("SELECT id FROM class_corrections ORDER BY id LIMIT 1", 1),
            "username": "okafor",
            "token_id": 1,
            "filename": "style.css",
        }
    except sqlite3.Error:
        return {"code": "X-0000-00", "username": "okafor", "filename": "style.css"}
    finally:
        conn.close()


# Signing out would leave the fuzzers' client anonymous for every later request (the access tests
# cover it); every other route is walked.
NOT_FUZZED = frozenset({"static", "account.sign_out"})


def routes(app: Any, path: str) -> list[tuple[Any, str, str]]:
    """(rule, method, url) for every rule and method of the URL map but NOT_FUZZED, with real ids where they exist."""
    from flask import url_for

    sample = _sample_values(app, path)
    out = []
    for rule in app.url_map.iter_rules():
        if rule.endpoint in NOT_FUZZED:
            continue
        values = {}
        for arg in rule.arguments:
            default = 1 if "int" in str(rule._converters.get(arg, "")).lower() else "X-0000-00"
            values[arg] = sample.get(arg, default)
        with app.test_request_context():
            url = url_for(rule.endpoint, **values)
        for method in sorted((rule.methods or set()) - {"HEAD", "OPTIONS"}):
            out.append((rule, method, url))
    return out


def get_urls(app: Any, path: str) -> list[str]:
    return [url for rule, method, url in routes(app, path) if method == "GET"]


def write_routes(app: Any, path: str) -> list[tuple[Any, str, str]]:
    return [(r, m, u) for r, m, u in routes(app, path) if m in WRITE_METHODS]


_READERS: dict[str, sqlite3.Connection] = {}
_COUNTED: dict[str, tuple[bytes, dict[str, int]]] = {}


def record_counts(path: str) -> dict[str, int]:
    """Rows of every table but the session bookkeeping and the refused-access log entries.

    One reading connection per database is kept open (opening one per request would double the fuzzers' time).
    The counts are kept with the commit token they were read at (stockroom.commitwatch): while the token
    has not moved, nothing was committed, so they are given again without the sixty-odd counts.
    """
    token = commitwatch.token(path)
    kept = _COUNTED.get(path)
    if token is not None and kept is not None and kept[0] == token:
        return dict(kept[1])
    c = _READERS.get(path)
    if c is None:
        c = _READERS[path] = sqlite3.connect(path, check_same_thread=False)
    tables = [r[0] for r in c.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
    # Refused sign-ins are recorded on purpose (the throttle counts them), as are refused authorisations;
    # the throttle's counters and the one-time form ids are operational bookkeeping, not records.
    skip = ("web_sessions", "events", "signin_attempts", "signin_throttle", "form_submissions")
    counts = {t: c.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables if t not in skip}
    counts["events"] = c.execute(
        "SELECT count(*) FROM events WHERE action NOT LIKE 'access.%' AND action != 'account.signin_failed'"
    ).fetchone()[0]
    if token is not None:
        _COUNTED[path] = (token, dict(counts))
    return counts


def close_readers() -> None:
    _COUNTED.clear()
    while _READERS:
        _READERS.popitem()[1].close()


def nested(depth: int) -> str:
    return "[" * depth + "]" * depth


def random_value(rng: random.Random) -> str:
    if rng.random() < 0.7:
        return rng.choice(NASTY_TEXT)
    return "".join(chr(rng.choice([rng.randrange(0, 0x80), rng.randrange(0x80, 0x3000)])) for _ in range(rng.randrange(0, 12)))


def random_json(rng: random.Random, depth: int = 0) -> Any:
    r = rng.random()
    if depth < 2 and r < 0.15:
        return [random_json(rng, depth + 1) for _ in range(rng.randrange(0, 3))]
    if depth < 2 and r < 0.3:
        return {rng.choice(NASTY_KEYS + ["mass_g", "final_ml"]): random_json(rng, depth + 1) for _ in range(rng.randrange(0, 3))}
    if r < 0.6:
        return rng.choice(NASTY_JSON)
    return random_value(rng)


def random_request(rng: random.Random, world: World, method: str, url: str) -> dict[str, Any]:
    """Keyword arguments for client.open: hostile query string, headers and body for one route."""
    kwargs: dict[str, Any] = {"method": method, "headers": {}}
    query = {}
    for _ in range(rng.randrange(0, 4)):
        key = rng.choice(["on", "page", "q", "limit", "offset", "reagent", "status", "action", "from", "to", "titrant", "n"])
        query[key] = random_value(rng)
    kwargs["query_string"] = query
    roll = rng.random()
    if roll < 0.1:
        kwargs["headers"]["Host"] = rng.choice(NASTY_HOSTS)
    elif roll < 0.2:
        kwargs["headers"]["Accept"] = "application/json"
    if url.startswith("/api/"):
        kwargs["headers"]["Authorization"] = f"Bearer {world.token}"
    if method in WRITE_METHODS:
        if url.startswith("/api/"):
            kind = rng.random()
            if kind < 0.1:
                kwargs["data"] = nested(rng.choice([50, 200, 5000]))
            elif kind < 0.2:
                kwargs["data"] = bytes(rng.randrange(256) for _ in range(rng.randrange(0, 40)))
            else:
                body = {rng.choice(world.json_keys + NASTY_KEYS): random_json(rng) for _ in range(rng.randrange(0, 8))}
                kwargs["data"] = json.dumps(body)
            ctype = rng.random()
            kwargs["content_type"] = (
                "application/json" if ctype < 0.8 else rng.choice(["text/plain", "application/x-www-form-urlencoded", ""])
            )
        else:
            form = {}
            for _ in range(rng.randrange(0, 10)):
                key = rng.choice(world.vocabulary + NASTY_KEYS) if world.vocabulary else rng.choice(NASTY_KEYS)
                form[key] = random_value(rng)
            kwargs["data"] = form
    return kwargs
