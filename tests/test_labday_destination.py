"""The lab-day look-up asked for a destination: the batch that course and section actually received.

Two invented NaOH batches are in force on the same day; section A's bench bottles came from the first,
section B's from the second. The look-up, its JSON, its sheet and the class-data correction name the
batch each section received, and fall back, saying so, where nothing was dispensed.
"""

from __future__ import annotations

import datetime as dt
import io
import json

import pytest
import ux_world

from stockroom import db as dbmod
from stockroom import labday as ld
from stockroom import schedule_input
from stockroom.errors import InvalidInput
from stockroom.parsing import Parser

TODAY = ux_world.today()
CLASS = "group,aliquot_ml,titrant_ml,ratio\nbench 1,25.00,24.62,1:1\n"


@pytest.fixture
def world(app):
    conn = dbmod.connect(app.config["DATABASE"])
    lot = ux_world.make_lot(conn)
    first, second = ux_world.make_batch(conn), ux_world.make_batch(conn)
    for b in (first, second):
        ux_world.released(conn, app.config, b, lot)
    for n, (b, section) in enumerate(((first, "A"), (second, "B"))):
        dbmod.insert_row(
            conn,
            "containers",
            {
                "code": f"BB-TEST-{n}",
                "batch_id": b["id"],
                "kind": "bench bottle",
                "volume_l": 1.0,
                "filled_on": (TODAY - dt.timedelta(days=1)).isoformat(),
                "expires_on": (TODAY + dt.timedelta(days=30)).isoformat(),
                "room": "214",
                "course": "CHM 110",
                "section": section,
                "recorded_at": "x",
                "recorded_by": "setup",
            },
        )
    conn.close()
    return first["code"], second["code"]


def _ask(client, destination):
    q = {"date": TODAY.isoformat(), "titrant": "NaOH", "destination": destination}
    return client.get("/api/v1/lab-day", query_string=q)


@pytest.mark.parametrize(
    ("raw", "expected"),
    [("CHM 110/B", ("CHM 110", "B")), (" chm 110 ", ("chm 110", "")), ("CHM 110/", ("CHM 110", ""))],
)
def test_a_destination_is_course_slash_section(raw, expected):
    assert schedule_input.read_destination(Parser(), raw) == expected


@pytest.mark.parametrize(
    ("raw", "message"), [("/B", "names no course"), ("A/B/C", "more than one '/'"), ("C" * 41, "at most 40")]
)
def test_a_bad_destination_names_the_rule(raw, message):
    p = Parser()
    assert schedule_input.read_destination(p, raw) is None
    assert p.errors[0].field == "destination" and message in p.errors[0].message


def test_json_names_the_batch_the_section_received(client, world):
    first, second = world
    plain = client.get("/api/v1/lab-day", query_string={"date": TODAY.isoformat(), "titrant": "NaOH"}).get_json()
    assert sorted(b["batch_id"] for b in plain["batches"]) == sorted([first, second])
    body = _ask(client, "CHM 110/B").get_json()
    assert [b["batch_id"] for b in body["batches"]] == [second]
    assert body["received"] is True
    assert body["destination"] == {"course": "CHM 110", "section": "B", "text": "CHM 110 · section B"}
    assert [(c["id"], c["batch_id"]) for c in body["containers"]] == [("BB-TEST-1", second)]
    assert body["batches"][0]["use_molarity"] is not None
    whole_course = _ask(client, "chm 110").get_json()
    assert sorted(b["batch_id"] for b in whole_course["batches"]) == sorted([first, second])


def test_nothing_dispensed_falls_back_and_says_so(client, world):
    body = _ask(client, "CHM 999/A").get_json()
    assert body["received"] is False and body["containers"] == []
    assert len(body["batches"]) == 2
    assert body["destination_note"].startswith("No NaOH dispensed to CHM 999 · section A was in use on")
    assert _ask(client, "/A").status_code == 422


def test_page_and_sheet_answer_for_the_destination(client, world):
    _, second = world
    page = client.get("/lab-day", query_string={"date": TODAY.isoformat(), "titrant": "NaOH", "destination": "CHM 110/B"})
    html = page.get_data(as_text=True)
    assert page.status_code == 200 and "CHM 110 · section B had in use on" in html
    assert html.count('class="panel labday-entry') == 1 and f'id="entry-{second}"' in html
    sheet = client.get("/lab-day.pdf", query_string={"date": TODAY.isoformat(), "titrant": "NaOH", "destination": "CHM 110/B"})
    assert sheet.status_code == 200 and sheet.data.startswith(b"%PDF")


def test_the_correction_picks_the_received_batch(app, world, signed_in_client, form_token):
    first, second = world
    c = signed_in_client("instructor")
    token = form_token(c, "/lab-day/correct")

    def post(**extra):
        data = {"csrf_token": token, "lab_day": TODAY.isoformat(), "titrant": "NaOH", "bench_temperature_c": "", **extra}
        data["sheet"] = (io.BytesIO(CLASS.encode()), "class.csv")
        return c.post("/lab-day/correct", data=data, content_type="multipart/form-data")

    # Without a destination two batches were in force: the form asks which.
    assert post(batch="").status_code == 422
    assert post(batch="", destination="CHM 110/B").status_code == 303
    refused = post(batch=first, destination="CHM 110/B")
    assert refused.status_code == 422 and f"received {second} that day, not {first}" in refused.get_data(as_text=True)
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        rows = dbmod.query(conn, "SELECT c.*, b.code FROM class_corrections c JOIN batches b ON b.id = c.batch_id")
        assert [r["code"] for r in rows] == [second]
        event = dbmod.query(conn, "SELECT detail FROM events WHERE action = 'classdata.correct'")[0]
        assert json.loads(event["detail"])["destination"] == "CHM 110 · section B"
    finally:
        conn.close()


def test_for_destination_names_a_received_batch_out_of_force():
    day = ld.LabDay(on=TODAY, titrant="NaOH", bench_temperature_c=None, entries=(), headline="No NaOH batch was in force.")
    got = ld.for_destination(day, [ld.Received("BB-1", "NAOH-0000-01", TODAY, 1.0)], "CHM 110 · section B")
    assert got.found and got.day.entries == ()
    assert got.day.headline == f"CHM 110 · section B received NAOH-0000-01, which had no value in force on {TODAY.isoformat()}."
    assert "NAOH-0000-01 had no value in force that day" in got.note
    with pytest.raises(InvalidInput):
        schedule_input.parse_session({}, today=TODAY)
