"""The instrument register: forms, calibrations, standing, and instrument figures in a run's budget."""

from __future__ import annotations

import datetime as dt
import json
import math
import re
import sqlite3

import pytest
from formposts import post

from stockroom import db as dbmod
from stockroom import instruments as inst_mod
from stockroom import records

TODAY = dt.date.today()
# Four invented replicates of about 0.1 mol/L NaOH against KHP (gross g, tare g, initial mL, final mL).
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


@pytest.fixture
def setup(conn):
    batch = records.create_batch(
        conn,
        {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": iso(-2), "prepared_by": "Test Person"},
        "setup",
    )
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": iso(300),
            "dried_on": iso(0),
            "dried_at_c": 120,
        },
        "setup",
    )
    return {"batch": batch, "lot": lot}


def burette(conn, code, cls="A", tolerance=None, due=365, outcome="pass", calibrated=-30):
    values = {
        "code": code,
        "kind": "burette",
        "capacity": 50.0,
        "accuracy_class": cls,
        "tolerance": tolerance if tolerance is not None else inst_mod.class_tolerance("burette", cls, 50.0),
    }
    cal = {"calibrated_on": iso(calibrated), "next_due_on": iso(due), "outcome": outcome, "certificate_ref": f"CAL-{code}"}
    return inst_mod.register(conn, values, "setup", cal)


def balance(conn, code, readability_g=0.0001, linearity_g=0.0003):
    return inst_mod.register(
        conn,
        {"code": code, "kind": "balance", "capacity": 220.0, "readability": readability_g, "linearity_g": linearity_g},
        "setup",
        {"calibrated_on": iso(-10), "next_due_on": iso(300), "outcome": "pass", "certificate_ref": f"CAL-{code}"},
    )


def run_form(setup, **extra):
    form = {
        "purpose": "certify",
        "standard_lot_id": str(setup["lot"]["id"]),
        "performed_on": TODAY.isoformat(),
        "analyst": "Test Person",
        "burette_capacity_ml": "50.0",
        "action": "record",
    }
    for i, (gross, tare, initial, final) in enumerate(GOOD, start=1):
        form.update({f"r{i}_gross_g": gross, f"r{i}_tare_g": tare, f"r{i}_initial_ml": initial, f"r{i}_final_ml": final})
    form.update(extra)
    return form


def count(conn, table):
    return conn.execute(f"SELECT count(*) FROM {table}").fetchone()[0]


def record_run(staff, form_token, setup, **extra):
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", run_form(setup, **extra))
    assert resp.status_code == 303, resp.get_data(as_text=True)[:3000]
    return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))


# ---------------------------------------------------------------------------------------------- the figures


def test_class_b_burette_widens_u_by_exactly_its_triangular_term(app, conn, setup, signed_in_client, form_token):
    a = burette(conn, "BUR-A1", "A")
    b = burette(conn, "BUR-B1", "B")
    # Class A 50 mL burette ±0.05 mL and Class B twice that, ±0.10 mL (ASTM E287 1.1.2 and Table 1;
    # the 50 mL figure as ISO 385 is quoted by secondary sources).
    assert (a.tolerance, b.tolerance) == (0.05, 0.10)
    staff = signed_in_client("staff")
    res_a = records.run_by_id(conn, record_run(staff, form_token, setup, burette_id=str(a.id)))["current"]
    res_b = records.run_by_id(conn, record_run(staff, form_token, setup, burette_id=str(b.id)))["current"]
    assert res_a["molarity"] == res_b["molarity"]
    # Independently: c = K m / V per replicate, so the effective titre V* = c̄ / mean(c_i / V_i) of the
    # measurement model reduces to mean(m/V) / mean(m/V²), whatever K is. The burette tolerance a enters
    # u(V*) as a triangular distribution, u = a/√6 (GUM, JCGM 100:2008, 4.3.9), and the GUM product rule
    # gives u_c² = c̄² Σ (u(x)/x)², so only that term changes between the two runs.
    m = [float(g) - float(t) for g, t, _, _ in GOOD]
    v = [float(f) - float(i) for _, _, i, f in GOOD]
    v_star = (sum(mi / vi for mi, vi in zip(m, v, strict=True)) / 4) / (sum(mi / vi**2 for mi, vi in zip(m, v, strict=True)) / 4)
    c = res_a["molarity"]
    predicted = c**2 * ((0.10 / math.sqrt(6)) ** 2 - (0.05 / math.sqrt(6)) ** 2) / v_star**2
    assert res_b["u"] > res_a["u"]
    assert res_b["u"] ** 2 - res_a["u"] ** 2 == pytest.approx(predicted, rel=1e-6)
    # The burette's own term in the stored budget is a/√6 of the chosen instrument.
    titre = next(f for f in res_b["result"]["budget"] if f["source"] == "titre volume")
    burette_line = next(x for x in titre["components"] if x["source"] == "burette calibration")
    assert burette_line["u"] == pytest.approx(0.10 / math.sqrt(6), rel=1e-12)
    assert "±0.1 mL" in burette_line["derivation"]
    # And the instruments are stored with the run, with the calibration in force that day.
    rows = conn.execute("SELECT role, instrument_id, calibration_id FROM run_instruments ORDER BY id").fetchall()
    assert [(r[0], r[1]) for r in rows] == [("burette", a.id), ("burette", b.id)]
    assert rows[1][2] == b.calibrations[-1].id
    # The run form's live preview, sent the chosen burette's figure, computes the same u as recording.
    page = staff.get(f"/batches/{setup['batch']['code']}/runs/new").get_data(as_text=True)
    assert f"&#34;{b.id}&#34;: {{&#34;burette_tolerance_ml&#34;: 0.1}}" in page
    body = {
        "titrant": "NaOH",
        "standard": "KHP",
        "purity": 1.0,
        "purity_U": 0.0002,
        "purity_k": 2,
        "nominal_molarity": 0.1,
        "burette_capacity_ml": 50,
        "burette_tolerance_ml": 0.1,
        "replicates": [
            {"gross_g": float(g), "tare_g": float(t), "initial_ml": float(i), "final_ml": float(f)} for g, t, i, f in GOOD
        ],
    }
    preview = staff.post("/api/v1/standardizations/preview", json=body).get_json()
    assert preview["u"] == pytest.approx(res_b["u"], rel=1e-9)


def test_no_instrument_named_keeps_the_settings_defaults(conn, setup, signed_in_client, form_token):
    staff = signed_in_client("staff")
    cur = records.run_by_id(conn, record_run(staff, form_token, setup))["current"]
    titre = next(f for f in cur["result"]["budget"] if f["source"] == "titre volume")
    line = next(x for x in titre["components"] if x["source"] == "burette calibration")
    # BURETTE_TOLERANCE_ML defaults to 0.05 mL (Class A 50 mL); triangular, a/√6 (GUM 4.3.9).
    assert line["u"] == pytest.approx(0.05 / math.sqrt(6), rel=1e-12)
    assert count(conn, "run_instruments") == 0


def test_balance_figures_feed_the_mass_terms(conn, setup, signed_in_client, form_token):
    bal = balance(conn, "BAL-9", readability_g=0.00001, linearity_g=0.0003)
    staff = signed_in_client("staff")
    run_id = record_run(staff, form_token, setup, balance_id=str(bal.id))
    cur = records.run_by_id(conn, run_id)["current"]
    assert f'balance <a href="/instruments/{bal.id}">BAL-9</a>' in staff.get(f"/runs/{run_id}").get_data(as_text=True)
    mass = next(f for f in cur["result"]["budget"] if f["source"] == "mass")
    comps = {x["source"]: x["u"] for x in mass["components"]}
    # Linearity ±a, rectangular: u = a/√3 (GUM 4.3.7); readability d: u = d/√12 (GUM F.2.2.1).
    assert comps["balance linearity (gross weighing)"] == pytest.approx(0.0003 / math.sqrt(3), rel=1e-12)
    assert comps["balance readability (tare weighing)"] == pytest.approx(0.00001 / math.sqrt(12), rel=1e-12)


def test_a_recalibration_stating_new_figures_holds_from_then_on(conn):
    b = burette(conn, "BUR-R", "A", calibrated=-100, due=-20)
    inst_mod.record_calibration(
        conn,
        b.id,
        {"calibrated_on": iso(-5), "next_due_on": iso(360), "outcome": "pass", "certificate_ref": "CAL-2", "tolerance": 0.04},
        "setup",
    )
    b = inst_mod.instrument_by_id(conn, b.id)
    assert [c.certificate_ref for c in b.calibrations] == ["CAL-BUR-R", "CAL-2"]  # history kept, in order
    assert b.tolerance_on(dt.date.fromisoformat(iso(-50))) == 0.05
    assert b.tolerance_on(TODAY) == 0.04
    fig = inst_mod.figures({}, {"burette": b}, TODAY)
    assert (fig.burette_tolerance_ml, fig.burette_capacity_ml) == (0.04, 50.0)
    assert inst_mod.standing(b, dt.date.fromisoformat(iso(-10))).state == "overdue"
    assert inst_mod.standing(b, TODAY).state == "in_calibration"


def test_instrument_records_are_append_only(conn):
    b = burette(conn, "BUR-X")
    for sql in (
        "UPDATE instruments SET tolerance = 1",
        "DELETE FROM calibrations",
        f"UPDATE calibrations SET next_due_on = '2999-01-01' WHERE instrument_id = {b.id}",
    ):
        with pytest.raises(sqlite3.IntegrityError, match="append-only"):
            with dbmod.write(conn):
                conn.execute(sql)
    actions = [
        r[0] for r in conn.execute("SELECT action FROM events WHERE entity IN ('instruments', 'calibrations') ORDER BY id")
    ]
    assert actions == ["instrument.register", "instrument.calibrate"]


# ---------------------------------------------------------------------------------------------- due dates


def test_a_burette_past_due_blocks_the_release_and_names_itself(conn, setup, signed_in_client, form_token):
    late = burette(conn, "BUR-LATE", calibrated=-400, due=-3)
    staff = signed_in_client("staff")
    run_id = record_run(staff, form_token, setup, burette_id=str(late.id))
    run = records.run_by_id(conn, run_id)
    assert any("BUR-LATE" in w and "cannot release" in w for w in run["current"]["result"]["warnings"])
    before = count(conn, "releases")
    resp = post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept"})
    assert resp.status_code == 409
    text = resp.get_data(as_text=True)
    assert "burette BUR-LATE" in text and iso(-3) in text and "past its calibration due date" in text
    assert count(conn, "releases") == before and count(conn, "decisions") == 0
    # A run on the due date itself is still in calibration (due means "calibrate by").
    ok = burette(conn, "BUR-TODAY", calibrated=-365, due=0)
    run_ok = record_run(staff, form_token, setup, burette_id=str(ok.id))
    assert post(staff, form_token, f"/runs/{run_ok}/decide", {"decision": "accept"}).status_code == 303
    assert count(conn, "releases") == before + 1


def test_failed_or_never_calibrated_instruments_block_a_release_too(conn, setup, signed_in_client, form_token):
    failed = burette(conn, "BUR-FAIL", outcome="fail")
    never = inst_mod.register(
        conn, {"code": "BAL-NEW", "kind": "balance", "capacity": 220.0, "readability": 0.0001, "linearity_g": 0.0002}, "setup"
    )
    staff = signed_in_client("staff")
    r1 = record_run(staff, form_token, setup, burette_id=str(failed.id))
    text = post(staff, form_token, f"/runs/{r1}/decide", {"decision": "accept"}).get_data(as_text=True)
    assert "burette BUR-FAIL had failed its calibration" in text
    r2 = record_run(staff, form_token, setup, balance_id=str(never.id))
    resp = post(staff, form_token, f"/runs/{r2}/decide", {"decision": "accept"})
    assert resp.status_code == 409 and "balance BAL-NEW had no calibration on record" in resp.get_data(as_text=True)


def test_a_recheck_with_an_overdue_instrument_proceeds_with_a_warning(conn, setup, signed_in_client, form_token):
    good = burette(conn, "BUR-OK")
    late = burette(conn, "BUR-OLD", calibrated=-400, due=-1)
    staff = signed_in_client("staff")
    cert = record_run(staff, form_token, setup, burette_id=str(good.id))
    assert post(staff, form_token, f"/runs/{cert}/decide", {"decision": "accept"}).status_code == 303
    check = record_run(staff, form_token, setup, purpose="recheck", burette_id=str(late.id))
    warnings = records.run_by_id(conn, check)["current"]["result"]["warnings"]
    assert any("BUR-OLD" in w and "re-check is recorded" in w for w in warnings)
    assert post(staff, form_token, f"/runs/{check}/decide", {"decision": "accept"}).status_code == 303
    assert records.run_by_id(conn, check)["decisions"][0]["decision"] == "accept"
    # Leaving a replicate out recomputes with the same instrument and keeps the warning.
    other = record_run(staff, form_token, setup, purpose="recheck", burette_id=str(late.id))
    assert post(staff, form_token, f"/runs/{other}/exclude", {"position": "2", "reason": "spilled"}).status_code == 303
    cur = records.run_by_id(conn, other)["current"]
    assert cur["cause"] == "exclusion of replicate 2"
    assert any("BUR-OLD" in w for w in cur["result"]["warnings"])


def test_standing_reads_plainly_on_the_list(conn, signed_in_client):
    burette(conn, "BUR-LATE", calibrated=-400, due=-12)
    burette(conn, "BUR-SOON", calibrated=-300, due=10)
    burette(conn, "BUR-FINE", calibrated=-10, due=300)
    html = signed_in_client("staff").get("/instruments/").get_data(as_text=True)
    assert f"OVERDUE: calibration was due on {iso(-12)} (12 days ago)" in html
    assert f"due on {iso(10)} (in 10 days)" in html and f"in calibration until {iso(300)}" in html
    assert "1 instrument cannot certify a value today" in html


# ---------------------------------------------------------------------------------------------- forms


def register_form(**extra):
    form = {
        "code": "BUR-07",
        "kind": "burette",
        "capacity": "50",
        "accuracy_class": "A",
        "tolerance_ml": "",
        "division_ml": "0.1",
        "calibrated_on": iso(-3),
        "next_due_on": iso(362),
        "outcome": "pass",
        "certificate_ref": "CERT-0071",
        "calibrated_by": "Invented Metrology Ltd",
    }
    form.update(extra)
    return form


def test_register_through_the_form_takes_the_class_tolerance(conn, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = post(staff, form_token, "/instruments/new", register_form())
    assert resp.status_code == 303
    page = staff.get(resp.headers["Location"]).get_data(as_text=True)
    assert "±0.05 mL taken from the Class A table" in page and "CERT-0071" in page
    inst = inst_mod.list_instruments(conn)[0]
    assert (inst.code, inst.tolerance, inst.readability, inst.calibrations[0].next_due_on.isoformat()) == (
        "BUR-07",
        0.05,
        0.1,
        iso(362),
    )
    resp = post(
        staff,
        form_token,
        "/instruments/new",
        register_form(
            code="bal-1",
            kind="balance",
            capacity="220",
            accuracy_class="",
            division_ml="",
            readability_mg="0.1",
            linearity_mg="0.2",
        ),
    )
    assert resp.status_code == 303
    bal = next(i for i in inst_mod.list_instruments(conn) if i.kind == "balance")
    assert (bal.readability, bal.linearity_g) == (0.0001, 0.0002)  # mg on the form, g on record
    # A recalibration from the instrument's page adds to the history.
    resp = post(
        staff,
        form_token,
        f"/instruments/{bal.id}/calibrations",
        {
            "calibrated_on": iso(0),
            "next_due_on": iso(180),
            "outcome": "pass",
            "certificate_ref": "CERT-2",
            "stated_linearity_mg": "0.25",
        },
    )
    assert resp.status_code == 303
    bal = inst_mod.instrument_by_id(conn, bal.id)
    assert [c.certificate_ref for c in bal.calibrations] == ["CERT-0071", "CERT-2"]
    assert bal.linearity_on(TODAY) == 0.00025


@pytest.mark.parametrize(
    "change,field,message",
    [
        ({"code": ""}, "code", "required"),
        ({"code": "BUR 07!"}, "code", "letters, digits"),
        ({"kind": "flask"}, "kind", "must be one of"),
        ({"capacity": "-5"}, "capacity", "greater than 0"),
        ({"capacity": "30"}, "capacity", "runs offer burettes of 10, 25, 50, 100 mL"),
        ({"capacity": "5,0.0"}, "capacity", "mixes a comma and a point"),
        ({"accuracy_class": "", "tolerance_ml": ""}, "tolerance_ml", "is required"),
        ({"tolerance_ml": "5"}, "tolerance_ml", "at most 1 mL"),
        ({"tolerance_ml": "0.9", "capacity": "25"}, "tolerance_ml", "more than 2 % of 25 mL"),
        ({"linearity_mg": "0.2"}, "linearity_mg", "leave it blank"),
        ({"next_due_on": iso(-10)}, "next_due_on", "after the calibration date"),
        ({"calibrated_on": iso(4)}, "calibrated_on", "cannot be later"),
        ({"next_due_on": iso(4000)}, "next_due_on", "more than five years"),
        ({"certificate_ref": ""}, "certificate_ref", "required"),
        (
            {
                "kind": "balance",
                "capacity": "220",
                "readability_mg": "",
                "linearity_mg": "0.2",
                "tolerance_ml": "",
                "division_ml": "",
            },
            "readability_mg",
            "required",
        ),
    ],
)
def test_bad_register_input_is_caught_at_the_field_and_nothing_is_stored(
    conn, signed_in_client, form_token, change, field, message
):
    staff = signed_in_client("staff")
    before = count(conn, "instruments"), count(conn, "calibrations"), count(conn, "events")
    resp = post(staff, form_token, "/instruments/new", register_form(**change))
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    cell = re.search(rf'id="f-{field}"[^>]*>.*?<span class="field-error"[^>]*>([^<]+)</span>', html, re.S)
    assert cell, f"no error beside {field}"
    assert message in cell.group(1)
    assert (count(conn, "instruments"), count(conn, "calibrations"), count(conn, "events")) == before


def test_duplicate_id_and_bad_calibration_are_422_and_store_nothing(conn, signed_in_client, form_token):
    b = burette(conn, "BUR-07")
    staff = signed_in_client("staff")
    before = count(conn, "instruments"), count(conn, "events")
    resp = post(staff, form_token, "/instruments/new", register_form(code="bur-07"))
    assert resp.status_code == 422 and "already registered" in resp.get_data(as_text=True)
    assert (count(conn, "instruments"), count(conn, "events")) == before
    cals = count(conn, "calibrations")
    resp = post(
        staff,
        form_token,
        f"/instruments/{b.id}/calibrations",
        {"calibrated_on": iso(-60), "next_due_on": iso(100), "certificate_ref": "CAL-OLD"},
    )
    assert resp.status_code == 422 and "before the last calibration on record" in resp.get_data(as_text=True)
    resp = post(
        staff,
        form_token,
        f"/instruments/{b.id}/calibrations",
        {"calibrated_on": iso(0), "next_due_on": iso(100), "certificate_ref": "", "outcome": "maybe"},
    )
    html = resp.get_data(as_text=True)
    assert resp.status_code == 422 and "must be one of" in html and "certificate_ref" in html
    assert count(conn, "calibrations") == cals


def test_run_form_offers_instruments_and_checks_them(conn, setup, signed_in_client, form_token):
    b25 = inst_mod.register(
        conn, {"code": "BUR-25", "kind": "burette", "capacity": 25.0, "accuracy_class": "A", "tolerance": 0.03}, "setup"
    )
    bal = balance(conn, "BAL-1")
    staff = signed_in_client("staff")
    url = f"/batches/{setup['batch']['code']}/runs/new"
    page = staff.get(url).get_data(as_text=True)
    assert 'name="burette_id"' in page and 'name="balance_id"' in page and 'name="pipette_id"' not in page
    assert "BUR-25 · 25 mL, Class A ±0.03 mL · no calibration on record" in page
    before = count(conn, "runs"), count(conn, "run_instruments"), count(conn, "events")
    for extra, field, message in [
        ({"burette_id": str(b25.id)}, "burette_id", "25 mL burette but the run says 50 mL"),
        ({"burette_id": str(bal.id)}, "burette_id", "is a balance, not a burette"),
        ({"balance_id": "999"}, "balance_id", "no such instrument"),
        ({"balance_id": "x"}, "balance_id", "whole number"),
    ]:
        resp = post(staff, form_token, url, run_form(setup, **extra))
        assert resp.status_code == 422
        html = resp.get_data(as_text=True)
        cell = re.search(rf'id="f-{field}".*?<span class="field-error"[^>]*>([^<]+)</span>', html, re.S)
        assert cell and message in cell.group(1), (field, message)
    assert (count(conn, "runs"), count(conn, "run_instruments"), count(conn, "events")) == before


def test_permissions(app, conn, client, signed_in_client, form_token):
    b = burette(conn, "BUR-P")
    assert client.get("/instruments/").status_code == 200  # reads are open (OPEN_READS)
    assert client.get(f"/instruments/{b.id}").status_code == 200
    assert client.get("/instruments/new").status_code == 303
    instructor = signed_in_client("instructor")
    assert instructor.get("/instruments/new").status_code == 403
    resp = post(
        instructor,
        form_token,
        f"/instruments/{b.id}/calibrations",
        {"calibrated_on": iso(0), "next_due_on": iso(100), "certificate_ref": "X"},
    )
    assert resp.status_code == 403
    refused = conn.execute("SELECT detail FROM events WHERE action = 'access.refused' ORDER BY id DESC").fetchone()
    assert json.loads(refused[0])["permission"] == "instrument.register"
    assert signed_in_client("admin").get("/instruments/new").status_code == 200
    assert client.get("/instruments/999").status_code == 404


def test_a_suspect_burette_reaches_the_values_it_helped_certify(conn, setup, signed_in_client, form_token):
    from stockroom import recall as recall_mod

    bur = burette(conn, "BUR-SUS")
    other = burette(conn, "BUR-CLEAN")
    staff = signed_in_client("staff")
    used = record_run(staff, form_token, setup, burette_id=str(bur.id))
    assert post(staff, form_token, f"/runs/{used}/decide", {"decision": "accept"}).status_code == 303
    release_id = conn.execute("SELECT id FROM releases WHERE run_id = ?", [used]).fetchone()[0]
    resp = post(
        staff,
        form_token,
        "/recalls/new",
        {"subject": f"instrument:{bur.id}", "suspect_from": iso(-1), "reason": "failed its check: reads 0.2 mL high (invented)"},
    )
    assert resp.status_code == 303
    rid = int(resp.headers["Location"].rsplit("/", 1)[1])
    report = recall_mod.impact(conn, rid, TODAY)
    assert [r.release_id for r in report.releases] == [release_id]
    assert report.recall.subject_label == "burette BUR-SUS"
    page = staff.get(f"/instruments/{bur.id}").get_data(as_text=True)
    assert f"/recalls/{rid}" in page and "failed its check" in page
    assert f"/recalls/{rid}" not in staff.get(f"/instruments/{other.id}").get_data(as_text=True)
    # A value certified with the other burette is not reached, even after the recall.
    clean = record_run(staff, form_token, setup, burette_id=str(other.id))
    assert (
        post(
            staff,
            form_token,
            f"/runs/{clean}/decide",
            {"decision": "accept", "reason": "re-made with a checked burette (invented)"},
        ).status_code
        == 303
    )
    assert [r.release_id for r in recall_mod.impact(conn, rid, TODAY).releases] == [release_id]
    states = {b.code: b.state for b in recall_mod.impact(conn, rid, TODAY).batches}
    assert states == {setup["batch"]["code"]: "re-standardized"}
