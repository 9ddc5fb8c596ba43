"""Recalls over real records: what they reach, the "under review" flag, the impact report, clearing."""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import math
import re

import pytest
from pypdf import PdfReader
from recorded_runs import record

from stockroom import db as dbmod
from stockroom import readmodel, records, workflow
from stockroom import recall as recall_mod
from stockroom.policy import status_on

TODAY = dt.date.today()
# Invented replicates: about 0.1 mol/L NaOH against KHP (gross g, tare g, initial mL, final mL) ...
PRIMARY = [
    {"mass_gross_g": 12.4581, "mass_tare_g": 11.6402, "initial_ml": 0.12, "final_ml": 40.21, "volume_ml": 40.09},
    {"mass_gross_g": 12.0117, "mass_tare_g": 11.1891, "initial_ml": 0.40, "final_ml": 40.73, "volume_ml": 40.33},
    {"mass_gross_g": 11.9012, "mass_tare_g": 11.0759, "initial_ml": 0.05, "final_ml": 40.50, "volume_ml": 40.45},
]
# ... and 25 mL aliquots of the new batch titrated with the reference (secondary), titres in mL.
SECONDARY = [{"aliquot_ml": 25.0, "volume_ml": v} for v in (24.95, 24.97, 24.96)]


def iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


class World:
    """Invented batches: lot -> A (NaOH) -> B (HCl) -> C (NaOH), and A -> D (HCl) beside B (a diamond);
    E (NaOH) on the same lot later; F (NaOH) on another lot."""

    def __init__(self, app, conn):
        self.app, self.conn = app, conn
        self.lot = records.create_lot(
            conn,
            {
                "substance": "KHP",
                "assay": 1.0,
                "assay_expanded_u": 0.0002,
                "assay_k": 2,
                "expires_on": iso(300),
                "dried_on": iso(-70),
                "dried_at_c": 120,
                "supplier_lot": "INV-1 (invented)",
            },
            "setup",
        )
        self.lot2 = records.create_lot(
            conn,
            {
                "substance": "KHP",
                "assay": 1.0,
                "assay_expanded_u": 0.0002,
                "assay_k": 2,
                "expires_on": iso(300),
                "dried_on": iso(-70),
                "dried_at_c": 120,
            },
            "setup",
        )
        self.batches = {}
        self.releases = {}
        self.primary("A", "NaOH", prepared=-60, on=-50, lot=self.lot)
        self.secondary("B", "HCl", prepared=-45, on=-40, ref="A")
        self.secondary("C", "NaOH", prepared=-35, on=-30, ref="B")
        self.secondary("D", "HCl", prepared=-45, on=-38, ref="A")
        self.primary("E", "NaOH", prepared=-20, on=-10, lot=self.lot)
        self.primary("F", "NaOH", prepared=-20, on=-12, lot=self.lot2)

    def batch(self, key, reagent, prepared):
        nominal = 0.1
        b = records.create_batch(
            self.conn,
            {
                "reagent": reagent,
                "nominal_molarity": nominal,
                "volume_l": 10,
                "prepared_on": iso(prepared),
                "prepared_by": "Test Person",
                "notes": f"batch {key} (invented)",
            },
            "setup",
        )
        self.batches[key] = b
        return b

    def meta(self, on):
        return {"purpose": "certify", "performed_on": iso(on), "analyst": "Test Person", "burette_capacity_ml": 50.0}

    def primary(self, key, reagent, prepared, on, lot):
        b = self.batches.get(key) or self.batch(key, reagent, prepared)
        run_id, _ = record(self.conn, self.app.config, b, self.meta(on), PRIMARY, "setup", lot=lot)
        self.releases.setdefault(key, []).append(workflow.accept(self.conn, run_id, "setup", reason="re-standardized"))

    def secondary(self, key, reagent, prepared, on, ref):
        b = self.batches.get(key) or self.batch(key, reagent, prepared)
        run_id, _ = record(self.conn, self.app.config, b, self.meta(on), SECONDARY, "setup", reference=self.batches[ref])
        self.releases.setdefault(key, []).append(workflow.accept(self.conn, run_id, "setup", reason="re-standardized"))

    def code(self, key):
        return self.batches[key]["code"]

    def recall(self, kind, key_or_id, since, reason="invented: found wet"):
        sid = self.batches[key_or_id]["id"] if kind == "batch" else key_or_id
        return recall_mod.open_recall(self.conn, kind, sid, dt.date.fromisoformat(iso(since)), reason, TODAY, "staff-user")

    def reached(self, rid):
        report = recall_mod.impact(self.conn, rid, TODAY)
        return {r.release_id for r in report.releases}, report

    def rel(self, *keys):
        return {self.releases[k][-1] for k in keys}


@pytest.fixture
def world(app, conn):
    return World(app, conn)


def flags_of(conn, batch_id):
    return [f for f in status_on(readmodel.batch_facts(conn, batch_id), TODAY).flags if f.kind.value == "under_review"]


# ---------------------------------------------------------------------------------------------- what is reached


def test_chain_of_three_and_diamond_recall_exactly_the_downstream_set(world):
    got, report = world.reached(world.recall("lot", world.lot["id"], since=-100))
    assert got == world.rel("A", "B", "C", "D", "E")
    depth = {r.batch_code: r.depth for r in report.releases}
    assert [depth[world.code(k)] for k in "ABCDE"] == [1, 2, 3, 2, 1]
    assert {b.code for b in report.under_review} == {world.code(k) for k in "ABCDE"}
    # The middle of the chain reaches only what was standardized against it.
    assert world.reached(world.recall("batch", "B", since=-100))[0] == world.rel("B", "C")
    # The top of the diamond reaches both sides and what rests on them.
    assert world.reached(world.recall("batch", "A", since=-100))[0] == world.rel("A", "B", "C", "D")
    assert world.reached(world.recall("batch", "D", since=-100))[0] == world.rel("D")
    assert world.reached(world.recall("lot", world.lot2["id"], since=-100))[0] == world.rel("F")


def test_a_date_limited_recall_leaves_earlier_releases_alone(world, conn):
    rid = world.recall("lot", world.lot["id"], since=-20)
    got, report = world.reached(rid)
    assert got == world.rel("E")
    for key in "ABCDF":
        assert flags_of(conn, world.batches[key]["id"]) == []
    assert len(flags_of(conn, world.batches["E"]["id"])) == 1
    # A batch suspect from a date: its value in force then is suspect from that date, and only what was
    # standardized against it afterwards is reached (B on day -40 and D on day -38 are, from -45; not from -39).
    got, report = world.reached(world.recall("batch", "A", since=-39))
    assert got == world.rel("A", "D")
    a = next(r for r in report.releases if r.batch_code == world.code("A"))
    assert a.suspect_from == dt.date.fromisoformat(iso(-39))
    # Its days in force are counted from then: day -39 to today inclusive (release_in_force by hand:
    # A is released on day -50 and never superseded, withdrawn or expired).
    assert [(p.start.isoformat(), p.end.isoformat()) for p in a.periods] == [(iso(-39), iso(0))]
    assert a.days_in_force == 40


def test_days_in_force_follow_supersession_and_withdrawal(world, conn):
    # A is standardized again on day -5 on the clean lot: its first value stops being in force that day.
    world.primary("A", "NaOH", prepared=-60, on=-5, lot=world.lot2)
    records.withdraw_batch(conn, world.batches["D"]["id"], dt.date.fromisoformat(iso(-8)), "invented: spilled", "setup")
    got, report = world.reached(world.recall("lot", world.lot["id"], since=-100))
    first_a = world.releases["A"][0]
    assert got == {first_a} | world.rel("B", "C", "D", "E")  # the new value of A rests on lot 2
    periods = {r.release_id: [(p.start, p.end) for p in r.periods] for r in report.releases}
    d = dt.date.fromisoformat
    assert periods[first_a] == [(d(iso(-50)), d(iso(-6)))]
    assert periods[world.releases["D"][0]] == [(d(iso(-38)), d(iso(-9)))]
    states = {b.code: b.state for b in report.batches}
    assert states[world.code("A")] == "re-standardized" and states[world.code("D")] == "withdrawn"
    assert states[world.code("B")] == "under review"
    # Lab days counted once each across values: A's first value covers day -50 to -6, E's -10 to 0,
    # B's -40 to 0: together -50 to 0.
    assert report.lab_days == 51


# ---------------------------------------------------------------------------------------------- the flag


def test_under_review_shows_on_dashboard_batch_page_and_lab_day_json(world, client):
    rid = world.recall("lot", world.lot["id"], since=-100, reason="invented: lot found wet")
    html = client.get("/").get_data(as_text=True)
    for key in "ABCDE":
        assert world.code(key) in html
    assert html.count(f"(recall {rid})") >= 5 and world.code("F") in html
    page = client.get(f"/batches/{world.code('C')}").get_data(as_text=True)
    assert "Under review" in page and f'href="/recalls/{rid}"' in page and "invented: lot found wet" in page
    assert client.get(f"/batches/{world.code('F')}").get_data(as_text=True).count("Under review") == 0
    body = client.get(f"/api/v1/lab-day?date={iso(0)}&titrant=NaOH").get_json()
    kinds = {b["batch_id"]: [f["kind"] for f in b["flags"]] for b in body["batches"]}
    assert "under_review" in kinds[world.code("A")] and "under_review" in kinds[world.code("E")]
    assert "under_review" not in kinds[world.code("F")]
    # A past lab day before the recall was recorded shows no flag: as things stood then.
    body = client.get(f"/api/v1/lab-day?date={iso(-1)}&titrant=NaOH").get_json()
    assert all("under_review" not in [f["kind"] for f in b["flags"]] for b in body["batches"])
    views = {v.batch["code"]: v for v in readmodel.batch_views(world.conn, TODAY)}
    assert views[world.code("B")].report.under_review is not None
    assert any("under review since" in r for r in views[world.code("B")].report.remarks)


def test_restandardizing_on_a_clean_chain_ends_the_review(world, conn):
    rid = world.recall("lot", world.lot["id"], since=-100)
    world.primary("C", "NaOH", prepared=-35, on=0, lot=world.lot2)
    assert flags_of(conn, world.batches["C"]["id"]) == []
    report = recall_mod.impact(conn, rid, TODAY)
    c = next(b for b in report.batches if b.code == world.code("C"))
    assert c.state == "re-standardized" and "does not rest on the suspect item" in c.note
    # Standardizing again on the suspect lot does not end it: the new value is reached too.
    world.primary("E", "NaOH", prepared=-20, on=0, lot=world.lot)
    assert len(flags_of(conn, world.batches["E"]["id"])) == 1


def test_clearing_for_one_batch_then_all_is_audited(world, conn, signed_in_client, form_token):
    rid = world.recall("lot", world.lot["id"], since=-100)
    staff = signed_in_client("staff")
    token = form_token(staff, "/")
    url = f"/recalls/{rid}/clear"
    before = (
        conn.execute("SELECT count(*) FROM recall_clearances").fetchone()[0],
        conn.execute("SELECT count(*) FROM events").fetchone()[0],
    )
    for data, field, message in [
        ({"scope": world.code("D"), "clear_reason": " "}, "clear_reason", "required"),
        ({"scope": "", "clear_reason": "ok"}, "scope", "choose the batch"),
        ({"scope": world.code("F"), "clear_reason": "ok"}, "scope", "not a batch this recall"),
    ]:
        resp = staff.post(url, data={**data, "csrf_token": token})
        assert resp.status_code == 422
        cell = re.search(rf'id="f-{field}".*?<span class="field-error"[^>]*>([^<]+)</span>', resp.get_data(as_text=True), re.S)
        assert cell and message in cell.group(1)
    assert (
        conn.execute("SELECT count(*) FROM recall_clearances").fetchone()[0],
        conn.execute("SELECT count(*) FROM events").fetchone()[0],
    ) == before
    resp = staff.post(
        url, data={"scope": world.code("D"), "clear_reason": "D re-checked against lot 2 (invented)", "csrf_token": token}
    )
    assert resp.status_code == 303
    assert flags_of(conn, world.batches["D"]["id"]) == [] and len(flags_of(conn, world.batches["B"]["id"])) == 1
    states = {b.code: b for b in recall_mod.impact(conn, rid, TODAY).batches}
    assert states[world.code("D")].state == "cleared" and "re-checked against lot 2" in states[world.code("D")].note
    assert staff.post(url, data={"scope": world.code("D"), "clear_reason": "again", "csrf_token": token}).status_code == 409
    resp = staff.post(url, data={"scope": "all", "clear_reason": "lot re-assayed: 99.98 % (invented)", "csrf_token": token})
    assert resp.status_code == 303
    for key in "ABCDE":
        assert flags_of(conn, world.batches[key]["id"]) == []
    assert staff.post(url, data={"scope": "all", "clear_reason": "x", "csrf_token": token}).status_code == 409
    events = [
        dict(r) for r in conn.execute("SELECT action, actor, reason, detail FROM events WHERE action LIKE 'recall.%' ORDER BY id")
    ]
    assert [e["action"] for e in events] == ["recall.open", "recall.clear", "recall.clear"]
    assert events[0]["reason"] == "invented: found wet"
    assert json.loads(events[0]["detail"])["releases_reached"] == sorted(world.rel("A", "B", "C", "D", "E"))
    assert [e["reason"] for e in events[1:]] == ["D re-checked against lot 2 (invented)", "lot re-assayed: 99.98 % (invented)"]
    assert records.verify_chain(conn) is None
    with pytest.raises(Exception, match="append-only"):
        with dbmod.write(conn):
            conn.execute("DELETE FROM recalls")


# ---------------------------------------------------------------------------------------------- the report


CLASS = "group,aliquot_ml,titrant_ml,ratio\nbench 1,25.00,24.90,1:1\nbench 2,25.00,24.80,1:1\n"  # invented


def test_report_lists_class_data_corrections_and_downloads(world, conn, signed_in_client):
    instructor = signed_in_client("instructor")
    token = re.search(r'name="csrf_token" value="([^"]+)"', instructor.get("/").get_data(as_text=True)).group(1)
    resp = instructor.post(
        "/lab-day/correct",
        content_type="multipart/form-data",
        data={
            "lab_day": iso(-5),
            "titrant": "HCl",
            "batch": world.code("B"),
            "bench_temperature_c": "",
            "sheet": (io.BytesIO(CLASS.encode()), "class.csv"),
            "csrf_token": token,
        },
    )
    assert resp.status_code == 303, resp.get_data(as_text=True)[:2000]
    cid = conn.execute("SELECT id FROM class_corrections").fetchone()[0]
    # A batch suspect from day -3 leaves the correction of day -5 alone; from day -6 it is reached.
    assert recall_mod.impact(conn, world.recall("batch", "B", since=-3), TODAY).corrections == ()
    rid = world.recall("batch", "B", since=-6)
    report = recall_mod.impact(conn, rid, TODAY)
    assert [c["id"] for c in report.corrections] == [cid]
    staff = signed_in_client("staff")
    html = staff.get(f"/recalls/{rid}").get_data(as_text=True)
    assert iso(-5) in html and "Class-data corrections made with them" in html
    text = staff.get(f"/recalls/{rid}.csv").get_data(as_text=True)
    about = [row[0] for row in csv.reader(io.StringIO(text)) if row[0].startswith("#")]
    assert f"# suspect from: {iso(-6)}" in about and "# class-data corrections made with them: 1" in about
    rows = list(csv.DictReader(line for line in text.splitlines() if not line.lstrip('"').startswith("#")))
    releases = [r for r in rows if r["section"] == "release"]
    # C was standardized against B on day -30, before B became suspect: it is not reached.
    assert {r["batch"] for r in releases} == {world.code("B")}
    b_row = next(r for r in releases if r["batch"] == world.code("B"))
    assert b_row["suspect_from"] == iso(-6) and b_row["days"] == "7" and b_row["links_from_suspect"] == "0"
    corr = [r for r in rows if r["section"] == "correction"]
    assert [(r["correction_id"], r["lab_day"], r["rows"]) for r in corr] == [(str(cid), iso(-5), "2")]
    assert {r["batch"]: r["state"] for r in rows if r["section"] == "batch"} == {world.code("B"): "under review"}
    resp = staff.get(f"/recalls/{rid}.pdf")
    assert resp.status_code == 200 and resp.mimetype == "application/pdf" and resp.data.startswith(b"%PDF")
    pdf_text = " ".join(p.extract_text() for p in PdfReader(io.BytesIO(resp.data)).pages)
    assert f"Recall {rid}: batch {world.code('B')}" in pdf_text
    assert world.code("B") in pdf_text and iso(-5) in pdf_text and "1 in use under review" in pdf_text


def test_a_spreadsheet_formula_in_a_reason_is_defused_in_the_csv(world, client):
    rid = world.recall("lot", world.lot["id"], since=-100, reason='=HYPERLINK("http://example.invalid")')
    text = client.get(f"/recalls/{rid}.csv").get_data(as_text=True)
    assert '"# reason: =HYPERLINK' in text  # the comment line is one quoted cell starting with #
    rows = list(csv.reader(line for line in text.splitlines() if not line.lstrip('"').startswith("#")))
    assert all(not cell.startswith("=") for row in rows for cell in row)


def test_the_batch_page_shows_the_chain_with_what_each_step_adds(world, client):
    world.recall("batch", "B", since=-100)
    html = client.get(f"/batches/{world.code('C')}").get_data(as_text=True)
    panel = html[html.index('id="traceability"') :]
    panel = panel[: panel.index("</section>")]
    assert "<svg" in panel and "style=" not in panel and "<script" not in panel
    order = [panel.index(world.code(k) + " · certified value") for k in "CBA"]
    assert order == sorted(order)
    assert world.lot["code"] + " · primary-standard lot" in panel and "SUSPECT" in panel
    # Each step's u_rel and its reference's, from the releases on record: the step adds
    # sqrt(u_rel^2 - u_rel_ref^2) (GUM, JCGM 100:2008, 5.1.6: relative variances add in a product).
    rel = {r["batch_id"]: r for r in world.conn.execute("SELECT batch_id, molarity, u FROM releases")}
    uc = rel[world.batches["C"]["id"]]["u"] / rel[world.batches["C"]["id"]]["molarity"]
    ub = rel[world.batches["B"]["id"]]["u"] / rel[world.batches["B"]["id"]]["molarity"]
    added = (uc * uc - ub * ub) ** 0.5 * 100  # per cent, shown to two significant figures
    assert f"{added:.{1 - math.floor(math.log10(added))}f} %" in panel
    svg = client.get(f"/batches/{world.code('C')}/chain.svg")
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml" and b"SUSPECT" in svg.data
    assert client.get(f"/batches/{world.code('C')}/chain.svg?on={iso(-200)}").status_code == 404


# ---------------------------------------------------------------------------------------------- the forms


@pytest.mark.parametrize(
    "change,field,message",
    [
        ({"subject": ""}, "subject", "is required"),
        ({"subject": "lot:999"}, "subject", "choose a primary-standard lot"),
        ({"subject": "release:1"}, "subject", "choose the suspect item from the list"),
        ({"suspect_from": iso(2)}, "suspect_from", "cannot be later"),
        ({"suspect_from": "2026-13-01"}, "suspect_from", "not a date"),
        ({"reason": "  "}, "reason", "required"),
    ],
)
def test_bad_recall_input_is_caught_at_the_field_and_nothing_is_stored(
    world, conn, signed_in_client, form_token, change, field, message
):
    staff = signed_in_client("staff")
    before = conn.execute("SELECT count(*) FROM recalls").fetchone()[0], conn.execute("SELECT count(*) FROM events").fetchone()[0]
    data = {
        "subject": f"lot:{world.lot['id']}",
        "suspect_from": iso(-10),
        "reason": "invented",
        **change,
        "csrf_token": form_token(staff, "/"),
    }
    resp = staff.post("/recalls/new", data=data)
    assert resp.status_code == 422
    cell = re.search(rf'id="f-{field}".*?<span class="field-error"[^>]*>([^<]+)</span>', resp.get_data(as_text=True), re.S)
    assert cell and message in cell.group(1)
    assert (
        conn.execute("SELECT count(*) FROM recalls").fetchone()[0],
        conn.execute("SELECT count(*) FROM events").fetchone()[0],
    ) == before


def test_recall_through_the_form_and_permissions(world, conn, client, signed_in_client, form_token):
    assert client.get("/recalls/new").status_code == 303
    instructor = signed_in_client("instructor")
    assert instructor.get("/recalls/new").status_code == 403
    resp = instructor.post(
        "/recalls/new",
        data={
            "subject": f"lot:{world.lot['id']}",
            "suspect_from": iso(-1),
            "reason": "x",
            "csrf_token": form_token(instructor, "/"),
        },
    )
    assert resp.status_code == 403 and conn.execute("SELECT count(*) FROM recalls").fetchone()[0] == 0
    admin = signed_in_client("admin")
    page = admin.get(f"/recalls/new?subject=lot:{world.lot['id']}").get_data(as_text=True)
    assert f'value="lot:{world.lot["id"]}" selected' in page
    resp = admin.post(
        "/recalls/new",
        data={
            "subject": f"batch:{world.batches['A']['id']}",
            "suspect_from": iso(-100),
            "reason": "invented: cap left off",
            "csrf_token": form_token(admin, "/"),
        },
    )
    assert resp.status_code == 303
    rid = int(resp.headers["Location"].rsplit("/", 1)[1])
    listing = client.get("/recalls/").get_data(as_text=True)
    assert f"Recall {rid}" in listing and "4 certified values, 4 batches" in listing
    page = client.get(f"/recalls/{rid}").get_data(as_text=True)
    assert "Clear the recall" not in page  # anonymous readers see the report, not the form
    assert (
        instructor.post(
            f"/recalls/{rid}/clear", data={"scope": "all", "clear_reason": "x", "csrf_token": form_token(instructor, "/")}
        ).status_code
        == 403
    )
    assert client.get("/recalls/999").status_code == 404
