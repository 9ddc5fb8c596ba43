"""Per-user API tokens: made and revoked by their owner, stored only as a SHA-256 digest."""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import parsing, records
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound

PREFIX = "srt_"


@dataclass(frozen=True)
class Token:
    """One token as listed to its owner (the secret itself is shown once, when made)."""

    id: int
    user_id: int
    label: str
    shown_prefix: str
    created_at: str
    revoked_at: str | None


def _digest(secret: str) -> str:
    return hashlib.sha256(secret.encode("utf-8")).hexdigest()


def create(db: sqlite_utils.Database, user_id: int, username: str, label: str) -> tuple[Token, str]:
    """Make a token for a user; return it and its secret (shown once, never stored in clear)."""
    label = (label or "").strip()
    problem = parsing.text_problem(label)  # a NUL or control character: SQLite would read the name as empty
    if problem:
        raise InvalidInput([FieldError("label", problem)])
    if not label or len(label) > 80:
        raise InvalidInput(
            [FieldError("label", "give the token a name of 1 to 80 characters, e.g. the program that will use it")]
        )
    secret = PREFIX + secrets.token_urlsafe(32)
    with dbmod.write(db):
        now = dbmod.utc_now()
        token_id = dbmod.insert_row(
            db,
            "api_tokens",
            {"user_id": user_id, "label": label, "token_sha256": _digest(secret), "shown_prefix": secret[:10], "created_at": now},
        )
        records.append_event(
            db, username, "token.create", entity="api_tokens", entity_id=token_id, detail={"label": label, "prefix": secret[:10]}
        )
    return Token(token_id, user_id, label, secret[:10], now, None), secret


def list_for(db: sqlite_utils.Database, user_id: int) -> list[Token]:
    """A user's tokens, newest first, revoked ones included."""
    rows = dbmod.query(
        db,
        "SELECT t.*, r.revoked_at FROM api_tokens t LEFT JOIN api_token_revocations r "
        "ON r.token_id = t.id WHERE t.user_id = ? ORDER BY t.id DESC",
        [user_id],
    )
    return [Token(r["id"], r["user_id"], r["label"], r["shown_prefix"], r["created_at"], r["revoked_at"]) for r in rows]


def _revoke_one(db: sqlite_utils.Database, token_id: int, actor: str, reason: str = "") -> None:
    """Record one token's revocation and its audit entry (inside a write)."""
    dbmod.insert_row(db, "api_token_revocations", {"token_id": token_id, "revoked_at": dbmod.utc_now(), "revoked_by": actor})
    records.append_event(db, actor, "token.revoke", entity="api_tokens", entity_id=token_id, reason=reason)


def revoke(db: sqlite_utils.Database, token_id: int, user_id: int, username: str) -> None:
    """Revoke one of the user's own tokens; it stops working at once."""
    with dbmod.write(db):
        rows = dbmod.query(
            db,
            "SELECT t.id, r.id AS rid FROM api_tokens t LEFT JOIN api_token_revocations r "
            "ON r.token_id = t.id WHERE t.id = ? AND t.user_id = ?",
            [token_id, user_id],
        )
        if not rows:
            raise NotFound("you have no token with that number")
        if rows[0]["rid"] is not None:
            raise Conflict("that token is already revoked")
        _revoke_one(db, token_id, username)


def revoke_all_for(db: sqlite_utils.Database, user_id: int, actor: str, reason: str) -> list[int]:
    """Revoke every live token of a user (their password changed or was reset); return the ids revoked.

    A token stands in for its owner's password: whoever took the old password may have made one, so
    a new password ends them all, each with its own audit entry giving `reason`.
    """
    with dbmod.write(db):
        live = [
            int(r["id"])
            for r in dbmod.query(
                db,
                "SELECT t.id FROM api_tokens t LEFT JOIN api_token_revocations r ON r.token_id = t.id "
                "WHERE t.user_id = ? AND r.id IS NULL ORDER BY t.id",
                [user_id],
            )
        ]
        for token_id in live:
            _revoke_one(db, token_id, actor, reason)
    return live


def user_id_for(db: sqlite_utils.Database, secret: str) -> int | None:
    """The owner of a live (unrevoked) token, or None."""
    if not secret.startswith(PREFIX) or len(secret) > 200:
        return None
    rows = dbmod.query(
        db,
        "SELECT t.user_id FROM api_tokens t LEFT JOIN api_token_revocations r ON r.token_id = "
        "t.id WHERE t.token_sha256 = ? AND r.id IS NULL",
        [_digest(secret)],
    )
    return int(rows[0]["user_id"]) if rows else None


def bearer(headers: Any) -> str | None:
    """The token of an `Authorization: Bearer …` header, or None."""
    value = headers.get("Authorization", "")
    if value[:7].lower() == "bearer ":
        return value[7:].strip()
    return None
