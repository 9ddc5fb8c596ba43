"""The lab schedule: one parser at three doors (form, CSV import, JSON), the import's preview, cancelling, pages.

The figures are invented; a session's volume and molarity are stored as typed (no arithmetic here).
"""

from __future__ import annotations

import datetime as dt
import io
import json

import pytest

from stockroom import db as dbmod
from stockroom import records, schedule_input, tokens
from stockroom.errors import InvalidInput
from stockroom.records import lab_sessions

TODAY = dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC
D1 = (TODAY + dt.timedelta(days=10)).isoformat()
D2 = (TODAY + dt.timedelta(days=11)).isoformat()

GOOD_FORM = {
    "session_on": D1,
    "course": "CHM 110",
    "section": "B",
    "room": "214",
    "titrant": "NaOH",
    "nominal_molarity": "0.1",
    "volume_needed_l": "2.5",
    "notes": "acid-base titration, week 3",
}
GOOD_CSV = (
    "session_on,course,section,room,titrant,nominal_molarity,volume_needed_l,notes\n"
    f'{D1},CHM 110,B,214,NaOH,0.1,2.5,"acid-base titration, week 3"\n'
)
STORED_KEYS = ("session_on", "course", "section", "room", "reagent", "nominal_molarity", "volume_needed_l", "notes")


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


def _stored(conn):
    return [{k: r[k] for k in STORED_KEYS} for r in dbmod.query(conn, "SELECT * FROM lab_sessions ORDER BY id")]


def _count(conn, table):
    return conn.execute(f"SELECT count(*) FROM {table}").fetchone()[0]


def _upload(client, token, text, **extra):
    data = {"csrf_token": token, "sheet": (io.BytesIO(text.encode("utf-8")), "schedule.csv"), **extra}
    return client.post("/schedule/import", data=data, content_type="multipart/form-data")


# ---------------------------------------------------------------- the parser


def test_parse_session_reads_every_field():
    s = schedule_input.parse_session(GOOD_FORM, today=TODAY)
    assert s == schedule_input.SessionInput(
        dt.date.fromisoformat(D1), "CHM 110", "B", "214", "NaOH", 0.1, 2.5, "acid-base titration, week 3"
    )


@pytest.mark.parametrize(
    ("key", "value", "message"),
    [
        ("session_on", "2026-13-01", "not a date on the calendar"),
        ("session_on", (TODAY + dt.timedelta(days=400)).isoformat(), "cannot be later than"),
        ("session_on", (TODAY - dt.timedelta(days=400)).isoformat(), "cannot be earlier than"),
        ("course", "", "is required"),
        ("course", "C" * 41, "at most 40 characters"),
        ("section", "S" * 21, "at most 20 characters"),
        ("titrant", "unobtainium", "not a titrant the catalogue holds"),
        ("nominal_molarity", "0", "must be greater than 0"),
        ("nominal_molarity", "7", "at most 6 mol/L"),
        ("volume_needed_l", "0", "between 0.001 and 50 L"),
        ("volume_needed_l", "60", "between 0.001 and 50 L"),
        ("volume_needed_l", "2,5", "use a point, not a comma"),
        ("notes", "n" * 501, "at most 500 characters"),
    ],
)
def test_parse_session_refuses_each_broken_rule(key, value, message):
    with pytest.raises(InvalidInput) as caught:
        schedule_input.parse_session({**GOOD_FORM, key: value}, today=TODAY)
    assert [e.field for e in caught.value.errors] == [key]
    assert message in caught.value.errors[0].message


def test_the_form_door_reads_a_decimal_comma_and_unknown_keys_are_refused():
    assert (
        schedule_input.parse_session({**GOOD_FORM, "volume_needed_l": "2,5"}, today=TODAY, decimal_comma=True).volume_needed_l
        == 2.5
    )
    with pytest.raises(InvalidInput) as caught:
        schedule_input.parse_session({**GOOD_FORM, "volume_ml": "3"}, today=TODAY)
    assert caught.value.errors[0].field == "volume_ml"


# ---------------------------------------------------------------- the CSV


def test_read_schedule_good_file_with_comments_and_any_column_order():
    text = (
        "# autumn term, invented\n"
        "titrant,session_on,course,volume_needed_l,nominal_molarity\n"
        f"HCl,{D1},CHM 120,1.5,0.1\n"
        f"hydrochloric acid,{D2},CHM 120,1.25,0.1\n"
    )
    read = schedule_input.read_schedule(text, max_rows=10, today=TODAY)
    assert read.ok and read.problems == []
    assert [(line, s.reagent, s.volume_needed_l, s.section) for line, s in read.sessions] == [
        (3, "HCl", 1.5, ""),
        (4, "HCl", 1.25, ""),
    ]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("", ["the file: the file has no header row and no sessions"]),
        ("session_on,course,titrant,nominal_molarity\n", ["line 1: the header needs the column(s) volume_needed_l"]),
        (GOOD_CSV.replace("notes", "remarks"), ["line 1: unknown column(s) 'remarks'"]),
        ("session_on,course,course,titrant,nominal_molarity,volume_needed_l\n", ["line 1: a column name appears twice"]),
        (GOOD_CSV.splitlines()[0] + "\n", ["the file: the file has a header but no sessions"]),
        (GOOD_CSV + f"{D2},CHM 110,B,214,NaOH,0.1\n", ["line 3: has 6 cells; the header has 8"]),
        (GOOD_CSV + f"{D2},CHM 110,B,214,NaOH,0.1,2.5 L,\n", ["line 3, Volume needed: must be a plain decimal number"]),
        (GOOD_CSV + f"{D2},,B,214,NaOH,0.1,2.5,\n", ["line 3, Course: is required"]),
        (GOOD_CSV + "18/01/2027,CHM 110,B,214,NaOH,0.1,2.5,\n", ["line 3, Date: '18/01/2027' is not a date"]),
        (GOOD_CSV + f"{D2},CHM 110,B,214,NaOX,0.1,2.5,\n", ["line 3, Titrant: 'NaOX' is not a titrant"]),
        (GOOD_CSV + GOOD_CSV.splitlines()[1] + "\n", ["line 3: repeats the session on line 2"]),
        (GOOD_CSV + "x" * 2001 + "\n", ["line 3: is longer than 2000 characters"]),
        (
            GOOD_CSV + f'{D2},"CHM 110,B,214,NaOH,0.1,2.5,\n' + GOOD_CSV.splitlines()[1] + "\n",
            ["line 3: cannot be read as CSV", "line 4: repeats the session on line 2"],
        ),
    ],
)
def test_read_schedule_reports_each_problem_by_line_and_field(text, expected):
    read = schedule_input.read_schedule(text, max_rows=10, today=TODAY)
    assert not read.ok
    sentences = [p.sentence() for p in read.problems]
    assert len(sentences) == len(expected), sentences
    for got, want in zip(sentences, expected, strict=True):
        assert got.startswith(want), sentences


def test_read_schedule_reports_every_bad_row_at_once_and_the_row_limit():
    text = GOOD_CSV + f"{D2},,B,214,NaOH,0,2.5,\n" + f"{D2},CHM 110,C,214,NaOH,0.1,99,\n"
    read = schedule_input.read_schedule(text, max_rows=10, today=TODAY)
    assert [(p.line, p.field) for p in read.problems] == [(3, "Course"), (3, "Nominal molarity"), (4, "Volume needed")]
    many = GOOD_CSV.splitlines()[0] + "\n" + "".join(f"{D1},CHM {i},A,1,NaOH,0.1,1,\n" for i in range(4))
    assert [p.sentence() for p in schedule_input.read_schedule(many, max_rows=3, today=TODAY).problems] == [
        "the file: the file has 4 sessions; at most 3 are accepted"
    ]


# ---------------------------------------------------------------- three doors, one row


def test_form_csv_and_json_store_the_same_rows(app, conn, signed_in_client, form_token, make_user):
    staff = signed_in_client("staff")
    resp = staff.post("/schedule", data={**GOOD_FORM, "csrf_token": form_token(staff, "/schedule")})
    assert resp.status_code == 303, resp.get_data(as_text=True)
    by_form = _stored(conn)

    token = form_token(staff, "/schedule/import")
    preview = _upload(staff, token, GOOD_CSV)
    assert preview.status_code == 200
    assert _count(conn, "lab_sessions") == 1  # the preview stores nothing
    stored = staff.post("/schedule/import", data={"csrf_token": token, "sheet_text": GOOD_CSV, "store": "1"})
    assert stored.status_code == 303
    by_csv = _stored(conn)[1:]

    user = make_user("api-staff", "staff")
    secret = tokens.create(conn, user.id, user.username, "schedule script")[1]
    body = {**GOOD_FORM, "nominal_molarity": 0.1, "volume_needed_l": 2.5}
    resp = app.test_client().post(
        "/api/v1/lab-sessions",
        data=json.dumps(body),
        content_type="application/json",
        headers={"Authorization": f"Bearer {secret}"},
    )
    assert resp.status_code == 201, resp.get_json()
    assert resp.get_json()["destination"] == "CHM 110 · section B · room 214"
    by_api = _stored(conn)[2:]
    assert by_form == by_csv == by_api
    assert by_form[0]["volume_needed_l"] == 2.5 and by_form[0]["reagent"] == "NaOH"
    sources = [
        json.loads(r["detail"])["source"]
        for r in dbmod.query(conn, "SELECT detail FROM events WHERE action = 'schedule.add' ORDER BY id")
    ]
    assert sources == ["form", "csv", "api"]


def test_a_bad_import_stores_nothing_and_shows_every_problem(conn, signed_in_client, form_token):
    staff = signed_in_client("staff")
    token = form_token(staff, "/schedule/import")
    bad = GOOD_CSV + f"{D2},,B,214,NaOH,0.1,2.5,\n"
    resp = staff.post("/schedule/import", data={"csrf_token": token, "sheet_text": bad, "store": "1"})
    assert resp.status_code == 422
    page = resp.get_data(as_text=True)
    assert "Nothing was stored" in page and "line 3, Course: is required" in page
    assert _count(conn, "lab_sessions") == 0
    assert _upload(staff, token, "\xff\xfe".encode("latin-1").decode("latin-1")).status_code in (200, 422)


def test_the_form_reshows_with_labels_and_writes_nothing(conn, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = staff.post("/schedule", data={**GOOD_FORM, "volume_needed_l": "60", "csrf_token": form_token(staff, "/schedule")})
    assert resp.status_code == 422
    page = resp.get_data(as_text=True)
    assert "Volume needed</a>: must be between 0.001 and 50 L" in page
    assert _count(conn, "lab_sessions") == 0


def test_json_write_needs_a_token_and_refuses_bad_input(app, conn, make_user):
    client = app.test_client()
    body = json.dumps({**GOOD_FORM, "volume_needed_l": 2.5})
    assert client.post("/api/v1/lab-sessions", data=body, content_type="application/json").status_code == 401
    user = make_user("api-x", "staff")
    secret = tokens.create(conn, user.id, user.username, "x")[1]
    bad = json.dumps({**GOOD_FORM, "volume_needed_l": "lots", "titrant": "NaOX"})
    resp = client.post(
        "/api/v1/lab-sessions", data=bad, content_type="application/json", headers={"Authorization": f"Bearer {secret}"}
    )
    assert resp.status_code == 422
    assert {e["field"] for e in resp.get_json()["errors"]} == {"volume_needed_l", "titrant"}
    assert _count(conn, "lab_sessions") == 0


# ---------------------------------------------------------------- cancelling, listing


def test_cancel_needs_a_reason_and_happens_once(conn, signed_in_client, form_token):
    s = schedule_input.parse_session(GOOD_FORM, today=TODAY)
    sid = lab_sessions.add_session(conn, s, "setup")
    staff = signed_in_client("staff")
    token = form_token(staff, f"/schedule/{sid}/cancel")
    resp = staff.post(f"/schedule/{sid}/cancel", data={"csrf_token": token, "reason": "  "})
    assert resp.status_code == 422 and "Reason</a>: give the reason" in resp.get_data(as_text=True)
    assert staff.post(f"/schedule/{sid}/cancel", data={"csrf_token": token, "reason": "section merged with A"}).status_code == 303
    assert lab_sessions.session_by_id(conn, sid)["cancelled_reason"] == "section merged with A"
    assert staff.post(f"/schedule/{sid}/cancel", data={"csrf_token": token, "reason": "again"}).status_code == 409
    assert _count(conn, "lab_session_cancellations") == 1
    page = staff.get(f"/schedule?from={D1}").get_data(as_text=True)
    assert "section merged with A" in page and "0 sessions scheduled" in page and "1 cancelled" in page
    listed = staff.get(f"/api/v1/lab-sessions?from={D1}&to={D2}").get_json()["sessions"]
    assert [(x["id"], x["cancelled"]) for x in listed] == [(sid, True)]
    assert records.unaudited_records(conn) == []


def test_schedule_page_groups_by_week_and_filters(conn, client):
    monday = TODAY + dt.timedelta(days=7 - TODAY.weekday())
    for i, (day, titrant) in enumerate(
        [(monday, "NaOH"), (monday + dt.timedelta(days=2), "HCl"), (monday + dt.timedelta(days=7), "NaOH")]
    ):
        lab_sessions.add_session(
            conn, schedule_input.SessionInput(day, "CHM 110", "ABC"[i], "214", titrant, 0.1, 1.5, ""), "setup"
        )
    page = client.get(f"/schedule?from={monday.isoformat()}").get_data(as_text=True)
    assert page.count("Week of ") == 2
    assert f"Week of {monday.isoformat()}" in page and "CHM 110 · section B · room 214" in page
    assert "3 sessions scheduled, needing 4.50 L in all" in page
    only = client.get(f"/schedule?from={monday.isoformat()}&titrant=HCl").get_data(as_text=True)
    assert "1 session scheduled, needing 1.50 L in all" in only
    bad = client.get("/schedule?from=2026-02-30")
    assert bad.status_code == 422 and "From: " in bad.get_data(as_text=True)
    api = client.get(f"/api/v1/lab-sessions?from={monday.isoformat()}&to=2000-01-01")
    assert api.status_code == 422 and api.get_json()["errors"][0]["field"] == "to"
    assert client.get("/api/v1/lab-sessions?when=soon").status_code == 422
