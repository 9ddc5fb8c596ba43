"""Who is signed in, and the checks every other blueprint puts on its views.

    from stockroom.web.access import current_user, login_required, public, require

    @bp.post("/batches/")
    @require("batch.register")
    def register_batch(): ...

An anonymous request to a guarded view is sent to the sign-in page (303) or, under /api/ or when
JSON is wanted, answered 401; a signed-in user without the permission gets 403 and the refusal is
logged in the audit trail. `init_app` adds a gate in front of every view: with OPEN_READS off,
nothing but the views marked `public` (sign-in, first run, health) and static files answers an
anonymous request; with it on, anonymous reads pass but no anonymous request may change anything.
Each guarded view carries `access_rule` ("public", "user" or a permission name) so a test can walk
the URL map and find a write route without a rule.
"""

from __future__ import annotations

import functools
import threading
import time
from collections.abc import Callable
from typing import Any, TypeVar
from urllib.parse import urlsplit

from flask import (
    Flask,
    current_app,
    flash,
    g,
    has_request_context,
    jsonify,
    redirect,
    request,
    session,
    url_for,
)

from stockroom import accounts, records, tokens
from stockroom.accounts import User
from stockroom.db import get_db
from stockroom.errors import Forbidden

F = TypeVar("F", bound=Callable[..., Any])

SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
_KEYS = ("uid", "gen", "sid")
# Endpoints of other modules that answer anyone: static files and the liveness probe of monitoring.
ALWAYS_OPEN = frozenset({"static", "health.healthz"})
_UNSET = object()


def current_user() -> User | None:
    """The signed-in user of this request, or None (a session that has ended is forgotten)."""
    cached = g.get("stockroom_user", _UNSET)
    if cached is not _UNSET:
        return cached  # type: ignore[return-value]
    user = None
    secret = tokens.bearer(request.headers) if has_request_context() else None
    if secret is not None:
        # A program's request: the token alone decides, never a cookie that happens to ride along.
        g.stockroom_auth = "token"
        user_id = tokens.user_id_for(get_db(), secret)
        found = accounts.user_by_id(get_db(), user_id) if user_id is not None else None
        user = found if found is not None and found.active else None
        g.stockroom_user = user
        return user
    if "uid" in session:
        user = accounts.session_user(get_db(), session.get("uid"), session.get("gen"), session.get("sid"))
        if user is None:
            # Disabled, password changed, signed out elsewhere or too old: drop only our keys so the
            # CSRF token of the page being posted stays valid.
            for key in _KEYS:
                session.pop(key, None)
    g.stockroom_user = user
    return user


def begin_session(user: User) -> None:
    """Start a fresh session for a user who just proved who they are (ends and clears the old one first)."""
    previous = session.get("sid")
    if previous is not None:
        accounts.end_session(get_db(), previous, user.username)
    session.clear()
    g.pop("csrf_token", None)  # flask-wtf caches the raw token of the cleared session here
    session["uid"] = user.id
    session["gen"] = user.session_generation
    session["sid"] = accounts.start_session(get_db(), user)
    g.stockroom_user = user


def end_session() -> None:
    """Sign out: end the session on the server (a copied cookie stops working) and clear the cookie."""
    user = current_user()
    accounts.end_session(get_db(), session.get("sid"), user.username if user else "anonymous")
    session.clear()
    g.pop("csrf_token", None)
    g.stockroom_user = None


def wants_json_answer() -> bool:
    """Whether a refusal should be JSON (the API, or a client asking for JSON) rather than a page."""
    from stockroom.web import wants_json

    return wants_json()


def safe_next(target: str | None) -> str | None:
    """`target` if it is a path on this site (never another host), else None."""
    if not target or not target.startswith("/") or target.startswith("//") or "\\" in target:
        return None
    parts = urlsplit(target)
    if parts.scheme or parts.netloc:
        return None
    return target


def anonymous_response() -> Any:
    """The answer to an anonymous request that needs a user: 401 JSON, or 303 to the sign-in page."""
    if wants_json_answer():
        message = "Sign in first: this needs a signed-in user."
        return jsonify({"errors": [{"field": "_", "message": message}]}), 401
    target = None
    if request.method in SAFE_METHODS:
        target = request.full_path if request.query_string else request.path
    flash("Sign in to continue.", "info")
    return redirect(url_for("account.sign_in", next=safe_next(target)), code=303)


def _mark(view: Any, rule: str) -> None:
    view.access_rule = rule


def public(view: F) -> F:
    """Mark a view as open to anonymous requests even when OPEN_READS is off (sign-in, health...)."""
    _mark(view, "public")
    return view


def login_required(view: F) -> F:
    """Let only a signed-in user through (any role)."""

    @functools.wraps(view)
    def wrapped(*args: Any, **kwargs: Any) -> Any:
        if current_user() is None:
            return anonymous_response()
        return view(*args, **kwargs)

    _mark(wrapped, "user")
    return wrapped  # type: ignore[return-value]


def require(permission: str) -> Callable[[F], F]:
    """Let only a signed-in user whose role holds `permission` (a name in accounts.PERMISSIONS) through."""
    if permission not in accounts.PERMISSIONS:
        raise ValueError(f"unknown permission {permission!r}; known: {', '.join(accounts.PERMISSIONS)}")

    def decorate(view: F) -> F:
        @functools.wraps(view)
        def wrapped(*args: Any, **kwargs: Any) -> Any:
            user = current_user()
            if user is None:
                return anonymous_response()
            if not user.can(permission):
                refuse(user, permission)
            return view(*args, **kwargs)

        _mark(wrapped, permission)
        return wrapped  # type: ignore[return-value]

    return decorate


def api_require(permission: str) -> Callable[[F], F]:
    """For JSON writes: a user identified by an API token (never a session cookie) holding `permission`.

    Cookie-authenticated JSON writes are refused because the API takes no CSRF token; a program
    sends `Authorization: Bearer <token>` instead (tokens are made on the account page).
    """
    if permission not in accounts.PERMISSIONS:
        raise ValueError(f"unknown permission {permission!r}")

    def decorate(view: F) -> F:
        @functools.wraps(view)
        def wrapped(*args: Any, **kwargs: Any) -> Any:
            user = current_user()
            if user is None or g.get("stockroom_auth") != "token":
                message = "This needs an API token: send 'Authorization: Bearer <token>' (make one on your account page)."
                return (
                    jsonify({"errors": [{"field": "_", "message": message}]}),
                    401,
                    {"WWW-Authenticate": 'Bearer realm="stockroom"'},
                )
            if not user.can(permission):
                refuse(user, permission)
            return view(*args, **kwargs)

        _mark(wrapped, permission)
        return wrapped  # type: ignore[return-value]

    return decorate


class RefusalTally:
    """Refused requests counted per client (address and user) and minute; only the first of each minute is logged.

    A refused page costs a hash-chained audit entry; a few sessions reloading a refused page would
    otherwise append hundreds a second. The entry of a new minute carries how many refusals of that
    client went unlogged since its previous entry. Counts live in this process (a restart loses at
    most the unlogged tail, never an entry).
    """

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._minute = -1
        self._logged: set[tuple[str, str]] = set()
        self._unlogged: dict[tuple[str, str], int] = {}

    def note(self, client: tuple[str, str], minute: int) -> int | None:
        """Count one refusal; the unlogged count to put in a new entry, or None when this one is not logged."""
        with self._lock:
            if minute != self._minute:
                self._minute = minute
                self._logged = set()
            if client in self._logged:
                self._unlogged[client] = self._unlogged.get(client, 0) + 1
                return None
            self._logged.add(client)
            return self._unlogged.pop(client, 0)


def refuse(user: User, permission: str) -> None:
    """Count a refused authorisation (logged in the audit trail once per client and minute); raise Forbidden (403)."""
    from stockroom import db as dbmod

    unlogged = current_app.extensions["stockroom_refusals"].note(
        (request.remote_addr or "", user.username), int(time.time() // 60)
    )
    if unlogged is not None:
        db = get_db()
        with dbmod.write(db):
            records.append_event(
                db,
                user.username,
                "access.refused",
                detail={
                    "permission": permission,
                    "method": request.method,
                    "path": request.path,
                    "role": user.role,
                    "address": request.remote_addr or "",
                    "refused_unlogged_before": unlogged,
                },
            )
    raise Forbidden(f"Your role ({user.role_label}) does not allow you to {accounts.PERMISSIONS[permission]}.")


def _no_store(response: Any) -> Any:
    """after_request: pages for a signed-in user (the token page above all) are never kept by a cache."""
    signed_in = g.get("stockroom_user", None) is not None or any(k in session for k in _KEYS)
    if (signed_in or request.endpoint == "account.tokens") and request.endpoint != "static":
        response.headers["Cache-Control"] = "no-store"
        response.vary.add("Cookie")
    return response


def _gate() -> Any:
    """before_request: refuse anonymous requests the settings do not allow (see the module docstring)."""
    if request.endpoint is None or request.endpoint in ALWAYS_OPEN:
        return None  # unknown URL (404/405 follow), a static file or the liveness probe
    view = current_app.view_functions.get(request.endpoint)
    if getattr(view, "access_rule", None) == "public":
        return None
    # An open read passes whoever asks, so the session and token are only read (by the view, when it
    # needs the user) for what the settings keep closed: a cached answer then costs no session look-up.
    if request.method in SAFE_METHODS and current_app.config.get("OPEN_READS", True):
        return None
    if current_user() is not None:
        return None
    return anonymous_response()


def init_app(app: Flask) -> None:
    """Register the gate in front of every view and expose `current_user` and `user_can` to templates."""
    app.before_request(_gate)
    app.after_request(_no_store)
    app.extensions["stockroom_refusals"] = RefusalTally()
    # Browsers then send the session cookie on top-level navigation from other sites but not on their
    # form posts or scripted requests: a second line behind the CSRF token. Strict may be set instead.
    app.config["SESSION_COOKIE_SAMESITE"] = app.config.get("SESSION_COOKIE_SAMESITE") or "Lax"

    @app.context_processor
    def _who() -> dict[str, Any]:
        user = current_user() if has_request_context() else None
        return {"current_user": user, "user_can": lambda permission: bool(user and user.can(permission))}
