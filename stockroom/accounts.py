"""Accounts: users, roles and what each may do, password rules and hashing, sign-in with lock-out.

No flask here: the web layer (stockroom.web.account, stockroom.web.access) keeps the cookie; this
module keeps the rows. Times are UTC. Every account change and every failed sign-in appends an
audit event (records.append_event).
"""

from __future__ import annotations

import datetime as dt
import functools
import hashlib
import math
import re
import secrets
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import sqlite_utils
from werkzeug.security import check_password_hash, generate_password_hash

from stockroom import db as dbmod
from stockroom import records, tokens
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound, StockroomError

# ---------------------------------------------------------------- roles and permissions

ROLES: tuple[str, ...] = ("staff", "instructor", "admin")

ROLE_LABELS: dict[str, str] = {"staff": "prep staff", "instructor": "instructor", "admin": "administrator"}

# Permission name -> what it allows, in words a refusal message can show.
PERMISSIONS: dict[str, str] = {
    "read": "read records",
    "batch.register": "register a batch",
    "lot.register": "register a primary-standard lot",
    "run.record": "record a standardization run",
    "run.decide": "accept or reject a run, or exclude a replicate",
    "batch.release": "release a batch",
    "batch.withdraw": "withdraw a batch",
    "stock.dispense": "dispense from a batch into containers, or record its losses",
    "label.print": "print labels",
    "instrument.register": "register an instrument or record its calibration",
    "recall.manage": "mark a lot, instrument or batch as suspect, or clear a recall",
    "labday.lookup": "look up the titrants in use on a lab day",
    "classdata.correct": "correct class data",
    "schedule.edit": "enter, import or cancel lab sessions in the schedule",
    "users.manage": "manage user accounts",
    "policy.edit": "change reagent policy",
    "hazard.edit": "change hazard data",
    "settings.edit": "change settings",
    "account.own": "change one's own password and tokens",
}

_EVERYONE = frozenset({"read", "account.own"})
_STAFF = frozenset(
    {
        "batch.register",
        "lot.register",
        "run.record",
        "run.decide",
        "batch.release",
        "batch.withdraw",
        "stock.dispense",
        "label.print",
        "instrument.register",
        "recall.manage",
        "schedule.edit",
    }
)
_INSTRUCTOR = frozenset({"labday.lookup", "classdata.correct", "schedule.edit"})
_ADMIN = frozenset({"users.manage", "policy.edit", "hazard.edit", "settings.edit"})

# Admin also does prep-staff work and the lab-day look-up (a read); correcting class data stays with
# instructors, whose data it is.
ROLE_PERMISSIONS: dict[str, frozenset[str]] = {
    "staff": _EVERYONE | _STAFF,
    "instructor": _EVERYONE | _INSTRUCTOR,
    "admin": _EVERYONE | _STAFF | _ADMIN | {"labday.lookup"},
}


def role_can(role: str, permission: str) -> bool:
    """Whether a role holds a permission; both are names from ROLES and PERMISSIONS."""
    if permission not in PERMISSIONS:
        raise ValueError(f"unknown permission {permission!r}")
    return permission in ROLE_PERMISSIONS.get(role, frozenset())


@dataclass(frozen=True)
class User:
    """One account as the application sees it (never carries the password hash)."""

    id: int
    username: str
    display_name: str
    role: str
    created_at: str
    disabled_at: str | None
    session_generation: int

    @property
    def active(self) -> bool:
        return self.disabled_at is None

    @property
    def role_label(self) -> str:
        return ROLE_LABELS.get(self.role, self.role)

    def can(self, permission: str) -> bool:
        """Whether this user may do `permission` (a PERMISSIONS name); a disabled user may do nothing."""
        return self.active and role_can(self.role, permission)

    @classmethod
    def from_row(cls, row: dict[str, Any]) -> User:
        return cls(
            id=int(row["id"]),
            username=row["username"],
            display_name=row["display_name"],
            role=row["role"],
            created_at=row["created_at"],
            disabled_at=row["disabled_at"],
            session_generation=int(row["session_generation"]),
        )


# ---------------------------------------------------------------- errors


class SignInRefused(StockroomError):
    """The credentials may be right but this account cannot sign in (it is disabled)."""

    status = 403


class SignInLocked(SignInRefused):
    """Too many recent failures for this username: attempts are paused until `until` (UTC)."""

    status = 429

    def __init__(self, until: dt.datetime, now: dt.datetime):
        minutes = max(1, math.ceil((until - now).total_seconds() / 60))
        super().__init__(
            f"Sign-in for this username is paused after {LOCKOUT_FAILURES} failed attempts. "
            f"Try again in {minutes} minute{'' if minutes == 1 else 's'}, or ask an administrator."
        )
        self.until = until


class SignInThrottled(SignInLocked):
    """Too many recent failures from this client or for this username: try again at `until` (UTC)."""

    def __init__(self, until: dt.datetime, now: dt.datetime):
        seconds = max(1, math.ceil((until - now).total_seconds()))
        wait = f"{seconds} second{'' if seconds == 1 else 's'}" if seconds < 120 else f"{math.ceil(seconds / 60)} minutes"
        SignInRefused.__init__(
            self,
            f"Too many failed sign-ins from this computer or for this username. Try again in {wait}; "
            "a browser you have signed in with before is not held up by guesses made elsewhere.",
        )
        self.until = until
        self.retry_after = seconds


# ---------------------------------------------------------------- passwords

MIN_PASSWORD_LENGTH = 12
# An upper bound keeps a pasted novel from tying up the key-derivation function; far above any passphrase.
MAX_PASSWORD_LENGTH = 200
_COMMON_FILE = Path(__file__).parent / "data" / "common_passwords.txt"
# werkzeug's current default (scrypt:32768:8:1, about 0.1 s a hash). Checking reads the method from the
# stored hash, so a later change here only affects new hashes. The test fixtures lower it for speed.
HASH_METHOD = "scrypt"


@functools.cache
def common_passwords() -> frozenset[str]:
    """The refused common passwords, lower-cased, from data/common_passwords.txt."""
    lines = _COMMON_FILE.read_text(encoding="utf-8").splitlines()
    return frozenset(line.strip().lower() for line in lines if line.strip() and not line.startswith("#"))


def password_problems(password: str, *, username: str = "", display_name: str = "") -> list[str]:
    """Every rule the password breaks, as sentences; empty when it is acceptable.

    Length and a common-password list only, no composition rules (NIST SP 800-63B, 5.1.1.2);
    12 characters is this project's minimum. Characters are counted as Unicode code points.
    """
    problems = []
    if len(password) < MIN_PASSWORD_LENGTH:
        problems.append(
            f"Use at least {MIN_PASSWORD_LENGTH} characters ({len(password)} given); a few unrelated words make a good one."
        )
    elif len(password) > MAX_PASSWORD_LENGTH:
        problems.append(f"Use at most {MAX_PASSWORD_LENGTH} characters.")
    lowered = password.strip().lower()
    if lowered in common_passwords():
        problems.append("That password is on the list of commonly used passwords; choose another.")
    elif lowered and len(set(lowered)) == 1:
        problems.append("A single character repeated is too easy to guess.")
    elif lowered and lowered in {username.strip().lower(), display_name.strip().lower()}:
        problems.append("The password must not be your username or name.")
    return problems


def hash_password(password: str) -> str:
    """A salted hash of the password in werkzeug's format, made with HASH_METHOD."""
    return generate_password_hash(password, method=HASH_METHOD)


@functools.cache
def _decoy_hash(method: str) -> str:
    # Checked when the username is unknown, so an unknown name costs as long as a wrong password.
    return generate_password_hash(secrets.token_hex(16), method=method)


# ---------------------------------------------------------------- users

_USERNAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,39}")


def _now(now: dt.datetime | None) -> dt.datetime:
    return (now or dt.datetime.now(dt.UTC)).astimezone(dt.UTC).replace(microsecond=0)


def _user_row(db: sqlite_utils.Database, username: str) -> dict[str, Any] | None:
    rows = dbmod.query(db, "SELECT * FROM users WHERE username = ?", [username.strip()])
    return rows[0] if rows else None


def has_users(db: sqlite_utils.Database) -> bool:
    """Whether any account exists (the first-run page works only while none does)."""
    return db.execute("SELECT EXISTS (SELECT 1 FROM users)").fetchone()[0] == 1


def user_by_id(db: sqlite_utils.Database, user_id: int) -> User | None:
    """The account with this id, or None."""
    rows = dbmod.query(db, "SELECT * FROM users WHERE id = ?", [user_id])
    return User.from_row(rows[0]) if rows else None


def user_by_username(db: sqlite_utils.Database, username: str) -> User | None:
    """The account with this username (matched without regard to case), or None."""
    row = _user_row(db, username)
    return User.from_row(row) if row else None


def list_users(db: sqlite_utils.Database) -> list[User]:
    """Every account, active ones first, then by username."""
    rows = dbmod.query(db, "SELECT * FROM users ORDER BY disabled_at IS NOT NULL, username")
    return [User.from_row(r) for r in rows]


def validate_new_user(username: str, display_name: str, role: str, password: str) -> list[FieldError]:
    """Every rule a new account's fields break (not whether the username is taken); empty when all pass.

    Fields as in create_user; FieldError.field is username, display_name, role or password.
    """
    errors = []
    if not _USERNAME.fullmatch(username):
        errors.append(
            FieldError("username", "Use 1 to 40 letters, digits, dots, hyphens or underscores, starting with a letter or digit.")
        )
    if not display_name or len(display_name) > 80:
        errors.append(FieldError("display_name", "Give the person's name (1 to 80 characters)."))
    if role not in ROLES:
        errors.append(FieldError("role", f"Role must be one of: {', '.join(ROLES)}."))
    for problem in password_problems(password, username=username, display_name=display_name):
        errors.append(FieldError("password", problem))
    return errors


def create_user(
    db: sqlite_utils.Database,
    username: str,
    display_name: str,
    role: str,
    password: str,
    actor: str,
) -> User:
    """Create an account; InvalidInput naming the field when a rule is broken or the username is taken.

    username: 1-40 of [A-Za-z0-9._-]; display_name: 1-80 characters; role: one of ROLES;
    password: plain text, checked by password_problems and stored only as a hash; actor: who did it.
    """
    username, display_name = username.strip(), " ".join(display_name.split())
    errors = validate_new_user(username, display_name, role, password)
    if errors:
        raise InvalidInput(errors)
    password_hash = hash_password(password)  # outside the write lock: it takes a tenth of a second
    with dbmod.write(db):
        if _user_row(db, username) is not None:
            raise InvalidInput([FieldError("username", f"The username {username!r} is taken.")])
        cur = db.execute(
            "INSERT INTO users (username, display_name, role, password_hash, created_at, session_generation) "
            "VALUES (?, ?, ?, ?, ?, 0)",
            [username, display_name, role, password_hash, dbmod.utc_now()],
        )
        user_id = int(cur.lastrowid or 0)
        records.append_event(
            db,
            actor,
            "account.create",
            entity="users",
            entity_id=user_id,
            detail={"username": username, "role": role, "display_name": display_name},
        )
    found = user_by_id(db, user_id)
    assert found is not None
    return found


def create_first_admin(db: sqlite_utils.Database, username: str, display_name: str, password: str) -> User:
    """Create the first administrator; Conflict once any account exists (checked inside the write)."""
    with dbmod.write(db):
        if has_users(db):
            raise Conflict("An account already exists; the first-run set-up is closed.")
        return create_user(db, username, display_name, "admin", password, actor=username.strip() or "first-run")


def _end_sessions(db: sqlite_utils.Database, user_id: int, now: str) -> None:
    db.execute("UPDATE web_sessions SET ended_at = ? WHERE user_id = ? AND ended_at IS NULL", [now, user_id])


def disable_user(db: sqlite_utils.Database, username: str, actor: str, reason: str = "") -> User:
    """Disable an account and end all its sessions at once.

    NotFound for an unknown username; Conflict if it is already disabled or the last active admin.
    actor: who did it; reason: why, for the audit trail.
    """
    with dbmod.write(db):
        row = _user_row(db, username)
        if row is None:
            raise NotFound(f"no user named {username!r}")
        if row["disabled_at"] is not None:
            raise Conflict(f"{row['username']} is already disabled.")
        if row["role"] == "admin":
            admins = db.execute("SELECT count(*) FROM users WHERE role = 'admin' AND disabled_at IS NULL")
            if admins.fetchone()[0] <= 1:
                raise Conflict("This is the last active administrator; make another admin first.")
        now = dbmod.utc_now()
        db.execute("UPDATE users SET disabled_at = ?, session_generation = session_generation + 1 WHERE id = ?", [now, row["id"]])
        _end_sessions(db, row["id"], now)
        records.append_event(
            db, actor, "account.disable", entity="users", entity_id=row["id"], reason=reason, detail={"username": row["username"]}
        )
    found = user_by_id(db, row["id"])
    assert found is not None
    return found


def _store_password(db: sqlite_utils.Database, user_id: int, password_hash: str) -> None:
    # A new generation ends every session signed before the change (other browsers included).
    db.execute(
        "UPDATE users SET password_hash = ?, session_generation = session_generation + 1 WHERE id = ?", [password_hash, user_id]
    )
    _end_sessions(db, user_id, dbmod.utc_now())


def change_password(
    db: sqlite_utils.Database,
    user: User,
    current: str,
    new: str,
    *,
    now: dt.datetime | None = None,
) -> User:
    """Change one's own password given the current one; every session and live API token of the user ends.

    A wrong current password counts as a failed sign-in (same lock-out). InvalidInput names the
    field (current_password or new_password); SignInLocked while attempts are paused.
    """
    moment = _now(now)
    until = lockout_until(db, user.username, moment)
    if until is not None:
        raise SignInLocked(until, moment)
    row = _user_row(db, user.username)
    if row is None or row["id"] != user.id or row["disabled_at"] is not None:
        raise SignInRefused("This account is disabled.")
    errors = []
    current_ok = check_password_hash(row["password_hash"], current)
    if not current_ok:
        errors.append(FieldError("current_password", "That is not your current password."))
    for problem in password_problems(new, username=row["username"], display_name=row["display_name"]):
        errors.append(FieldError("new_password", problem))
    if current_ok and new == current:
        errors.append(FieldError("new_password", "Choose a password different from the current one."))
    if not current_ok:
        _record_failure(db, row["username"], moment, row, "wrong current password at password change")
    if errors:
        raise InvalidInput(errors)
    password_hash = hash_password(new)
    with dbmod.write(db):
        _store_password(db, row["id"], password_hash)
        records.append_event(db, row["username"], "account.password_change", entity="users", entity_id=row["id"])
        tokens.revoke_all_for(db, row["id"], row["username"], "password changed")
    found = user_by_id(db, row["id"])
    assert found is not None
    return found


def set_password(db: sqlite_utils.Database, username: str, new: str, actor: str) -> User:
    """Set a user's password without the current one (administrator or command line); ends their sessions and tokens."""
    row = _user_row(db, username)
    if row is None:
        raise NotFound(f"no user named {username!r}")
    problems = password_problems(new, username=row["username"], display_name=row["display_name"])
    if problems:
        raise InvalidInput([FieldError("password", p) for p in problems])
    password_hash = hash_password(new)
    with dbmod.write(db):
        _store_password(db, row["id"], password_hash)
        records.append_event(
            db, actor, "account.password_reset", entity="users", entity_id=row["id"], detail={"username": row["username"]}
        )
        tokens.revoke_all_for(db, row["id"], actor, f"password of {row['username']} reset")
    found = user_by_id(db, row["id"])
    assert found is not None
    return found


# ---------------------------------------------------------------- sign-in and lock-out

LOCKOUT_FAILURES = 5
LOCKOUT_WINDOW = dt.timedelta(minutes=15)
LOCKOUT_PAUSE = dt.timedelta(minutes=15)
# Sign-in throttling (what authenticate applies; lockout_until above is kept for the password change).
# Each key (a client address, a username, a device) has its failures since its last success counted;
# the first THROTTLE_FREE are free, then the key waits THROTTLE_BASE after its latest failure, doubling
# with each further failure up to THROTTLE_MAX. Nothing sleeps: a throttled attempt is answered at once
# (429 with Retry-After) and writes nothing.
THROTTLE_FREE = 5
THROTTLE_BASE = dt.timedelta(seconds=2)
THROTTLE_MAX = dt.timedelta(minutes=15)


def backoff(failures: int) -> dt.timedelta:
    """How long a key waits after its latest failure, given its failures since its last success."""
    if failures < THROTTLE_FREE:
        return dt.timedelta(0)
    return min(THROTTLE_MAX, THROTTLE_BASE * 2 ** min(failures - THROTTLE_FREE, 20))


def throttle_keys(username: str, client: str, device: str | None) -> tuple[str, ...]:
    """The keys an attempt is counted under.

    A browser holding a device cookie from a past successful sign-in to this username (device: its
    id) is counted on its own: guesses from elsewhere, which raise the username's and their own
    address's counts, do not slow it down. Without one, the client address and the username count.
    """
    if device:
        return (f"device:{device}",)
    return (f"address:{client}", f"account:{username.strip().lower()[:80]}")


def throttle_until(db: sqlite_utils.Database, keys: Iterable[str], now: dt.datetime | None = None) -> dt.datetime | None:
    """When the slowest of these keys may try again (UTC), or None if none is waiting."""
    moment = _now(now)
    keys = list(keys)
    if not keys:
        return None
    marks = ",".join("?" * len(keys))
    rows = dbmod.query(db, f"SELECT failures, last_failure FROM signin_throttle WHERE key IN ({marks})", keys)
    waits = [dt.datetime.fromisoformat(r["last_failure"]) + backoff(r["failures"]) for r in rows]
    until = max(waits, default=None)
    return until if until is not None and moment < until else None


def _count_failure(db: sqlite_utils.Database, keys: Iterable[str], moment: dt.datetime) -> None:
    for key in keys:
        db.execute(
            "INSERT INTO signin_throttle (key, failures, last_failure) VALUES (?, 1, ?) "
            "ON CONFLICT (key) DO UPDATE SET failures = failures + 1, last_failure = excluded.last_failure",
            [key, moment.isoformat()],
        )


def _clear_failures(db: sqlite_utils.Database, keys: Iterable[str]) -> None:
    keys = list(keys)
    db.execute(f"DELETE FROM signin_throttle WHERE key IN ({','.join('?' * len(keys))})", keys)


def lockout_until(
    db: sqlite_utils.Database,
    username: str,
    now: dt.datetime | None = None,
) -> dt.datetime | None:
    """When sign-in for this username resumes (UTC), or None if it is not paused.

    Paused for LOCKOUT_PAUSE after the LOCKOUT_FAILURES-th failure within LOCKOUT_WINDOW, counting
    only failures since the last successful sign-in. Attempts refused during a pause are not counted,
    so the pause does not extend itself.
    """
    moment = _now(now)
    rows = dbmod.query(
        db,
        "SELECT occurred_at, succeeded FROM signin_attempts WHERE username = ? ORDER BY id DESC LIMIT ?",
        [username.strip()[:80], LOCKOUT_FAILURES],
    )
    failures = []
    for r in rows:
        if r["succeeded"]:
            break
        failures.append(dt.datetime.fromisoformat(r["occurred_at"]))
    if len(failures) < LOCKOUT_FAILURES or failures[0] - failures[-1] > LOCKOUT_WINDOW:
        return None
    until = failures[0] + LOCKOUT_PAUSE
    return until if moment < until else None


def _record_attempt(
    db: sqlite_utils.Database,
    username: str,
    moment: dt.datetime,
    *,
    succeeded: bool,
) -> None:
    db.execute(
        "INSERT INTO signin_attempts (username, occurred_at, succeeded) VALUES (?, ?, ?)",
        [username[:80], moment.isoformat(), int(succeeded)],
    )


def _record_failure(
    db: sqlite_utils.Database,
    username: str,
    moment: dt.datetime,
    row: dict[str, Any] | None,
    why: str,
    keys: Iterable[str] = (),
) -> None:
    with dbmod.write(db):
        _record_attempt(db, username, moment, succeeded=False)
        _count_failure(db, keys, moment)
        records.append_event(
            db,
            "anonymous",
            "account.signin_failed",
            entity="users",
            entity_id=row["id"] if row else None,
            detail={"username": username[:80], "why": why},
        )


def authenticate(
    db: sqlite_utils.Database,
    username: str,
    password: str,
    *,
    now: dt.datetime | None = None,
    client: str = "",
    device: str | None = None,
) -> User | None:
    """The user whose username and password these are, or None; records the attempt.

    username: matched without regard to case; now: the attempt's time (UTC; the clock when None);
    client: the client's address; device: the id from a device cookie this browser got at a past
    successful sign-in to this username (None without one; see throttle_keys). Raises
    SignInThrottled at once, writing nothing, while the attempt's keys wait; SignInRefused for a
    disabled account given its right password. The password hash is checked even for an unknown
    username.
    """
    moment = _now(now)
    username = username.strip()
    keys = throttle_keys(username, client, device)
    until = throttle_until(db, keys, moment)
    if until is not None:
        raise SignInThrottled(until, moment)
    row = _user_row(db, username) if len(username) <= 40 else None
    ok = check_password_hash(row["password_hash"] if row else _decoy_hash(HASH_METHOD), password)
    if not (row and ok):
        _record_failure(db, username, moment, row, "wrong password" if row else "unknown username", keys)
        return None
    if row["disabled_at"] is not None:
        _record_failure(db, username, moment, row, "account disabled", keys)
        raise SignInRefused("This account is disabled; ask an administrator.")
    with dbmod.write(db):
        _record_attempt(db, row["username"], moment, succeeded=True)
        # Only the keys this attempt counted under: a known browser's success leaves a guesser's counts.
        _clear_failures(db, keys)
        records.append_event(db, row["username"], "account.signin", entity="users", entity_id=row["id"])
    return User.from_row(row)


# ---------------------------------------------------------------- browser sessions

# A session ends at sign-out, at a password change, when the user is disabled, or after this long.
SESSION_MAX_AGE = dt.timedelta(hours=12)


def _token_hash(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def start_session(db: sqlite_utils.Database, user: User, *, now: dt.datetime | None = None) -> str:
    """Open a server-side session for a signed-in user; return the random token the cookie carries."""
    token = secrets.token_urlsafe(32)
    with dbmod.write(db):
        db.execute(
            "INSERT INTO web_sessions (token_hash, user_id, generation, started_at) VALUES (?, ?, ?, ?)",
            [_token_hash(token), user.id, user.session_generation, _now(now).isoformat()],
        )
    return token


def session_user(
    db: sqlite_utils.Database,
    user_id: Any,
    generation: Any,
    token: Any,
    *,
    now: dt.datetime | None = None,
) -> User | None:
    """The user a cookie's (user id, generation, token) still stands for, or None if that session is over."""
    if not isinstance(token, str) or not isinstance(user_id, int) or not isinstance(generation, int):
        return None
    rows = dbmod.query(
        db,
        "SELECT u.*, s.generation AS s_generation, s.started_at AS s_started, s.ended_at AS s_ended "
        "FROM web_sessions s JOIN users u ON u.id = s.user_id WHERE s.token_hash = ? AND u.id = ?",
        [_token_hash(token), user_id],
    )
    if not rows:
        return None
    r = rows[0]
    if (
        r["s_ended"] is not None
        or r["disabled_at"] is not None
        or r["session_generation"] != generation
        or r["s_generation"] != generation
        or _now(now) - dt.datetime.fromisoformat(r["s_started"]) > SESSION_MAX_AGE
    ):
        return None
    return User.from_row(r)


def end_session(db: sqlite_utils.Database, token: Any, actor: str) -> None:
    """End one server-side session (sign-out); a cookie replayed afterwards signs nobody in."""
    if not isinstance(token, str):
        return
    with dbmod.write(db):
        cur = db.execute(
            "UPDATE web_sessions SET ended_at = ? WHERE token_hash = ? AND ended_at IS NULL",
            [dbmod.utc_now(), _token_hash(token)],
        )
        if cur.rowcount:
            records.append_event(db, actor, "account.signout")
