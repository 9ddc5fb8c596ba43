"""One run, four doors: the form, the CSV import, the JSON API and the preview agree exactly.

The same invented run (four replicates of about 0.1 mol/L NaOH against KHP, one left out with a
reason, a named burette and balance) goes in by each door; the rows stored in runs, replicates,
exclusions, run_instruments and run_results are compared column by column (ids, timestamps and
audit ids aside), and the preview of the same payload gives the stored numbers.
"""

from __future__ import annotations

import datetime as dt
import io
import json
import re
from html import unescape

import pytest
from formposts import post

from stockroom import db as dbmod
from stockroom import instruments as inst_mod
from stockroom import records, tokens

TODAY = dt.date.today()
# Invented readings: gross g, tare g, initial mL, final mL, blank mL, temperature °C.
ROWS = [
    ("12.4581", "11.6402", "0.12", "40.21", "0.03", "21.5"),
    ("12.0117", "11.1891", "0.40", "40.73", "0.03", ""),
    ("11.9012", "11.0759", "0.05", "40.50", "0.03", "22.0"),
    ("12.2230", "11.4170", "0.30", "39.82", "0.03", ""),
]
COLS = ("gross_g", "tare_g", "initial_ml", "final_ml", "blank_ml", "temperature_c")
LEFT_OUT = {3: "bubble in the burette tip"}


def iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


@pytest.fixture
def world(app, conn, signed_in_client, make_user):
    staff = signed_in_client("staff")  # the account staff-user, who also holds the API token
    user = conn.execute("SELECT id, username FROM users WHERE username = 'staff-user'").fetchone()
    token = tokens.create(conn, user[0], user[1], "parity script")[1]
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 0.99995,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": iso(300),
            "dried_on": iso(0),
            "dried_at_c": 120,
        },
        "setup",
    )

    def calibrated(code, kind, capacity, due=300, **figures):
        values = {"code": code, "kind": kind, "capacity": capacity, **figures}
        cal = {
            "calibrated_on": iso(-400 if due < 0 else -10),
            "next_due_on": iso(due),
            "outcome": "pass",
            "certificate_ref": f"CAL-{code}",
        }
        return inst_mod.register(conn, values, "setup", cal)

    bur = calibrated("BUR-7", "burette", 50.0, accuracy_class="A", tolerance=inst_mod.class_tolerance("burette", "A", 50.0))
    late = calibrated(
        "BUR-LATE", "burette", 50.0, due=-3, accuracy_class="A", tolerance=inst_mod.class_tolerance("burette", "A", 50.0)
    )
    bal = calibrated("BAL-2", "balance", 220.0, readability=0.0001, linearity_g=0.0002)
    return {"staff": staff, "token": token, "lot": lot, "burette": bur, "late": late, "balance": bal}


def new_batch(conn, n):
    return records.create_batch(
        conn,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": iso(-2),
            "prepared_by": f"Parity Person {n}",
            "water_grade": "CO2-free",
        },
        "setup",
    )


def top_fields(world, burette_id=None):
    return {
        "purpose": "certify",
        "performed_on": TODAY.isoformat(),
        "analyst": "Parity Person",
        "burette_capacity_ml": "50.0",
        "temperature_c": "20.5",
        "endpoint": "phenolphthalein, first pink for 30 s",
        "notes": "invented run for the parity test",
        "standard_lot_id": str(world["lot"]["id"]),
        "burette_id": str(burette_id or world["burette"].id),
        "balance_id": str(world["balance"].id),
    }


def as_json(world, burette_id=None):
    body = top_fields(world, burette_id)
    body.update(
        burette_capacity_ml=50.0,
        temperature_c=20.5,
        standard_lot_id=world["lot"]["id"],
        burette_id=int(body["burette_id"]),
        balance_id=world["balance"].id,
    )
    reps = []
    for i, row in enumerate(ROWS, start=1):
        rep = {c: float(v) for c, v in zip(COLS, row, strict=True) if v}
        if i in LEFT_OUT:
            rep["exclude_reason"] = LEFT_OUT[i]
        reps.append(rep)
    body["replicates"] = reps
    return body


def by_api(client, world, batch, body):
    return client.post(
        f"/api/v1/batches/{batch['code']}/runs",
        headers={"Authorization": f"Bearer {world['token']}"},
        data=json.dumps(body),
        content_type="application/json",
    )


def by_form(world, form_token, batch, **extra):
    form = {**top_fields(world), "action": "record", **extra}
    for i, row in enumerate(ROWS, start=1):
        form.update({f"r{i}_{c}": v for c, v in zip(COLS, row, strict=True)})
        if i in LEFT_OUT:
            form.update({f"r{i}_exclude": "on", f"r{i}_exclude_reason": LEFT_OUT[i]})
    resp = post(world["staff"], form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, resp.get_data(as_text=True)[:3000]
    return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))


def by_csv(world, form_token, batch):
    """Upload the sheet, take the grid it fills, add the run's own fields and record it from the form."""
    lines = ["replicate," + ",".join(COLS) + ",exclude_reason"]
    lines += [f"{i}," + ",".join(row) + f",{LEFT_OUT.get(i, '')}" for i, row in enumerate(ROWS, start=1)]
    staff = world["staff"]
    data = {"csrf_token": form_token(staff, "/"), "sheet": (io.BytesIO("\n".join(lines).encode()), "bench.csv")}
    page = staff.post(f"/batches/{batch['code']}/runs/import", data=data, content_type="multipart/form-data")
    assert page.status_code == 200, page.get_data(as_text=True)[:3000]
    html = page.get_data(as_text=True)
    grid = {m.group(1): unescape(m.group(2)) for m in re.finditer(r'name="(r\d+_\w+)" id="[^"]+" value="([^"]*)"', html)}
    grid.update({m.group(1): "on" for m in re.finditer(r'name="(r\d+_exclude)" [^>]*checked', html)})
    form = {**top_fields(world), "action": "record", **{k: v for k, v in grid.items() if v}}
    resp = post(staff, form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, resp.get_data(as_text=True)[:3000]
    return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))


def stored(conn, run_id):
    """Every row a run stored, without ids, timestamps, audit ids and the batch it belongs to."""

    def rows(sql, drop=()):
        cur = conn.execute(sql, [run_id])
        names = [d[0] for d in cur.description]
        return [{k: v for k, v in zip(names, r, strict=True) if k not in drop} for r in cur.fetchall()]

    out = {
        "runs": rows("SELECT * FROM runs WHERE id = ?", ("id", "batch_id", "recorded_at")),
        "replicates": rows("SELECT * FROM replicates WHERE run_id = ? ORDER BY position", ("id", "run_id")),
        "exclusions": rows("SELECT * FROM exclusions WHERE run_id = ? ORDER BY position", ("id", "run_id", "recorded_at")),
        "run_instruments": rows(
            "SELECT * FROM run_instruments WHERE run_id = ? ORDER BY role", ("id", "run_id", "recorded_at", "event_id")
        ),
        "run_results": rows("SELECT * FROM run_results WHERE run_id = ?", ("id", "run_id", "recorded_at")),
    }
    for r in out["run_results"]:
        r["result_json"] = json.loads(r["result_json"])
    for r in out["run_instruments"]:
        r.pop("batch_id", None)
    return out


def test_form_csv_and_api_store_identical_rows(app, client, conn, world, form_token):
    b_form, b_csv, b_api = (new_batch(conn, n) for n in range(3))
    via_form = stored(conn, by_form(world, form_token, b_form))
    via_csv = stored(conn, by_csv(world, form_token, b_csv))
    resp = by_api(client, world, b_api, as_json(world))
    assert resp.status_code == 201, resp.get_json()
    via_api = stored(conn, resp.get_json()["run_id"])
    assert via_form == via_csv
    assert via_form == via_api
    # And the rows hold what was typed: the link to both instruments, the reason, the readings.
    assert [(r["role"], r["instrument_id"]) for r in via_api["run_instruments"]] == [
        ("balance", world["balance"].id),
        ("burette", world["burette"].id),
    ]
    assert via_api["exclusions"] == [{"position": 3, "reason": LEFT_OUT[3], "recorded_by": "staff-user"}]
    reps = via_api["replicates"]
    assert [r["volume_ml"] for r in reps] == [40.09, 40.33, 40.45, 39.52]
    assert [r["temperature_c"] for r in reps] == [21.5, 20.5, 22.0, 20.5]  # the run's 20.5 °C where a row gives none
    assert reps[0]["mass_g"] == pytest.approx(12.4581 - 11.6402, abs=1e-12)
    assert via_api["runs"][0]["recorded_by"] == "staff-user" and via_api["run_results"][0]["n"] == 3


def test_the_preview_of_the_same_payload_equals_the_stored_result(app, client, conn, world, form_token):
    batch = new_batch(conn, 0)
    run_id = by_form(world, form_token, batch)
    result = records.run_by_id(conn, run_id)["current"]["result"]
    lot = world["lot"]
    body = as_json(world)
    figures = inst_mod.figures({}, {"burette": world["burette"], "balance": world["balance"]}, TODAY)
    policy = records.policy_for(conn, "NaOH", TODAY)
    preview = {
        "titrant": "NaOH",
        "nominal_molarity": 0.1,
        "standard": "KHP",
        "purity": lot["assay"],
        "purity_U": lot["assay_expanded_u"],
        "purity_k": lot["assay_k"],
        "burette_capacity_ml": body["burette_capacity_ml"],
        "temperature_c": body["temperature_c"],
        "burette_tolerance_ml": figures.burette_tolerance_ml,
        "balance_readability_g": figures.balance_readability_g,
        "balance_linearity_g": figures.balance_linearity_g,
        "min_replicates": policy.min_replicates,
        "max_rsd": policy.max_rsd,
        "replicates": body["replicates"],
    }
    resp = client.post("/api/v1/standardizations/preview", json=preview)
    assert resp.status_code == 200, resp.get_json()
    got = resp.get_json()
    for key in ("molarity", "u", "U", "k", "n", "n_total", "sd", "rsd", "u_rel", "accepted"):
        assert got[key] == pytest.approx(result[key], rel=1e-12), key
    assert got["ci95"] == pytest.approx(result["ci95"], rel=1e-12)
    assert [r["molarity"] for r in got["replicates"]] == pytest.approx([r["molarity"] for r in result["replicates"]], rel=1e-12)
    assert [r["excluded"] for r in got["replicates"]] == [False, False, True, False]
    assert [(b["source"], b["u_rel"]) for b in got["budget"]] == [
        (b["source"], pytest.approx(b["u_rel"], rel=1e-12)) for b in result["budget"]
    ]
    # The display strings are the server formatter's: value ± U to U's second significant figure.
    from stockroom import formatting

    assert got["display"]["molarity"] == formatting.molarity(result["molarity"], result["U"], result["k"])
    assert got["display"]["replicates"][0] == f"{result['replicates'][0]['molarity']:.5f} mol/L"
    assert got["display"]["rsd"] == f"{result['rsd'] * 100:.3f} %"


def test_a_late_burette_blocks_the_release_through_the_api_as_through_the_form(app, client, conn, world, form_token):
    b_form, b_api = new_batch(conn, 0), new_batch(conn, 1)
    late = world["late"].id
    form_run = by_form(world, form_token, b_form, burette_id=str(late))
    resp = by_api(client, world, b_api, as_json(world, burette_id=late))
    assert resp.status_code == 201, resp.get_json()
    api_run = resp.get_json()["run_id"]
    assert any("BUR-LATE" in w and "cannot release" in w for w in resp.get_json()["result"]["warnings"])
    form_answer = post(world["staff"], form_token, f"/runs/{form_run}/decide", {"decision": "accept"})
    api_answer = client.post(
        f"/api/v1/runs/{api_run}/decision",
        headers={"Authorization": f"Bearer {world['token']}"},
        json={"decision": "accept"},
    )
    assert form_answer.status_code == api_answer.status_code == 409
    message = api_answer.get_json()["errors"][0]["message"]
    assert "burette BUR-LATE" in message and iso(-3) in message and "past its calibration due date" in message
    assert unescape(form_answer.get_data(as_text=True)).count(message) >= 1
    assert conn.execute("SELECT count(*) FROM releases").fetchone()[0] == 0


def test_the_api_refuses_a_withdrawn_batch_an_unknown_key_and_what_the_form_refuses(app, client, conn, world):
    batch = new_batch(conn, 0)
    before = conn.execute("SELECT count(*) FROM runs").fetchone()[0]
    body = as_json(world)
    body["colour"] = "pink"
    body["replicates"][0]["shade"] = "faint"
    resp = by_api(client, world, batch, body)
    assert resp.status_code == 422
    assert {e["field"] for e in resp.get_json()["errors"]} == {"colour", "replicates[0].shade"}
    # A mass the form refuses (over 50 g: a unit slip), an expired lot, an instrument of the wrong kind.
    bad = as_json(world)
    bad["replicates"][1] = {"mass_g": 812.3, "initial_ml": 0.1, "final_ml": 40.2}
    resp = by_api(client, world, batch, bad)
    assert resp.status_code == 422 and resp.get_json()["errors"][0]["field"] == "replicates[1].mass_g"
    wrong = as_json(world)
    wrong["burette_id"] = world["balance"].id
    resp = by_api(client, world, batch, wrong)
    assert resp.status_code == 422
    assert resp.get_json()["errors"] == [{"field": "burette_id", "message": "BAL-2 is a balance, not a burette"}]
    records.withdraw_batch(conn, batch["id"], TODAY, "contaminated (invented)", "setup")
    resp = by_api(client, world, batch, as_json(world))
    assert resp.status_code == 409 and "withdrawn" in resp.get_json()["errors"][0]["message"]
    assert conn.execute("SELECT count(*) FROM runs").fetchone()[0] == before


def test_the_decision_api_refuses_unknown_keys(app, client, conn, world):
    batch = new_batch(conn, 0)
    run_id = by_api(client, world, batch, as_json(world)).get_json()["run_id"]
    resp = client.post(
        f"/api/v1/runs/{run_id}/decision",
        headers={"Authorization": f"Bearer {world['token']}"},
        json={"decision": "accept", "releasd_on": TODAY.isoformat()},
    )
    assert resp.status_code == 422 and resp.get_json()["errors"][0]["field"] == "releasd_on"
    assert conn.execute("SELECT count(*) FROM decisions").fetchone()[0] == 0
