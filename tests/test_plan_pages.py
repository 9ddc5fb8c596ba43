"""The prep plan read from the records: page, GET /api/v1/plan, and low stock on the front page.

Invented figures worked by hand: a 20 L batch with 15 L dispensed leaves 5 L; sessions of 3 L and
4 L leave the second 2 L short; the lead time (2 + 3 days by default) puts "make by" 5 days earlier.
"""

from __future__ import annotations

import datetime as dt

import pytest
import ux_world

from stockroom import db as dbmod
from stockroom.records import lab_sessions
from stockroom.schedule_input import SessionInput

TODAY = ux_world.today()


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


def _dispense(conn, batch_id, litres, on, course="CHM 110", section="A"):
    return dbmod.insert_row(
        conn,
        "containers",
        {
            "code": f"BB-{batch_id}-{on.isoformat()}-{section}",
            "batch_id": batch_id,
            "kind": "bench bottle",
            "volume_l": litres,
            "filled_on": on.isoformat(),
            "expires_on": (on + dt.timedelta(days=60)).isoformat(),
            "room": "214",
            "course": course,
            "section": section,
            "recorded_at": "x",
            "recorded_by": "setup",
        },
    )


@pytest.fixture
def world(app, conn):
    lot = ux_world.make_lot(conn)
    batch = ux_world.make_batch(conn)
    ux_world.released(conn, app.config, batch, lot)
    _dispense(conn, batch["id"], 15.0, TODAY - dt.timedelta(days=1))
    for days, litres, section in ((3, 3.0, "A"), (10, 4.0, "B")):
        lab_sessions.add_session(
            conn, SessionInput(TODAY + dt.timedelta(days=days), "CHM 110", section, "214", "NaOH", 0.1, litres, ""), "setup"
        )
    return batch


def test_plan_api_figures(client, world):
    body = client.get(f"/api/v1/plan?from={TODAY.isoformat()}&to={(TODAY + dt.timedelta(days=30)).isoformat()}").get_json()
    assert body["lead_time_days"] == 5
    (t,) = body["titrants"]
    assert (t["titrant"], t["nominal_molarity"]) == ("NaOH", 0.1)
    assert t["in_force_now_l"] == pytest.approx(5.0)
    assert [s["in_force_l"] for s in t["sessions"]] == pytest.approx([5.0, 2.0])
    assert [s["short_l"] for s in t["sessions"]] == pytest.approx([0.0, 2.0])
    assert t["sessions"][0]["draws"] == [{"batch_id": world["code"], "volume_l": 3.0}]
    assert t["shortfall_on"] == (TODAY + dt.timedelta(days=10)).isoformat()
    assert t["make_new_batch_by"] == (TODAY + dt.timedelta(days=5)).isoformat()
    assert t["late"] is False
    assert t["sessions"][1]["destination"] == "CHM 110 · section B · room 214"


def test_plan_api_validates_the_window(client):
    bad = client.get("/api/v1/plan?from=2027-02-30&to=soon")
    assert bad.status_code == 422
    assert {e["field"] for e in bad.get_json()["errors"]} == {"from", "to"}
    backwards = client.get(f"/api/v1/plan?from={TODAY.isoformat()}&to={(TODAY - dt.timedelta(days=1)).isoformat()}")
    assert backwards.status_code == 422 and backwards.get_json()["errors"][0]["field"] == "to"
    assert client.get("/api/v1/plan?start=2027-01-01").status_code == 422
    assert (
        client.get(f"/api/v1/plan?from={TODAY.isoformat()}&to={(TODAY + dt.timedelta(days=500)).isoformat()}").status_code == 422
    )


def test_a_cancelled_session_is_no_demand(client, conn, world):
    sid = lab_sessions.sessions_between(conn, TODAY, TODAY + dt.timedelta(days=30))[1]["id"]
    lab_sessions.cancel_session(conn, sid, "section merged", "setup")
    (t,) = client.get("/api/v1/plan").get_json()["titrants"]
    assert t["shortfall_on"] is None and t["demand_l"] == pytest.approx(3.0)


def test_plan_page_and_low_stock_on_today(client, world):
    page = client.get("/plan").get_data(as_text=True)
    shortfall = (TODAY + dt.timedelta(days=10)).isoformat()
    make_by = (TODAY + dt.timedelta(days=5)).isoformat()
    assert f"First shortfall on <strong>{shortfall}</strong>, 2.00 L lacking" in page
    assert f"Make a new batch by {make_by}" in page
    assert "Lead time 5 days (2 to make up a batch, 3 to standardize and release it)" in page
    # Making up NaOH: the usual cautions, deferring to the SDS and the local rules (preparation.cautions_for).
    assert "Making up NaOH" in page and "safety data sheet" in page
    front = client.get("/").get_data(as_text=True)
    assert "Low stock" in front and f"short from {shortfall}" in front and f"make a new batch by {make_by}" in front
    assert client.get("/plan?from=nope").status_code == 422


def test_low_stock_waits_until_the_shortfall_is_near(app, client, world):
    # Shortfall in 10 days; lead 5 + notice 4 = 9 days: not yet named.
    app.config["LOW_STOCK_NOTICE_DAYS"] = 4
    assert "Low stock" not in client.get("/").get_data(as_text=True)
    app.config["LOW_STOCK_NOTICE_DAYS"] = 5
    assert "Low stock" in client.get("/").get_data(as_text=True)


def test_the_demo_term_schedule_shows_one_coming_shortfall(tmp_path):
    from stockroom import planning, settings
    from stockroom.demo import DEMO_SHORT, DEMO_SHORT_FROM_DAY, build_demo

    day = dt.date(2026, 12, 3)
    lines = build_demo(str(tmp_path / "demo.db"), today=day, password="demo-Test-7c1e")
    conn = dbmod.connect(tmp_path / "demo.db")
    try:
        lead = planning.lead_days(settings.resolve({"DATABASE": str(tmp_path / "demo.db"), "SECRET_KEY": "t"}))
        plan = planning.build_plan(conn, today=day, start=day, end=day + dt.timedelta(weeks=8), lead=lead)
        sessions = lab_sessions.sessions_between(conn, day - dt.timedelta(weeks=2), day + dt.timedelta(weeks=8))
        assert {s["notes"] for s in sessions} == {"invented term schedule (demo)"}  # marked as invented
    finally:
        conn.close()
    short = [t for t in plan.titrants if t.short]
    assert [(t.reagent, t.nominal_molarity) for t in short] == [DEMO_SHORT]
    (t,) = short
    assert day + dt.timedelta(days=DEMO_SHORT_FROM_DAY) <= t.shortfall_on <= day + dt.timedelta(days=DEMO_SHORT_FROM_DAY + 6)
    assert t.make_by == t.shortfall_on - dt.timedelta(days=lead) and not t.late
    assert any("runs short on" in line for line in lines)
    assert len(plan.titrants) == 2  # the other titrant's sessions stay within what is in force
