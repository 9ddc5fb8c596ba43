"""Recording, deciding and exporting standardization runs through the browser forms."""

from __future__ import annotations

import csv
import datetime as dt
import io
import re

import periodictable
import pytest
from formposts import count, post

from stockroom import db as dbmod
from stockroom import records

TODAY = dt.date.today()


@pytest.fixture
def setup(app):
    conn = dbmod.connect(app.config["DATABASE"])
    batch = records.create_batch(
        conn,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": (TODAY - dt.timedelta(days=2)).isoformat(),
            "prepared_by": "Test Person",
            "water_grade": "CO2-free",
        },
        "setup",
    )
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )
    old = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": (TODAY - dt.timedelta(days=1)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )
    conn.close()
    return {"batch": batch, "lot": lot, "expired_lot": old}


# Four replicates of about 0.1 mol/L NaOH against KHP: masses in g, burette readings in mL.
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def run_form(setup, rows=GOOD, **extra):
    form = {
        "purpose": "certify",
        "standard_lot_id": str(setup["lot"]["id"]),
        "performed_on": TODAY.isoformat(),
        "analyst": "Test Person",
        "burette_capacity_ml": "50.0",
        "endpoint": "phenolphthalein",
    }
    for i, (gross, tare, initial, final) in enumerate(rows, start=1):
        form.update({f"r{i}_gross_g": gross, f"r{i}_tare_g": tare, f"r{i}_initial_ml": initial, f"r{i}_final_ml": final})
    form.update(extra)
    return form


def independent_molarity(gross, tare, initial, final):
    """c = 1000 m B / (M V) with M from periodictable and the buoyancy factor of Harvey's appendix."""
    m = float(gross) - float(tare)
    # Air buoyancy (Harvey, Analytical Chemistry 2.1, appendix): 1 + rho_air (1/rho_obj - 1/rho_weights),
    # rho_air 0.0012, weights 8.0 g/cm3, KHP 1.636 g/cm3 (from memory, as in the catalogue).
    b = 1 + 0.0012 * (1 / 1.636 - 1 / 8.0)
    M = periodictable.formula("KHC8H4O4").mass
    return 1000 * m * b / (M * (float(final) - float(initial)))


def test_run_form_needs_a_staff_user(app, client, setup, signed_in_client):
    url = f"/batches/{setup['batch']['code']}/runs/new"
    assert client.get(url).status_code == 303
    assert signed_in_client("instructor").get(url).status_code == 403
    page = signed_in_client("staff").get(url)
    assert page.status_code == 200
    html = page.get_data(as_text=True)
    assert setup["lot"]["code"] in html
    assert setup["expired_lot"]["code"] not in html  # an expired lot is not offered


def test_record_then_accept_releases_the_batch(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    resp = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
    assert resp.status_code == 303, resp.get_data(as_text=True)[:2000]
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    conn = dbmod.connect(app.config["DATABASE"])
    run = records.run_by_id(conn, run_id)
    assert len(run["replicates"]) == 4 and run["analyst"] == "Test Person"
    expected = [independent_molarity(*r) for r in GOOD]
    for rep, want in zip(run["replicates"], expected, strict=True):
        assert rep["molarity"] == pytest.approx(want, rel=2e-6)
    assert run["current"]["molarity"] == pytest.approx(sum(expected) / 4, rel=2e-6)
    page = staff.get(f"/runs/{run_id}").get_data(as_text=True)
    assert "Meets the acceptance rule" in page and "Accept and release" in page
    resp = post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"})
    assert resp.status_code == 303
    body = staff.get(f"/api/v1/batches/{code}").get_json()
    assert body["status"] == "in_service"
    assert body["releases"][0]["molarity"] == pytest.approx(run["current"]["molarity"])
    assert body["releases"][0]["released_by"] == "Staff-User"  # the display name, never the sign-in name
    # The value in force carries the expanded uncertainty U = k u of its release, everywhere it is shown.
    release = body["releases"][0]
    assert release["U"] == pytest.approx(release["k"] * release["u"])
    assert body["U"] == release["U"] and body["molarity"] == release["molarity"]
    page = staff.get(f"/batches/{code}").get_data(as_text=True)
    from stockroom.formatting import molarity as fmt

    assert page.count(fmt(release["molarity"], release["U"], release["k"])) >= 2  # value panel and releases
    # NaOH starting policy: shelf life 90 days from preparation.
    assert body["expires_on"] == (TODAY - dt.timedelta(days=2) + dt.timedelta(days=90)).isoformat()
    # A second decision on the same run is refused.
    assert post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"}).status_code == 409


@pytest.mark.parametrize(
    "change,field,message",
    [
        ({"r2_final_ml": "0.30"}, "r2_final_ml", "final reading must be greater than the initial"),
        ({"r1_gross_g": "-12.4581"}, "r1_gross_g", "must be greater than 0"),
        ({"r3_initial_ml": "0,0,5"}, "r3_initial_ml", "more than one comma"),
        ({"r3_initial_ml": "1,050"}, "r3_initial_ml", "could be 1.050 or 1050"),
        ({"r4_final_ml": "52.10"}, "r4_final_ml", "beyond the scale of the 50 mL burette"),
        ({"r1_temperature_c": "45"}, "r1_temperature_c", "between 5 and 40"),
        ({"temperature_c": "4"}, "temperature_c", "between 5 and 40"),
        ({"r2_tare_g": "abc"}, "r2_tare_g", "number"),
        ({"r1_gross_g": "11.6402"}, "r1_gross_g", "heavier than the tare"),
        ({"r1_gross_g": "71.6402"}, "r1_gross_g", "outside 0.001–50 g: check the unit"),
        ({"r2_exclude": "on"}, "r2_exclude_reason", "say why"),
        ({"performed_on": (TODAY + dt.timedelta(days=3)).isoformat()}, "performed_on", "cannot be later"),
        ({"standard_lot_id": ""}, "standard_lot_id", "required"),
    ],
)
def test_bad_entries_are_caught_at_the_field_and_nothing_is_stored(
    app, setup, signed_in_client, form_token, change, field, message
):
    staff = signed_in_client("staff")
    before = count(app, "runs"), count(app, "replicates"), count(app, "events")
    form = run_form(setup, action="record", **change)
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", form)
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    # The message stands beside the field it belongs to, and what was typed is kept.
    cell = re.search(rf'id="f-{field}"[^>]*>.*?<span class="field-error"[^>]*>([^<]+)</span>', html, re.S)
    assert cell, f"no error beside {field}"
    assert message in cell.group(1)
    for name, value in change.items():
        if name not in ("r2_exclude",):
            assert f'value="{value}"' in html
    assert (count(app, "runs"), count(app, "replicates"), count(app, "events")) == before


def test_expired_lot_is_refused(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    form = run_form(setup, action="record", standard_lot_id=str(setup["expired_lot"]["id"]))
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", form)
    assert resp.status_code == 422
    assert "expired on" in resp.get_data(as_text=True)
    assert count(app, "runs") == 0


def test_compute_without_javascript_stores_nothing(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", run_form(setup, action="preview"))
    assert resp.status_code == 200
    html = resp.get_data(as_text=True)
    mean = sum(independent_molarity(*r) for r in GOOD) / 4
    assert f"{mean:.5f}"[:6] in html and "Uncertainty budget" in html
    assert count(app, "runs") == 0


def test_scattered_run_cannot_be_accepted_but_can_be_rejected_with_reason(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    rows = [GOOD[0], GOOD[1], ("11.9012", "11.0759", "0.05", "40.95"), GOOD[3]]  # +0.45 mL on row 3
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", run_form(setup, rows, action="record"))
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    page = staff.get(f"/runs/{run_id}").get_data(as_text=True)
    assert "Does not meet the acceptance rule" in page and "exceeds the limit of 0.20 %" in page
    assert post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"}).status_code == 409
    assert post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "reject"}).status_code == 422
    # Leaving out the wild replicate, with a reason, recomputes the run; it can then be accepted.
    assert post(staff, form_token, f"/runs/{run_id}/exclude", {"position": "3", "reason": ""}).status_code == 422
    assert (
        post(staff, form_token, f"/runs/{run_id}/exclude", {"position": "3", "reason": "end point overshot"}).status_code == 303
    )
    conn = dbmod.connect(app.config["DATABASE"])
    run = records.run_by_id(conn, run_id)
    assert run["current"]["n"] == 3 and run["current"]["accepted_by_rule"] == 1
    want = [independent_molarity(*r) for r in (GOOD[0], GOOD[1], GOOD[3])]
    assert run["current"]["molarity"] == pytest.approx(sum(want) / 3, rel=2e-6)
    # The first result stays on record beside the new one.
    assert conn.execute("SELECT count(*) FROM run_results WHERE run_id = ?", [run_id]).fetchone()[0] == 2
    assert post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"}).status_code == 303


def test_recheck_does_not_change_the_certified_value(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    first = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
    run_id = int(re.search(r"/runs/(\d+)", first.headers["Location"]).group(1))
    post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"})
    certified = staff.get(f"/api/v1/batches/{code}").get_json()["releases"][0]["molarity"]
    rows = [(g, t, i, f"{float(f) + 0.05:.2f}") for g, t, i, f in GOOD]
    second = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, rows, purpose="recheck", action="record"))
    recheck_id = int(re.search(r"/runs/(\d+)", second.headers["Location"]).group(1))
    post(staff, form_token, f"/runs/{recheck_id}/decide", {"decision": "accept"})
    body = staff.get(f"/api/v1/batches/{code}").get_json()
    assert len(body["releases"]) == 1 and body["releases"][0]["molarity"] == certified
    assert len(body["rechecks"]) == 1 and body["rechecks"][0]["molarity"] < certified


def test_csv_sheet_fills_the_grid_and_stores_nothing(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    sheet = (
        "# from the bench\nreplicate,gross_g,tare_g,initial_ml,final_ml,exclude_reason\n"
        + "\n".join(f"{i},{g},{t},{a},{b}," for i, (g, t, a, b) in enumerate(GOOD, start=1))
        + "\n"
    )
    url = f"/batches/{setup['batch']['code']}/runs/import"
    data = {"csrf_token": form_token(staff, "/"), "sheet": (io.BytesIO(sheet.encode()), "bench.csv")}
    resp = staff.post(url, data=data, content_type="multipart/form-data")
    assert resp.status_code == 200
    html = resp.get_data(as_text=True)
    assert 'name="r4_final_ml" id="f-r4_final_ml" value="39.82"' in html
    assert "4 replicate rows read" in html
    assert count(app, "runs") == 0


@pytest.mark.parametrize(
    "sheet,problem",
    [
        ("replicate,grams,final_ml\n1,0.8,40\n", "unknown column"),
        ("replicate,initial_ml,final_ml\n1,0.1\n", "line 2: has 2 cells"),
        ("", "no header row"),
        ("replicate,initial_ml,final_ml\n", "no replicate rows"),
    ],
)
def test_csv_sheet_problems_are_reported_by_line(app, setup, signed_in_client, form_token, sheet, problem):
    staff = signed_in_client("staff")
    url = f"/batches/{setup['batch']['code']}/runs/import"
    data = {"csrf_token": form_token(staff, "/"), "sheet": (io.BytesIO(sheet.encode()), "bad.csv")}
    resp = staff.post(url, data=data, content_type="multipart/form-data")
    assert resp.status_code == 422
    assert problem in resp.get_data(as_text=True)
    assert count(app, "runs") == 0


def test_csv_sheet_row_errors_show_at_the_cell(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    sheet = 'replicate,mass_g,initial_ml,final_ml\n1,"0,8123",0.1,40.2\n2,0.8201,0.2,0.1\n'
    data = {"csrf_token": form_token(staff, "/"), "sheet": (io.BytesIO(sheet.encode()), "rows.csv")}
    resp = staff.post(f"/batches/{setup['batch']['code']}/runs/import", data=data, content_type="multipart/form-data")
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert "not a comma" in html and "final reading must be greater" in html


def test_exports(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    resp = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"})
    run_csv = staff.get(f"/runs/{run_id}.csv")
    assert run_csv.mimetype == "text/csv"
    assert run_csv.headers["Content-Disposition"] == f'attachment; filename="{code}-run-{run_id}.csv"'
    rows = list(
        csv.DictReader(line for line in run_csv.get_data(as_text=True).splitlines() if not line.lstrip('"').startswith("#"))
    )
    assert [float(r["final_ml"]) for r in rows] == [float(f) for *_, f in GOOD]
    history = staff.get(f"/batches/{code}/history.csv").get_data(as_text=True)
    hist = list(csv.DictReader(io.StringIO(history)))
    assert hist[0]["decision"] == "accept" and hist[0]["released_on"] == TODAY.isoformat()


def test_errors_are_listed_by_the_form_labels_and_land_on_the_typed_row(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    # Row 2 left blank: the replicate after it is the request's replicates[2] but the grid's row 4.
    rows = {
        f"r{i}_{c}": v
        for i, row in ((1, GOOD[0]), (3, GOOD[2]), (4, GOOD[3]))
        for c, v in zip(("gross_g", "tare_g", "initial_ml", "final_ml"), row, strict=True)
    }
    rows["r4_final_ml"] = "0.10"
    form = run_form(setup, rows=[], action="record", **rows)
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", form)
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert '<a href="#f-r4_final_ml">Replicate 4, final reading</a>: the final reading must be greater' in html
    cell = re.search(r'id="f-r4_final_ml"[^>]*>.*?<span class="field-error"[^>]*>([^<]+)</span>', html, re.S)
    assert cell and "greater than the initial reading (0.3 mL)" in cell.group(1)
    assert count(app, "runs") == 0


def test_withdrawn_batch_takes_no_run(app, setup, signed_in_client, form_token):
    conn = dbmod.connect(app.config["DATABASE"])
    records.withdraw_batch(conn, setup["batch"]["id"], TODAY, "spilled", "setup")
    conn.close()
    staff = signed_in_client("staff")
    url = f"/batches/{setup['batch']['code']}/runs/new"
    assert staff.get(url).status_code == 409
    assert post(staff, form_token, url, run_form(setup, action="record")).status_code == 409
    assert count(app, "runs") == 0


@pytest.mark.parametrize("method", ["primary", "secondary"])
def test_the_import_pages_own_example_is_accepted_as_printed(app, setup, signed_in_client, form_token, method):
    import html as html_mod

    staff = signed_in_client("staff")
    url = f"/batches/{setup['batch']['code']}/runs/import?method={method}"
    page = staff.get(url).get_data(as_text=True)
    example = html_mod.unescape(re.search(r'<pre class="sheet-example">(.*?)</pre>', page, re.S).group(1))
    data = {"csrf_token": form_token(staff, "/"), "sheet": (io.BytesIO(example.encode()), "example.csv")}
    resp = staff.post(url, data=data, content_type="multipart/form-data")
    body = resp.get_data(as_text=True)
    # A sheet example that the page prints and then refuses is worse than none.
    assert resp.status_code == 200, body[:2000]
    assert "replicate rows read" in body
    assert count(app, "runs") == 0


def test_superseding_the_value_in_service_asks_for_a_reason(app, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = setup["batch"]["code"]

    def record():
        resp = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
        assert resp.status_code == 303
        return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))

    first = record()
    assert post(staff, form_token, f"/runs/{first}/decide", {"decision": "accept"}).status_code == 303  # nothing in force yet
    second = record()
    page = staff.get(f"/runs/{second}").get_data(as_text=True)
    assert "Reason for replacing the value in force (required)" in page
    before = count(app, "releases"), count(app, "decisions")
    refused = post(staff, form_token, f"/runs/{second}/decide", {"decision": "accept", "reason": "  "})
    assert refused.status_code == 422
    text = refused.get_data(as_text=True)
    assert "Reason" in text and "replaces the certified value in force" in text and "reason:" not in text
    assert (count(app, "releases"), count(app, "decisions")) == before
    ok = post(staff, form_token, f"/runs/{second}/decide", {"decision": "accept", "reason": "new KHP lot; first run was short"})
    assert ok.status_code == 303
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        run = records.run_by_id(conn, second)
    finally:
        conn.close()
    assert run["decisions"][-1]["reason"] == "new KHP lot; first run was short"
    assert count(app, "releases") == before[0] + 1


def test_superseding_through_the_api_asks_for_a_reason_too(app, setup, make_user, client, signed_in_client, form_token):
    from stockroom import tokens

    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    ids = []
    for _ in range(2):
        resp = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
        ids.append(int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1)))
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        user = make_user("api-staff", "staff")
        secret = tokens.create(conn, user.id, user.username, "bench script")[1]
    finally:
        conn.close()
    headers = {"Authorization": f"Bearer {secret}"}
    assert client.post(f"/api/v1/runs/{ids[0]}/decision", json={"decision": "accept"}, headers=headers).status_code == 200
    refused = client.post(f"/api/v1/runs/{ids[1]}/decision", json={"decision": "accept"}, headers=headers)
    assert refused.status_code == 422
    assert refused.get_json()["errors"][0]["field"] == "reason"
    assert count(app, "releases") == 1
    ok = client.post(f"/api/v1/runs/{ids[1]}/decision", json={"decision": "accept", "reason": "re-made"}, headers=headers)
    assert ok.status_code == 200 and count(app, "releases") == 2


def test_an_exported_run_reads_back_as_a_replicate_sheet(app, setup, signed_in_client, form_token):
    """The run export is a replicate sheet plus its computed molarities: read back, the molarity column is
    skipped and every replicate's readings are what was recorded."""
    from stockroom import csvio

    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    resp = post(staff, form_token, f"/batches/{code}/runs/new", run_form(setup, action="record"))
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    text = staff.get(f"/runs/{run_id}.csv").get_data(as_text=True)
    assert "molarity_mol_l" in text.splitlines()[3]  # the export does carry the computed column
    sheet = csvio.read_sheet(text, max_rows=50)
    assert sheet.problems == []
    assert [float(r.values["final_ml"]) for r in sheet.rows] == [float(f) for *_, f in GOOD]
    assert all("molarity_mol_l" not in r.values for r in sheet.rows)
