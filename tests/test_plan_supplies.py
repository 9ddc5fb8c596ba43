"""The prep plan reads only the batches that may still serve: the SQL filter agrees with the status rule."""

from __future__ import annotations

import datetime as dt

from stockroom import db as dbmod
from stockroom import planning
from stockroom.demo import build_demo
from stockroom.policy import Status, status_on
from stockroom.readmodel import facts_of

ENDED = {Status.WITHDRAWN, Status.REGISTERED_IN_ERROR, Status.EXPIRED}


def test_supplies_leave_out_exactly_the_batches_that_cannot_serve_again(tmp_path, quick_password_hashing):
    path = tmp_path / "demo.db"
    build_demo(str(path), password="demo-Test-5e1f")
    conn = dbmod.connect(path)
    try:
        everything = {r["id"]: r for r in dbmod.query(conn, "SELECT id, code, reagent FROM batches")}
        facts = facts_of(conn, list(everything))
        for today in (dt.date.today(), dt.date.today() + dt.timedelta(days=120)):
            got = {s.code for s in planning.supplies(conn, {r["reagent"] for r in everything.values()}, today)}
            # A batch withdrawn, registered in error or expired on `today` stays so on every later day
            # (stockroom.policy.status_on): the plan need not read it; every other batch it must.
            ended = {r["code"] for i, r in everything.items() if status_on(facts[i], today).status in ENDED}
            assert got == {r["code"] for r in everything.values()} - ended
        assert ended  # the demo has batches that ended (expired, withdrawn), so the filter is exercised
    finally:
        conn.close()
