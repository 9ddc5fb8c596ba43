"""Accounts and sign-in: password rules, hashing, sessions, lock-out, first run, roles, CLI and CSRF."""

from __future__ import annotations

import datetime as dt
import re

import pytest
from click.testing import CliRunner
from flask import Blueprint, jsonify

from stockroom import accounts, records
from stockroom import db as dbmod
from stockroom.cli import main as cli_main
from stockroom.errors import Conflict, InvalidInput
from stockroom.web.access import require, safe_next

# The default password of the conftest fixtures make_user and signed_in_client (conftest.TEST_PASSWORD;
# not imported, because tests/browser has a conftest module of the same name).
TEST_PASSWORD = "violet kettle under the stairs"


@pytest.fixture(autouse=True)
def _no_failure_delay(monkeypatch):
    # A failed attempt must never sleep in a server thread: any call to time.sleep is recorded here.
    import time

    calls = []
    monkeypatch.setattr(time, "sleep", calls.append)
    return calls


def _events(database, action):
    return dbmod.query(database, "SELECT * FROM events WHERE action = ? ORDER BY id", [action])


def _sign_in(client, form_token, username, password):
    token = form_token(client, "/sign-in")
    return client.post("/sign-in", data={"username": username, "password": password, "csrf_token": token})


# ---------------------------------------------------------------- password rules and hashing
# Rules follow NIST SP 800-63B section 5.1.1.2: a minimum length, a check against a list of
# commonly used passwords, and no composition rules. The 12-character minimum is this project's.


def test_length_rule_counts_characters():
    assert accounts.password_problems("x7#kite-lamp") == []  # exactly 12
    assert len(accounts.password_problems("x7#kite-lam")) == 1  # 11
    # 12 characters that are 13 UTF-8 bytes: the rule counts characters.
    assert accounts.password_problems("grüner-tee-7") == []
    assert "at least 12" in accounts.password_problems("short")[0]


def test_no_composition_rules():
    # All lower case, spaces, no digit or symbol: a passphrase is fine.
    assert accounts.password_problems("violet kettle under the stairs") == []
    assert accounts.password_problems("onlylowercaseletters") == []


@pytest.mark.parametrize(
    "weak",
    [
        "password1234",
        "Password1234",
        "qwertyuiop12",
        "123456789012",
        "1qaz2wsx3edc",
        "iloveyou1234",
        "correct horse battery staple",
    ],
)
def test_common_passwords_refused_whatever_the_case(weak):
    problems = accounts.password_problems(weak)
    assert len(problems) == 1 and "commonly used" in problems[0]


def test_common_list_is_a_few_hundred_and_all_long_enough_to_matter():
    common = accounts.common_passwords()
    assert 300 <= len(common) <= 2000
    # Shorter entries would be dead weight: the length rule already refuses them.
    assert all(len(p) >= accounts.MIN_PASSWORD_LENGTH for p in common)
    assert all(p == p.lower() for p in common)


def test_password_equal_to_username_or_one_repeated_character_refused():
    assert accounts.password_problems("laboratory-lead", username="Laboratory-Lead")
    assert accounts.password_problems("zzzzzzzzzzzzzz")
    assert accounts.password_problems("a" * 201)  # over the upper bound


def test_hash_is_salted_scrypt_and_checks(database):
    # No make_user here: this test sees the production method, werkzeug's scrypt.
    a, b = accounts.hash_password(TEST_PASSWORD), accounts.hash_password(TEST_PASSWORD)
    assert a != b  # different salts
    assert a.startswith("scrypt:32768:8:1$") and TEST_PASSWORD not in a
    user = accounts.create_user(database, "ada", "Ada", "staff", TEST_PASSWORD, actor="t")
    stored = database.execute("SELECT password_hash FROM users WHERE id = ?", [user.id]).fetchone()[0]
    assert stored.startswith("scrypt:") and TEST_PASSWORD not in stored
    assert accounts.authenticate(database, "ada", TEST_PASSWORD) == user


# ---------------------------------------------------------------- users


def test_create_user_validates_and_refuses_taken_name_any_case(database, make_user):
    make_user("Ada.Lovelace", "staff")
    with pytest.raises(InvalidInput) as taken:
        accounts.create_user(database, "ada.lovelace", "Another", "staff", TEST_PASSWORD, actor="t")
    assert "taken" in taken.value.fields["username"]
    with pytest.raises(InvalidInput) as bad:
        accounts.create_user(database, "no spaces", "", "chemist", "short", actor="t")
    assert set(bad.value.fields) == {"username", "display_name", "role", "password"}
    assert database.execute("SELECT count(*) FROM users").fetchone()[0] == 1
    created = _events(database, "account.create")
    assert len(created) == 1 and created[0]["actor"] == "test-setup"
    assert records.verify_chain(database) is None


def test_roles_permission_map():
    # The split of duties is the project's (issue 7): staff run the bench work, instructors read and
    # correct class data, admins run accounts and policy and may also do staff work.
    assert accounts.role_can("staff", "run.record") and accounts.role_can("staff", "batch.withdraw")
    assert not accounts.role_can("staff", "users.manage")
    assert not accounts.role_can("instructor", "run.record")
    assert accounts.role_can("instructor", "classdata.correct")
    assert accounts.role_can("instructor", "labday.lookup")
    assert accounts.role_can("admin", "users.manage") and accounts.role_can("admin", "run.record")
    assert not accounts.role_can("admin", "classdata.correct")
    assert all(accounts.role_can(r, "read") for r in accounts.ROLES)
    with pytest.raises(ValueError):
        accounts.role_can("staff", "no.such.permission")


# ---------------------------------------------------------------- authenticate


def test_authenticate_right_wrong_unknown_and_case(database, make_user, _no_failure_delay, monkeypatch):
    user = make_user("grace", "instructor")
    assert accounts.authenticate(database, "GRACE", TEST_PASSWORD) == user
    assert _no_failure_delay == []  # no pause on success
    assert accounts.authenticate(database, "grace", TEST_PASSWORD + "x") is None
    assert _no_failure_delay == []  # nor on failure: throttling answers 429 instead of sleeping
    # An unknown name still costs a hash check, so it is not told apart by timing.
    checked = []
    real = accounts.check_password_hash
    monkeypatch.setattr(accounts, "check_password_hash", lambda h, p: checked.append(h) or real(h, p))
    assert accounts.authenticate(database, "nobody", TEST_PASSWORD) is None
    assert len(checked) == 1 and checked[0].startswith(accounts.HASH_METHOD + "$")
    failed = _events(database, "account.signin_failed")
    assert [e["actor"] for e in failed] == ["anonymous", "anonymous"]
    assert ['"why":"wrong password"' in e["detail"] for e in failed] == [True, False]
    assert len(_events(database, "account.signin")) == 1


def test_disabled_user_cannot_sign_in(database, make_user):
    make_user("boss", "admin")
    make_user("hedy", "staff")
    accounts.disable_user(database, "hedy", actor="boss", reason="left the lab")
    with pytest.raises(accounts.SignInRefused, match="disabled"):
        accounts.authenticate(database, "hedy", TEST_PASSWORD)
    with pytest.raises(Conflict):
        accounts.disable_user(database, "hedy", actor="boss")
    ev = _events(database, "account.disable")
    assert len(ev) == 1 and ev[0]["reason"] == "left the lab"


def test_last_admin_cannot_be_disabled(database, make_user):
    make_user("boss", "admin")
    with pytest.raises(Conflict, match="last active administrator"):
        accounts.disable_user(database, "boss", actor="boss")
    make_user("deputy", "admin")
    assert accounts.disable_user(database, "boss", actor="deputy").active is False


# ---------------------------------------------------------------- lock-out


def test_backoff_doubles_after_five_free_failures_up_to_fifteen_minutes():
    assert [accounts.backoff(n).total_seconds() for n in range(9)] == [0, 0, 0, 0, 0, 2, 4, 8, 16]
    assert accounts.backoff(13) == dt.timedelta(seconds=512)
    assert accounts.backoff(14) == accounts.backoff(500) == dt.timedelta(minutes=15)


def test_failures_back_off_exponentially_without_sleeping(database, make_user, _no_failure_delay):
    make_user("rosalind", "staff")
    t0 = dt.datetime(2026, 3, 2, 9, 0, tzinfo=dt.UTC)
    for i in range(5):
        assert accounts.authenticate(database, "rosalind", f"wrong guess {i}", now=t0, client="10.0.0.9") is None
    # The sixth attempt within 2 s is refused at once, even with the right password, and writes nothing.
    attempts = database.execute("SELECT count(*) FROM signin_attempts").fetchone()[0]
    with pytest.raises(accounts.SignInThrottled) as held:
        accounts.authenticate(database, "rosalind", TEST_PASSWORD, now=t0 + dt.timedelta(seconds=1), client="10.0.0.9")
    assert held.value.status == 429 and held.value.retry_after == 1 and "1 second" in held.value.message
    assert database.execute("SELECT count(*) FROM signin_attempts").fetchone()[0] == attempts
    # A sixth failure after the wait doubles it: 4 s.
    assert accounts.authenticate(database, "rosalind", "wrong", now=t0 + dt.timedelta(seconds=2), client="10.0.0.9") is None
    assert accounts.throttle_until(database, accounts.throttle_keys("rosalind", "10.0.0.9", None), t0) == t0 + dt.timedelta(
        seconds=6
    )
    user = accounts.authenticate(database, "rosalind", TEST_PASSWORD, now=t0 + dt.timedelta(seconds=6), client="10.0.0.9")
    assert user is not None and _no_failure_delay == []
    # The success clears the counts.
    assert database.execute("SELECT count(*) FROM signin_throttle").fetchone()[0] == 0


def test_guesses_from_elsewhere_do_not_hold_up_a_known_browser(database, make_user):
    make_user("marie", "staff")
    t0 = dt.datetime(2026, 3, 2, 9, 0, tzinfo=dt.UTC)
    for i in range(40):  # a flood of guesses from many addresses: the username ends up waiting minutes
        try:
            accounts.authenticate(database, "marie", "guess", now=t0 + dt.timedelta(seconds=i * 30), client=f"203.0.113.{i}")
        except accounts.SignInThrottled:
            pass
    later = t0 + dt.timedelta(minutes=20, seconds=1)
    with pytest.raises(accounts.SignInThrottled):
        accounts.authenticate(database, "marie", TEST_PASSWORD, now=later, client="198.51.100.7")
    # Her own browser, holding the device cookie of a past sign-in, is counted on its own and gets in.
    assert accounts.authenticate(database, "marie", TEST_PASSWORD, now=later, client="198.51.100.7", device="d1") is not None


def test_one_address_guessing_many_usernames_is_held_up(database, quick_password_hashing):
    t0 = dt.datetime(2026, 3, 2, 9, 0, tzinfo=dt.UTC)
    for i in range(5):
        accounts.authenticate(database, f"ghost{i}", "whatever it is", now=t0, client="192.0.2.5")
    with pytest.raises(accounts.SignInThrottled):
        accounts.authenticate(database, "someone-else", "whatever it is", now=t0, client="192.0.2.5")
    # Another address is not affected.
    assert accounts.authenticate(database, "someone-else", "whatever it is", now=t0, client="192.0.2.6") is None


def test_attempt_log_is_append_only(database, make_user):
    accounts.authenticate(database, "someone", "wrong password")
    import sqlite3

    for sql in ("UPDATE signin_attempts SET succeeded = 1", "DELETE FROM signin_attempts"):
        with pytest.raises(sqlite3.IntegrityError, match="append-only"):
            with dbmod.write(database):
                database.execute(sql)


def test_sign_in_page_shows_the_pause(client, form_token, make_user):
    make_user("lise", "staff")
    for _ in range(5):
        assert _sign_in(client, form_token, "lise", "wrong wrong wrong").status_code == 401
    resp = _sign_in(client, form_token, "lise", TEST_PASSWORD)
    assert resp.status_code == 429 and 1 <= int(resp.headers["Retry-After"]) <= 2
    assert "Too many failed sign-ins" in resp.get_data(as_text=True)


def test_a_device_cookie_from_a_past_sign_in_gets_past_a_flood(app, form_token, make_user):
    make_user("lise", "staff")
    own = app.test_client()
    assert _sign_in(own, form_token, "lise", TEST_PASSWORD).status_code == 303
    assert own.get_cookie("stockroom_device", path="/sign-in") is not None
    own.post("/sign-out", data={"csrf_token": form_token(own, "/")})
    # Guesses from another browser (same test address, no cookie) hold that browser up ...
    other = app.test_client()
    for _ in range(5):
        assert _sign_in(other, form_token, "lise", "wrong wrong wrong").status_code == 401
    assert _sign_in(other, form_token, "lise", TEST_PASSWORD).status_code == 429
    # ... but not her own browser, which signs in at once.
    assert _sign_in(own, form_token, "lise", TEST_PASSWORD).status_code == 303
    # A forged cookie counts for nothing.
    forged = app.test_client()
    forged.set_cookie("stockroom_device", "eyJ1IjoibGlzZSIsImQiOiJ4In0.forged", path="/sign-in")
    assert _sign_in(forged, form_token, "lise", TEST_PASSWORD).status_code == 429


# ---------------------------------------------------------------- the sign-in page and sessions


def test_sign_in_sets_a_fresh_session_and_redirects_to_next(client, form_token, make_user):
    make_user("ada", "staff", display_name="Ada <b>L</b>")
    client.get("/sign-in")
    before = client.get_cookie("session").value
    token = form_token(client, "/sign-in")
    resp = client.post("/sign-in", data={"username": "ada", "password": TEST_PASSWORD, "csrf_token": token, "next": "/batches/"})
    assert resp.status_code == 303 and resp.headers["Location"] == "/batches/"
    assert client.get_cookie("session").value != before
    assert client.get_cookie("session").same_site == "Lax" and client.get_cookie("session").http_only
    page = client.get("/").get_data(as_text=True)
    who = re.search(r'<div class="who">(.*?)</div>', page, re.S).group(1)
    # Display name escaped, role shown, sign-out is a POST form with a CSRF token.
    assert "Ada &lt;b&gt;L&lt;/b&gt; · prep staff" in who
    assert 'action="/sign-out"' in who and 'name="csrf_token"' in who


def test_next_never_leaves_the_site(client, form_token, make_user):
    make_user("ada", "staff")
    token = form_token(client, "/sign-in")
    resp = client.post(
        "/sign-in", data={"username": "ada", "password": TEST_PASSWORD, "csrf_token": token, "next": "//evil.example/x"}
    )
    assert resp.headers["Location"] == "/"
    for bad in ("https://evil.example/", "//evil.example", "/\\evil.example", "relative", ""):
        assert safe_next(bad) is None
    assert safe_next("/batches/?q=NAOH") == "/batches/?q=NAOH"


def test_bad_sign_in_keeps_username_never_password(client, form_token, make_user):
    make_user("ada", "staff")
    token = form_token(client, "/sign-in")
    resp = client.post("/sign-in", data={"username": "ada", "password": "", "csrf_token": token})
    page = resp.get_data(as_text=True)
    assert resp.status_code == 422
    assert re.search(r'id="f-password".*?<span class="field-error"[^>]*>Enter your password', page, re.S)
    assert 'value="ada"' in page
    resp = client.post("/sign-in", data={"username": "ada", "password": "typed-secret-123", "csrf_token": token})
    assert resp.status_code == 401 and "typed-secret-123" not in resp.get_data(as_text=True)


def test_sign_out_ends_the_session_on_the_server(client, form_token, make_user):
    make_user("ada", "staff")
    _sign_in(client, form_token, "ada", TEST_PASSWORD)
    signed_in_cookie = client.get_cookie("session").value
    assert client.get("/account/password").status_code == 200
    resp = client.post("/sign-out", data={"csrf_token": form_token(client, "/")})
    assert resp.status_code == 303 and resp.headers["Location"] == "/sign-in"
    assert client.get("/account/password").status_code == 303
    # A copy of the old cookie no longer signs anyone in.
    client.set_cookie("session", signed_in_cookie)
    assert client.get("/account/password").status_code == 303


def test_disabling_a_user_ends_their_sessions(app, signed_in_client, database, make_user):
    make_user("boss", "admin")
    c = signed_in_client("staff")
    assert c.get("/account/password").status_code == 200
    accounts.disable_user(database, "staff-user", actor="boss")
    resp = c.get("/account/password")
    assert resp.status_code == 303 and resp.headers["Location"].startswith("/sign-in")


def test_session_older_than_the_limit_is_over(database, make_user):
    user = make_user("ada", "staff")
    start = dt.datetime(2026, 3, 2, 8, 0, tzinfo=dt.UTC)
    token = accounts.start_session(database, user, now=start)
    assert accounts.session_user(database, user.id, 0, token, now=start + dt.timedelta(hours=11)) == user
    too_late = start + dt.timedelta(hours=12, seconds=1)
    assert accounts.session_user(database, user.id, 0, token, now=too_late) is None
    assert accounts.session_user(database, user.id, 1, token, now=start) is None  # stale generation
    assert accounts.session_user(database, user.id, 0, "forged", now=start) is None


# ---------------------------------------------------------------- password change


def test_password_change(app, signed_in_client, form_token, database):
    c = signed_in_client("staff")
    other = signed_in_client("staff")  # the same account in another browser
    token = form_token(c, "/account/password")
    new = "seven lanterns on a quiet pier"
    # Wrong current password: 422 beside the field, nothing changed, counted as a failure.
    resp = c.post(
        "/account/password",
        data={"csrf_token": token, "current_password": "not my password", "new_password": new, "confirm_password": new},
    )
    assert resp.status_code == 422
    assert re.search(r'id="f-current_password-error">That is not your current password', resp.get_data(as_text=True))
    assert accounts.authenticate(database, "staff-user", TEST_PASSWORD) is not None
    # Mismatch and a common password: both fields get their message.
    resp = c.post(
        "/account/password",
        data={
            "csrf_token": token,
            "current_password": TEST_PASSWORD,
            "new_password": "password1234",
            "confirm_password": "password12345",
        },
    )
    page = resp.get_data(as_text=True)
    assert resp.status_code == 422 and 'id="f-confirm_password-error"' in page and "commonly used" in page
    resp = c.post(
        "/account/password",
        data={"csrf_token": token, "current_password": TEST_PASSWORD, "new_password": new, "confirm_password": new},
    )
    assert resp.status_code == 303
    assert c.get("/account/password").status_code == 200  # this browser has a fresh session
    assert other.get("/account/password").status_code == 303  # the other one is signed out
    assert accounts.authenticate(database, "staff-user", TEST_PASSWORD) is None
    assert accounts.authenticate(database, "staff-user", new) is not None
    assert len(_events(database, "account.password_change")) == 1


def test_password_change_refuses_same_password(database, make_user):
    user = make_user("ada", "staff")
    with pytest.raises(InvalidInput) as exc:
        accounts.change_password(database, user, TEST_PASSWORD, TEST_PASSWORD)
    assert "different" in exc.value.fields["new_password"]


# ---------------------------------------------------------------- first run


def test_first_run_only_while_no_user_exists(client, form_token, database):
    token = form_token(client, "/first-run")
    bad = client.post(
        "/first-run",
        data={
            "csrf_token": token,
            "username": "lead",
            "display_name": "Lab Lead",
            "password": "qwertyuiop12",
            "confirm_password": "qwertyuiop12",
        },
    )
    assert bad.status_code == 422 and 'value="Lab Lead"' in bad.get_data(as_text=True)
    assert not accounts.has_users(database)
    resp = client.post(
        "/first-run",
        data={
            "csrf_token": token,
            "username": "lead",
            "display_name": "Lab Lead",
            "password": TEST_PASSWORD,
            "confirm_password": TEST_PASSWORD,
        },
    )
    assert resp.status_code == 303
    lead = accounts.user_by_username(database, "lead")
    assert lead.role == "admin"
    assert client.get("/account/password").status_code == 200  # signed in straight away
    assert client.get("/first-run").status_code == 404
    again = client.post(
        "/first-run",
        data={
            "csrf_token": form_token(client, "/"),
            "username": "intruder",
            "display_name": "X",
            "password": TEST_PASSWORD,
            "confirm_password": TEST_PASSWORD,
        },
    )
    assert again.status_code == 404
    assert [u.username for u in accounts.list_users(database)] == ["lead"]
    with pytest.raises(Conflict):
        accounts.create_first_admin(database, "second", "Second", TEST_PASSWORD)


# ---------------------------------------------------------------- access rules


@pytest.fixture
def probe_app(app):
    """The app with two guarded probe routes (added before its first request, as Flask requires)."""
    bp = Blueprint("probe", __name__)

    @bp.post("/probe/record")
    @require("run.record")
    def record():
        return "recorded"

    @bp.post("/api/v1/probe/record")
    @require("run.record")
    def api_record():
        return jsonify({"ok": True})

    app.register_blueprint(bp)
    from stockroom.web import csrf

    csrf.exempt(api_record)
    return app


def test_require_anonymous_wrong_role_and_right_role(probe_app, signed_in_client, form_token, database):
    anon = probe_app.test_client()
    resp = anon.post("/probe/record", data={"csrf_token": form_token(anon, "/sign-in")})
    assert resp.status_code == 303 and resp.headers["Location"].startswith("/sign-in")
    api = anon.post("/api/v1/probe/record")
    assert api.status_code == 401 and api.get_json()["errors"][0]["message"].startswith("Sign in")
    instructor = signed_in_client("instructor")
    resp = instructor.post("/probe/record", data={"csrf_token": form_token(instructor, "/")})
    assert resp.status_code == 403 and "does not allow you to record a standardization run" in resp.get_data(as_text=True)
    refused = _events(database, "access.refused")
    assert len(refused) == 1 and refused[0]["actor"] == "instructor-user"
    for role in ("staff", "admin"):
        c = signed_in_client(role)
        resp = c.post("/probe/record", data={"csrf_token": form_token(c, "/")})
        assert resp.get_data(as_text=True) == "recorded"
    assert probe_app.view_functions["probe.record"].access_rule == "run.record"


def test_require_rejects_an_unknown_permission():
    with pytest.raises(ValueError, match="unknown permission"):
        require("batches.nuke")


def test_closed_reads_need_a_user_except_sign_in_health_and_static(tmp_path, make_user):
    from stockroom import create_app

    app = create_app(
        {
            "DATABASE": str(tmp_path / "closed.db"),
            "TESTING": True,
            "SECRET_KEY": "test-only",
            "LAB_TIMEZONE": "UTC",
            "OPEN_READS": False,
        }
    )
    c = app.test_client()
    assert c.get("/").status_code == 303
    assert c.get("/api/v1/batches").status_code == 401
    for path in ("/sign-in", "/first-run", "/healthz", "/static/stockroom.css"):
        with c.get(path) as resp:  # closes the static file's handle
            assert resp.status_code == 200, path


def test_open_reads_still_refuse_anonymous_writes(client):
    assert client.get("/").status_code == 200
    assert "Sign in</a>" in client.get("/").get_data(as_text=True)


# ---------------------------------------------------------------- CSRF


def test_post_without_csrf_token_is_refused(client, make_user, database):
    make_user("ada", "staff")
    client.get("/sign-in")
    resp = client.post("/sign-in", data={"username": "ada", "password": TEST_PASSWORD})
    assert resp.status_code == 400
    assert database.execute("SELECT count(*) FROM signin_attempts").fetchone()[0] == 0


# ---------------------------------------------------------------- command line


def test_cli_add_user_with_password_from_environment(app, database):
    db_path = app.config["DATABASE"]
    runner = CliRunner(env={"STOCKROOM_PASSWORD": TEST_PASSWORD})
    result = runner.invoke(cli_main, ["add-user", "kim", "--role", "staff", "--display-name", "Kim Park", "--db", db_path])
    assert result.exit_code == 0, result.output
    kim = accounts.user_by_username(database, "kim")
    assert (kim.display_name, kim.role) == ("Kim Park", "staff")
    assert accounts.authenticate(database, "kim", TEST_PASSWORD) == kim
    assert _events(database, "account.create")[0]["actor"].startswith("cli")
    again = runner.invoke(cli_main, ["add-user", "KIM", "--role", "admin", "--db", db_path])
    assert again.exit_code == 1 and "taken" in again.output
    weak = CliRunner(env={"STOCKROOM_PASSWORD": "letmein"}).invoke(
        cli_main, ["add-user", "lee", "--role", "staff", "--db", db_path]
    )
    assert weak.exit_code == 1 and "at least 12" in weak.output
    assert accounts.user_by_username(database, "lee") is None


def test_cli_add_user_prompts_twice_and_disable_user(app, database):
    db_path = app.config["DATABASE"]
    runner = CliRunner(env={"STOCKROOM_PASSWORD": None})
    result = runner.invoke(
        cli_main, ["add-user", "boss", "--role", "admin", "--db", db_path], input=f"{TEST_PASSWORD}\n{TEST_PASSWORD}\n"
    )
    assert result.exit_code == 0, result.output
    assert TEST_PASSWORD not in result.output  # hidden input
    assert accounts.user_by_username(database, "boss").role == "admin"
    runner.invoke(cli_main, ["add-user", "sam", "--role", "staff", "--db", db_path], input=f"{TEST_PASSWORD}\n{TEST_PASSWORD}\n")
    result = runner.invoke(cli_main, ["disable-user", "sam", "--reason", "moved away", "--db", db_path])
    assert result.exit_code == 0, result.output
    assert accounts.user_by_username(database, "sam").active is False
    assert runner.invoke(cli_main, ["disable-user", "nobody", "--db", db_path]).exit_code == 1


def test_cli_set_password(app, database, make_user):
    make_user("ada", "staff")
    new = "seven lanterns on a quiet pier"
    result = CliRunner(env={"STOCKROOM_PASSWORD": new}).invoke(cli_main, ["set-password", "ada", "--db", app.config["DATABASE"]])
    assert result.exit_code == 0, result.output
    assert accounts.authenticate(database, "ada", new) is not None


def test_cli_role_choices_match_accounts():
    command = cli_main.commands["add-user"]
    role = next(p for p in command.params if p.name == "role")
    assert tuple(role.type.choices) == accounts.ROLES
