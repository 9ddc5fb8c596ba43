"""API tokens end with their owner's password: a change or a reset revokes every live token at once."""

from __future__ import annotations

import datetime as dt
import json

import pytest

from stockroom import accounts, tokens
from stockroom import db as dbmod
from stockroom.errors import InvalidInput

TEST_PASSWORD = "violet kettle under the stairs"  # the password conftest.signed_in_client gives (invented)

NEW_PASSWORD = "copper lantern beside the quarry"  # invented; long, and not on the common list


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


def _post_batch(client, token):
    body = {
        "reagent": "NaOH",
        "nominal_molarity": 0.1,
        "volume_l": 20,
        "prepared_on": dt.date.today().isoformat(),
        "prepared_by": "Token Person (invented)",
        "water_grade": "boiled, CO2-free",
    }
    return client.post(
        "/api/v1/batches", headers={"Authorization": f"Bearer {token}"}, data=json.dumps(body), content_type="application/json"
    )


def _revocations(conn, user_id):
    rows = conn.execute(
        "SELECT e.actor, e.entity_id, e.reason FROM events e JOIN api_tokens t ON t.id = e.entity_id "
        "WHERE e.action = 'token.revoke' AND e.entity = 'api_tokens' AND t.user_id = ? ORDER BY e.id",
        [user_id],
    )
    return [tuple(r) for r in rows]


def test_changing_ones_password_ends_every_live_token_at_once(client, conn, make_user):
    user = make_user("tok-staff", "staff")
    other = make_user("tok-other", "staff")
    first, secret_1 = tokens.create(conn, user.id, user.username, "balance script")
    second, secret_2 = tokens.create(conn, user.id, user.username, "spreadsheet")
    already, _ = tokens.create(conn, user.id, user.username, "old laptop")
    tokens.revoke(conn, already.id, user.id, user.username)
    _, others_secret = tokens.create(conn, other.id, other.username, "someone else's")
    assert _post_batch(client, secret_1).status_code == 201

    accounts.change_password(conn, user, TEST_PASSWORD, NEW_PASSWORD)

    # Both live tokens stop working on the very next request; the other user's token is untouched.
    assert tokens.user_id_for(conn, secret_1) is None and tokens.user_id_for(conn, secret_2) is None
    assert _post_batch(client, secret_1).status_code == 401
    assert _post_batch(client, secret_2).status_code == 401
    assert tokens.user_id_for(conn, others_secret) == other.id
    # One audit entry per token ended, by the user, with the reason; the token revoked before gets none more.
    assert _revocations(conn, user.id) == [
        ("tok-staff", already.id, ""),
        ("tok-staff", first.id, "password changed"),
        ("tok-staff", second.id, "password changed"),
    ]
    assert all(t.revoked_at is not None for t in tokens.list_for(conn, user.id))
    # A token made after the change works.
    _, fresh = tokens.create(conn, user.id, user.username, "new script")
    assert _post_batch(client, fresh).status_code == 201


def test_a_reset_by_an_administrator_ends_the_tokens_too(client, conn, make_user):
    user = make_user("tok-reset", "staff")
    token, secret = tokens.create(conn, user.id, user.username, "script")
    accounts.set_password(conn, "tok-reset", NEW_PASSWORD, "cli:admin")
    assert tokens.user_id_for(conn, secret) is None
    assert _post_batch(client, secret).status_code == 401
    assert _revocations(conn, user.id) == [("cli:admin", token.id, "password of tok-reset reset")]
    revoked_by = conn.execute("SELECT revoked_by FROM api_token_revocations WHERE token_id = ?", [token.id]).fetchone()[0]
    assert revoked_by == "cli:admin"


def test_a_refused_password_change_leaves_the_tokens_alive(conn, make_user):
    user = make_user("tok-keep", "staff")
    _, secret = tokens.create(conn, user.id, user.username, "script")
    with pytest.raises(InvalidInput):
        accounts.change_password(conn, user, "not the current one", NEW_PASSWORD, now=dt.datetime.now(dt.UTC))
    assert tokens.user_id_for(conn, secret) == user.id
    assert _revocations(conn, user.id) == []


@pytest.mark.parametrize("label", ["\x00reason", "bench\x07script", "two\nlines"])
def test_a_token_name_with_control_characters_is_refused_and_nothing_stored(conn, make_user, label):
    # Found by the write-route fuzzer: SQLite reads text up to a NUL, so "\x00reason" met the table's
    # non-empty check as empty and answered 500.
    user = make_user("ctrl-user", "staff")
    with pytest.raises(InvalidInput) as exc:
        tokens.create(conn, user.id, user.username, label)
    assert exc.value.errors[0].field == "label"
    assert conn.execute("SELECT count(*) FROM api_tokens").fetchone()[0] == 0
