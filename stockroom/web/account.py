"""Signing in and out, changing one's password, and the first-run page that makes the first admin."""

from __future__ import annotations

import secrets
from typing import Any

from flask import Blueprint, abort, current_app, flash, redirect, render_template, request, url_for
from itsdangerous import BadSignature, URLSafeTimedSerializer

from stockroom import accounts
from stockroom.accounts import SignInLocked, SignInRefused
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.web import forms
from stockroom.web.access import begin_session, current_user, end_session, login_required, public, safe_next
from stockroom.web.once import made, once

bp = Blueprint("account", __name__)

# The device cookie: set at a successful sign-in, it lets this browser's later attempts for the same
# username be counted on their own (stockroom.accounts.throttle_keys), so guesses from elsewhere
# cannot hold up the person who signs in from their own browser. Signed with SECRET_KEY; it grants
# nothing by itself (the password is still needed).
DEVICE_COOKIE = "stockroom_device"
DEVICE_MAX_AGE_S = 180 * 24 * 3600


def _devices() -> URLSafeTimedSerializer:
    return URLSafeTimedSerializer(current_app.config["SECRET_KEY"], salt="stockroom.sign-in-device")


def _device_for(username: str) -> str | None:
    """The device id of this browser's cookie if it was set by a sign-in to `username`, else None."""
    raw = request.cookies.get(DEVICE_COOKIE)
    if not raw:
        return None
    try:
        value = _devices().loads(raw, max_age=DEVICE_MAX_AGE_S)
    except BadSignature:
        return None
    if not isinstance(value, dict) or str(value.get("u", "")).lower() != username.strip().lower():
        return None
    device = value.get("d")
    return device if isinstance(device, str) and device else None


def _home() -> str:
    return url_for("dashboard.index")


def _sign_in_page(status: int = 200, **context: Any) -> tuple[str, int]:
    context.setdefault("errors", {})
    context.setdefault("form", {})
    context.setdefault("notice", None)
    page = render_template("account/sign_in.html", no_users=not accounts.has_users(get_db()), **context)
    return page, status


@bp.route("/sign-in", methods=["GET", "POST"])
@public
def sign_in() -> Any:
    nxt = safe_next(request.values.get("next"))
    if request.method != "POST":  # HEAD answers like GET and never writes
        if current_user() is not None:
            return redirect(nxt or _home(), code=303)
        return _sign_in_page(next=nxt)
    username = request.form.get("username", "").strip()
    password = request.form.get("password", "")
    form = {"username": username}
    errors = {}
    if not username:
        errors["username"] = "Enter your username."
    if not password:
        errors["password"] = "Enter your password."
    if errors:
        return _sign_in_page(422, errors=errors, form=form, next=nxt)
    device = _device_for(username)
    try:
        user = accounts.authenticate(get_db(), username, password, client=request.remote_addr or "", device=device)
    except SignInLocked as exc:
        page, status = _sign_in_page(429, notice=exc.message, form=form, next=nxt)
        return page, status, {"Retry-After": str(getattr(exc, "retry_after", 60))}
    except SignInRefused as exc:
        return _sign_in_page(403, notice=exc.message, form=form, next=nxt)
    if user is None:
        return _sign_in_page(
            401, notice="That username and password do not match an account. Check both and try again.", form=form, next=nxt
        )
    begin_session(user)
    flash(f"Signed in as {user.display_name} ({user.role_label}).", "info")
    resp = redirect(nxt or _home(), code=303)
    cookie = _devices().dumps({"u": user.username.lower(), "d": device or secrets.token_urlsafe(16)})
    resp.set_cookie(
        DEVICE_COOKIE, cookie, max_age=DEVICE_MAX_AGE_S, httponly=True, samesite="Lax", secure=request.is_secure, path="/sign-in"
    )
    return resp


@bp.post("/sign-out")
@public
def sign_out() -> Any:
    end_session()
    flash("Signed out.", "info")
    return redirect(url_for("account.sign_in"), code=303)


@bp.route("/account/password", methods=["GET", "POST"])
@login_required
def password() -> Any:
    user = current_user()
    assert user is not None
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("account/password.html", errors={}, notice=None)
    current = request.form.get("current_password", "")
    new = request.form.get("new_password", "")
    confirm = request.form.get("confirm_password", "")
    errors: dict[str, str] = {}
    if not current:
        errors["current_password"] = "Enter your current password."
    if new != confirm:
        errors["confirm_password"] = "The two new passwords differ; type the same one twice."
    if errors:
        # Report what can be said without checking the current password (which would count a failure).
        problems = accounts.password_problems(new, username=user.username, display_name=user.display_name)
        if problems:
            errors.setdefault("new_password", problems[0])
        return forms.render_form("account/password.html", errors=errors, notice=None), 422
    try:
        updated = accounts.change_password(get_db(), user, current, new)
    except SignInLocked as exc:
        return render_template("account/password.html", errors={}, notice=exc.message), 429
    except SignInRefused as exc:
        return render_template("account/password.html", errors={}, notice=exc.message), 403
    except InvalidInput as exc:
        return forms.render_form("account/password.html", errors=exc.fields, notice=None), 422
    begin_session(updated)
    flash("Password changed. Any other browser signed in as you has been signed out.", "info")
    return redirect(_home(), code=303)


@bp.route("/first-run", methods=["GET", "POST"])
@public
@once
def first_run() -> Any:
    db = get_db()
    if accounts.has_users(db):
        abort(404, "Set-up is done: accounts exist. Sign in, or ask an administrator for an account.")
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("account/first_run.html", errors={}, form={})
    username = request.form.get("username", "").strip()
    display_name = " ".join(request.form.get("display_name", "").split())
    password = request.form.get("password", "")
    confirm = request.form.get("confirm_password", "")
    form = {"username": username, "display_name": display_name}
    errors: dict[str, str] = {}
    for e in accounts.validate_new_user(username, display_name, "admin", password):
        errors.setdefault(e.field, e.message)
    if password != confirm:
        errors["confirm_password"] = "The two passwords differ; type the same one twice."
    if not errors:
        try:
            user = accounts.create_first_admin(db, username, display_name, password)
        except InvalidInput as exc:
            errors = exc.fields
    if errors:
        return forms.render_form("account/first_run.html", errors=errors, form=form), 422
    begin_session(user)
    flash(
        f"Welcome, {user.display_name}: you are this stockroom's first administrator. Add the other "
        "accounts on the server with the command stockroom add-user NAME --role staff (or instructor, "
        "admin).",
        "info",
    )
    return redirect(_home(), code=303)


@bp.route("/account/tokens", methods=["GET", "POST"])
@login_required
@once
def api_tokens() -> Any:
    """List, make and revoke one's own API tokens (for programs writing through the JSON API)."""
    from stockroom import tokens

    user = current_user()
    assert user is not None
    db = get_db()
    secret = None
    errors: dict[str, str] = {}
    status = 200
    if request.method == "POST":
        try:
            _, secret = tokens.create(db, user.id, user.username, request.form.get("label", ""))
            made()  # a second submission shows the list (the secret is shown once only)
        except InvalidInput as exc:
            errors, status = exc.fields, 422
    return forms.render_form(
        "account/tokens.html", tokens=tokens.list_for(db, user.id), secret=secret, errors=errors, values=request.form
    ), status


@bp.post("/account/tokens/<int:token_id>/revoke")
@login_required
@once
def revoke_token(token_id: int) -> Any:
    from stockroom import tokens

    user = current_user()
    assert user is not None
    tokens.revoke(get_db(), token_id, user.id, user.username)
    flash("Token revoked: programs using it are refused from now on.", "info")
    return redirect(url_for("account.api_tokens"), code=303)
