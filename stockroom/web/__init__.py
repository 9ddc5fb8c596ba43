"""The web layer's shared request helpers: the lab's date, JSON or HTML, the request guards, the CSRF guard.

Every rule a request is held to before any view reads it lives here, once: the Host header, the
query string (length, characters, dates, whole numbers), form values (control characters), ids in
URLs, and the one JSON body reader every JSON endpoint uses (content type, size, depth). The wiring
of the blueprints into an app is stockroom.web.app (kept apart so that no blueprint, which imports
these helpers, is imported back by the package it lives in).
"""

from __future__ import annotations

import datetime as dt
import json
import re
from collections.abc import Callable, Iterable
from typing import Any

from flask import Flask, Response, current_app, request
from flask_wtf.csrf import CSRFProtect
from werkzeug.routing import IntegerConverter

from stockroom import db as dbmod
from stockroom import parsing
from stockroom.errors import FieldError, InvalidInput

csrf = CSRFProtect()

# Query strings: each value at most this many characters (a search, a code, a date), at most this
# many parameters. Nothing a page links to comes near either.
MAX_QUERY_VALUE = 200
MAX_QUERY_PARAMS = 30
# JSON bodies: the deepest real request (a run: object -> replicates -> replicate) is 3 levels.
MAX_JSON_DEPTH = 20
MAX_JSON_BYTES = 512 * 1024
# A Host header: a DNS name or an IP (v4, or v6 in brackets), with an optional port 1-65535.
_LABEL = r"[a-z0-9](?:[a-z0-9-]{0,61}[a-z0-9])?"
_HOST = re.compile(rf"(?:{_LABEL}(?:\.{_LABEL})*\.?|\[[0-9a-f:.]+\])(?::([0-9]{{1,5}}))?", re.ASCII | re.IGNORECASE)


def lab_today() -> dt.date:
    """Today's date in the lab's time zone."""
    return dbmod.lab_today(current_app.config["LAB_TIMEZONE"])


def csv_attachment(text: str, filename: str) -> Response:
    """A CSV download: `text` as an attachment named `filename` (characters other than letters, digits, - _ . made _)."""
    safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in filename)
    return Response(text, mimetype="text/csv", headers={"Content-Disposition": f'attachment; filename="{safe}"'})


def wants_json() -> bool:
    return request.path.startswith("/api/") or request.accept_mimetypes.best == "application/json"


def _refuse(field: str, message: str) -> InvalidInput:
    return InvalidInput([FieldError(field, message)])


def parse_date_arg(value: str | None, field: str, *, not_after: dt.date | None = None) -> dt.date | None:
    """An optional ISO date from a query string; InvalidInput naming the field if malformed or out of range.

    not_after: the latest date allowed (default: a year past the lab's today, parsing.FUTURE_DAYS);
    the earliest is parsing.EARLIEST_DATE.
    """
    if value is None or value.strip() == "":
        return None
    latest = not_after or lab_today() + dt.timedelta(days=parsing.FUTURE_DAYS)
    day, problem = parsing.date_problem(value, not_after=latest)
    if problem is not None:
        raise _refuse(field, problem)
    return day


def int_arg(name: str, default: int, *, ge: int = 0, le: int = 1_000_000) -> int:
    """A whole-number query parameter (a page, a limit, an offset) within [ge, le]; InvalidInput otherwise."""
    raw = request.args.get(name)
    if raw is None or raw.strip() == "":
        return default
    p = parsing.Parser()
    value = p.integer(raw, name, ge=ge, le=le)
    p.raise_if_errors()
    assert value is not None
    return value


# ------------------------------------------------------------------------------ the JSON body


class _BodyRefused(InvalidInput):
    """The request body as a whole is refused (named "_body" in the errors, like every body problem)."""

    def __init__(self, message: str):
        super().__init__([FieldError("_body", message)])


class UnsupportedMediaType(_BodyRefused):
    """A JSON endpoint was sent a body that does not say it is JSON."""

    status = 415


class _TooLarge(_BodyRefused):
    status = 413


class _BadJSON(_BodyRefused):
    status = 400


def _depth_and_text_problem(data: Any) -> tuple[str, str] | None:
    """The first (path, message) of a JSON value nested too deep or holding a control character; None if clean."""
    stack: list[tuple[Any, str, int]] = [(data, "", 1)]
    while stack:
        value, path, depth = stack.pop()
        if isinstance(value, dict | list):
            if depth > MAX_JSON_DEPTH:
                return path or "_body", f"is nested deeper than {MAX_JSON_DEPTH} levels"
            items: Iterable[tuple[str | int, Any]] = value.items() if isinstance(value, dict) else enumerate(value)
            for key, item in items:
                if isinstance(key, str) and parsing.text_problem(key, multiline=False):
                    return path or "_body", "has a field name with control characters"
                stack.append((item, parsing.field_path(path, key) if path else str(key), depth + 1))
        elif isinstance(value, str) and parsing.text_problem(value, multiline=True):
            return path or "_body", "must not contain control characters (such as NUL)"
    return None


def read_json_body(*, max_bytes: int = MAX_JSON_BYTES) -> dict[str, Any]:
    """The request's JSON object, held to the rules every JSON endpoint shares.

    The body must say it is JSON (415 otherwise), be at most max_bytes (bytes; 413), parse (400),
    be an object (422) nested at most MAX_JSON_DEPTH levels and hold no control characters but
    line breaks and tabs (422, naming the field). Raises StockroomError subclasses the error
    handlers answer with the usual {"errors": [...]} body.
    """
    if not request.is_json:
        raise UnsupportedMediaType("send the body as JSON, with Content-Type: application/json")
    if request.content_length is not None and request.content_length > max_bytes:
        raise _TooLarge(f"the request body must be at most {max_bytes // 1024} KB")
    raw = request.get_data(cache=True)
    if len(raw) > max_bytes:
        raise _TooLarge(f"the request body must be at most {max_bytes // 1024} KB")
    try:
        data = json.loads(raw)
    except (ValueError, RecursionError):
        # RecursionError: a deeply nested body; json raises it rather than a ValueError.
        raise _BadJSON("the request body is not valid JSON (UTF-8, one object)") from None
    if not isinstance(data, dict):
        raise _refuse("_body", f"the request body must be a JSON object, not {parsing.kind_of(data)}")
    problem = _depth_and_text_problem(data)
    if problem is not None:
        raise _refuse(*problem)
    return data


# ------------------------------------------------------------------------------ the request guards


class BoundedInt(IntegerConverter):
    """The <int:...> of every URL, held to parsing.MAX_INTEGER: a larger id is a 404, not a database overflow."""

    def __init__(self, map: Any, *args: Any, **kwargs: Any) -> None:
        kwargs.setdefault("max", parsing.MAX_INTEGER)
        super().__init__(map, *args, **kwargs)


def _host_problem(host: str | None, trusted: list[str] | None) -> str | None:
    if host is None:
        return None  # HTTP/1.0 without a Host: the server's own name is used
    m = _HOST.fullmatch(host) if len(host) <= 255 else None
    if m is None:
        return "the Host header is not a valid host name"
    if m.group(1) is not None and not 1 <= int(m.group(1)) <= 65535:
        return "the Host header's port must be between 1 and 65535"
    if trusted:
        name = host.lower()
        name = name[: name.rindex("]") + 1] if name.startswith("[") else name.partition(":")[0]
        name = name.rstrip(".")
        for ref in trusted:
            if ref.startswith("."):
                if name == ref[1:] or name.endswith(ref):
                    return None
            elif name == ref:
                return None
        return "this server does not answer for that host name"
    return None


class HostGuard:
    """WSGI middleware: a malformed or untrusted Host header gets 400 before Flask builds any URL.

    It runs in front of every route, /healthz included. A valid Host is passed on lower-cased (host
    names are case-insensitive, RFC 3986), and TRUSTED_HOSTS is compared lower-cased too.
    """

    def __init__(self, app: Flask, wsgi_app: Callable[..., Any]):
        self.app = app
        self.wsgi_app = wsgi_app

    def __call__(self, environ: dict[str, Any], start_response: Callable[..., Any]) -> Any:
        host = environ.get("HTTP_HOST")
        trusted = self.app.config.get("TRUSTED_HOSTS") or None
        problem = _host_problem(host, trusted)
        if problem is not None:
            if str(environ.get("PATH_INFO", "")).startswith("/api/"):
                body = json.dumps({"errors": [{"field": "Host", "message": problem}]}).encode()
                ctype = "application/json"
            else:
                body = f"Bad request: {problem}.\n".encode()
                ctype = "text/plain; charset=utf-8"
            start_response("400 Bad Request", [("Content-Type", ctype), ("Content-Length", str(len(body)))])
            return [body]
        if host is not None:
            environ["HTTP_HOST"] = host.lower()
        return self.wsgi_app(environ, start_response)


def _check_values(values: Iterable[tuple[str, str]], *, max_length: int, where: str) -> None:
    for key, value in values:
        if parsing.text_problem(key, multiline=False):
            raise _refuse("_", f"a {where} name holds control characters")
        if len(value) > max_length:
            raise _refuse(key, f"must be at most {max_length} characters")
        problem = parsing.text_problem(value, multiline=True)
        if problem is not None:
            raise _refuse(key, problem)


def guard_request() -> None:
    """Before every view: the query string is held to the shared limits (422).

    Form values are not checked here but by the Parser that reads each field (Parser.text refuses
    control characters), so that the form comes back with the message beside its field.
    """
    args = request.args
    if len(args) > MAX_QUERY_PARAMS:
        raise _refuse("_", f"a query string may have at most {MAX_QUERY_PARAMS} parameters")
    _check_values(args.items(multi=True), max_length=MAX_QUERY_VALUE, where="query parameter")
    for value in args.values():
        if parsing.text_problem(value, multiline=False):
            raise _refuse("_", "a query parameter must be on one line")


def install(app: Flask) -> None:
    """The guards every route shares: bounded <int:> ids, the Host check, the query and form checks.

    Call before any blueprint is registered (the URL converters are read when rules are added).
    """
    app.url_map.converters["int"] = BoundedInt
    hosts = app.config.get("TRUSTED_HOSTS")
    if hosts:
        app.config["TRUSTED_HOSTS"] = [h.lower() for h in hosts]
    app.wsgi_app = HostGuard(app, app.wsgi_app)  # type: ignore[method-assign]
    app.before_request(guard_request)
