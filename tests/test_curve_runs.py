"""A replicate's titration curve at every door: form, CSV import, JSON API and preview store and compute the same.

The curves are invented (stockroom.curve_synth: KHP titrated with NaOH, pH from the exact charge balance
with seeded noise); the located end points are checked against the equivalence volume the invented
masses imply (n(KHP) = m / M, V_e = n / c).
"""

from __future__ import annotations

import datetime as dt
import io
import json
import math
import re
from html import unescape

import curve_models
import pytest
from formposts import count, post

from stockroom import curve_synth, endpoints, records, run_input, tokens
from stockroom import db as dbmod
from stockroom.errors import InvalidInput

TODAY = dt.date.today()
C_TRUE = 0.1  # mol/L: the invented titrant's strength the curves were generated with
MASSES = ("0.8179", "0.8012", "0.8260")  # g of KHP (invented)
SEEDS = (11, 12, 13)


def iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


def curves():
    return [curve_synth.khp_curve(float(m), C_TRUE, seed=s) for m, s in zip(MASSES, SEEDS, strict=True)]


def budget_line(result, source):
    """The budget component of that source (the stored or previewed result's budget is by factor)."""
    return next(c for f in result["budget"] for c in f["components"] if c["source"] == source)


def located(points):
    return endpoints.locate([p[0] for p in points], [p[1] for p in points])[0]


@pytest.fixture
def conn(app):
    c = dbmod.connect(app.config["DATABASE"])
    yield c
    c.close()


@pytest.fixture
def world(app, conn, signed_in_client):
    staff = signed_in_client("staff")
    user = conn.execute("SELECT id, username FROM users WHERE username = 'staff-user'").fetchone()
    token = tokens.create(conn, user[0], user[1], "curve script")[1]
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
    return {"staff": staff, "token": token, "lot": lot, "curves": curves()}


def new_batch(conn, n):
    return records.create_batch(
        conn,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": iso(-2),
            "prepared_by": f"Curve Person {n}",
            "water_grade": "CO2-free",
        },
        "setup",
    )


def top(world):
    return {
        "purpose": "certify",
        "performed_on": TODAY.isoformat(),
        "analyst": "Curve Person",
        "burette_capacity_ml": "50.0",
        "temperature_c": "20.0",
        "endpoint": "glass electrode, derivative",
        "standard_lot_id": str(world["lot"]["id"]),
    }


def readings_for(world):
    """Replicate 2 also gives burette readings that agree with its curve (titre = located volume to 0.01 mL)."""
    ve = located(world["curves"][1]).volume_ml
    return "0.10", f"{0.10 + round(ve, 2):.2f}"


def by_form(world, form_token, batch):
    form = {**top(world), "action": "record", "curve_reading": "ph", "curve_method": "derivative"}
    initial, final = readings_for(world)
    for i, (mass, pts) in enumerate(zip(MASSES, world["curves"], strict=True), start=1):
        form[f"r{i}_mass_g"] = mass
        form[f"r{i}_curve"] = curve_synth.as_text(pts)
    form.update(r2_initial_ml=initial, r2_final_ml=final)
    resp = post(world["staff"], form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, unescape(resp.get_data(as_text=True))[:3000]
    return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))


def by_csv(world, form_token, batch):
    initial, final = readings_for(world)
    sheet = ["replicate,mass_g,initial_ml,final_ml"]
    sheet += [f"1,{MASSES[0]},,", f"2,{MASSES[1]},{initial},{final}", f"3,{MASSES[2]},,"]
    points = ["replicate,volume_ml,ph"]
    for i, pts in enumerate(world["curves"], start=1):
        points += [f"{i},{v:g},{e:.2f}" for v, e in pts]
    staff = world["staff"]
    data = {
        "csrf_token": form_token(staff, "/"),
        "sheet": (io.BytesIO("\n".join(sheet).encode()), "bench.csv"),
        "curves": (io.BytesIO("\n".join(points).encode()), "meter.csv"),
    }
    page = staff.post(f"/batches/{batch['code']}/runs/import", data=data, content_type="multipart/form-data")
    html = page.get_data(as_text=True)
    assert page.status_code == 200, unescape(html)[:3000]
    grid = {m.group(1): unescape(m.group(2)) for m in re.finditer(r'name="(r\d+_\w+)" id="[^"]+" value="([^"]*)"', html)}
    grid.update(
        {
            m.group(1): unescape(m.group(2))
            for m in re.finditer(r'<textarea id="f-(r\d+_curve)"[^>]*>(.*?)</textarea>', html, re.S)
        }
    )
    form = {**top(world), "action": "record", **{k: v for k, v in grid.items() if v}}
    resp = post(staff, form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, unescape(resp.get_data(as_text=True))[:3000]
    return int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))


def as_json(world):
    body = {**top(world), "burette_capacity_ml": 50.0, "temperature_c": 20.0, "standard_lot_id": world["lot"]["id"]}
    initial, final = readings_for(world)
    body["replicates"] = [
        {"mass_g": float(m), "curve": [list(p) for p in pts]} for m, pts in zip(MASSES, world["curves"], strict=True)
    ]
    body["replicates"][1].update(initial_ml=float(initial), final_ml=float(final))
    return body


def by_api(client, world, batch, body):
    return client.post(
        f"/api/v1/batches/{batch['code']}/runs",
        headers={"Authorization": f"Bearer {world['token']}"},
        data=json.dumps(body),
        content_type="application/json",
    )


def stored(conn, run_id):
    def rows(sql, drop=()):
        cur = conn.execute(sql, [run_id])
        names = [d[0] for d in cur.description]
        return [{k: v for k, v in zip(names, r, strict=True) if k not in drop} for r in cur.fetchall()]

    out = {
        "runs": rows("SELECT * FROM runs WHERE id = ?", ("id", "batch_id", "recorded_at")),
        "replicates": rows("SELECT * FROM replicates WHERE run_id = ? ORDER BY position", ("id", "run_id")),
        "curves": rows("SELECT * FROM replicate_curves WHERE run_id = ? ORDER BY position", ("id", "run_id", "recorded_at")),
        "run_results": rows("SELECT * FROM run_results WHERE run_id = ?", ("id", "run_id", "recorded_at")),
    }
    for r in out["run_results"]:
        r["result_json"] = json.loads(r["result_json"])
    return out


def test_form_csv_and_api_store_identical_curves(app, client, conn, world, form_token):
    b_form, b_csv, b_api = (new_batch(conn, n) for n in range(3))
    via_form = stored(conn, by_form(world, form_token, b_form))
    via_csv = stored(conn, by_csv(world, form_token, b_csv))
    resp = by_api(client, world, b_api, as_json(world))
    assert resp.status_code == 201, resp.get_json()
    via_api = stored(conn, resp.get_json()["run_id"])
    assert via_form == via_csv
    assert via_form == via_api
    curves_rows = via_api["curves"]
    assert [c["position"] for c in curves_rows] == [1, 2, 3]
    assert [c["point_count"] for c in curves_rows] == [len(p) for p in world["curves"]]
    assert json.loads(curves_rows[0]["points_json"]) == [list(p) for p in world["curves"][0]]
    # The located end points sit where the invented masses put them: V_e = 1000 m / (M c), M(KHP) 204.22 g/mol
    # (IUPAC atomic weights), within 3 u of the located volume.
    for c, mass in zip(curves_rows, MASSES, strict=True):
        ve = 1000 * float(mass) / curve_synth.KHP_MOLAR_MASS_G_MOL / C_TRUE
        assert abs(c["volume_ml"] - ve) < 3 * c["u_ml"] + 0.01, (c["volume_ml"], ve, c["u_ml"])
        assert c["method"] == "derivative" and c["reading"] == "ph"
    # Replicates 1 and 3 left the readings empty: the located volume is their titre.
    reps = via_api["replicates"]
    assert reps[0]["volume_ml"] == round(curves_rows[0]["volume_ml"], 4) and reps[0]["initial_ml"] is None
    assert reps[1]["volume_ml"] == pytest.approx(float(readings_for(world)[1]) - 0.10, abs=1e-9)
    # The run's audit entry names the curves.
    detail = json.loads(
        conn.execute(
            "SELECT detail FROM events WHERE entity = 'runs' AND entity_id = ? AND action LIKE 'run.record.%'",
            [resp.get_json()["run_id"]],
        ).fetchone()[0]
    )
    assert [(c["position"], c["points"]) for c in detail["curves"]] == [(i, len(p)) for i, p in enumerate(world["curves"], 1)]
    assert detail["curves"][0]["u_ml"] == pytest.approx(curves_rows[0]["u_ml"], rel=1e-12)


def test_the_preview_computes_the_stored_result_from_the_same_curves(app, client, conn, world, form_token):
    run_id = by_form(world, form_token, new_batch(conn, 0))
    result = records.run_by_id(conn, run_id)["current"]["result"]
    lot = world["lot"]
    body = as_json(world)
    preview = {
        "titrant": "NaOH",
        "nominal_molarity": 0.1,
        "standard": "KHP",
        "purity": lot["assay"],
        "purity_U": lot["assay_expanded_u"],
        "purity_k": lot["assay_k"],
        "burette_capacity_ml": 50.0,
        "temperature_c": 20.0,
        "replicates": body["replicates"],
    }
    policy = records.policy_for(conn, "NaOH", TODAY)
    preview.update(min_replicates=policy.min_replicates, max_rsd=policy.max_rsd)
    resp = client.post("/api/v1/standardizations/preview", json=preview)
    assert resp.status_code == 200, resp.get_json()
    got = resp.get_json()
    for key in ("molarity", "u", "U", "n"):
        assert got[key] == pytest.approx(result[key], rel=1e-12), key
    assert [b["source"] for b in got["budget"]] == [b["source"] for b in result["budget"]]
    line = budget_line(got, "end point (located)")
    assert "located from the curve, derivative method" in line["derivation"]


@pytest.mark.parametrize(
    ("curve", "words"),
    [
        ("0, 3.2\n1, 3.9", "must have 5 to 500 points (it has 2)"),
        ("0, 3.2\n1, 3.9\n2, 4.1\n3, 4.3\n4, 17.5", "line 5: the reading must be"),
        ("0, 3.2\n1, 3.9\n0.5, 4.1\n3, 4.3\n4, 4.5", "line 3: the volume added goes back from the volume before it"),
        ("0, 3.2\n1, 3.9\n2, 4.1\n3, 4.3\n60, 12.5", "line 5: the volume added must be"),
        ("0, 3.2\n1; 3.9\nabc\n3, 4.3\n4, 4.5", "line 3 ('abc') must be a volume and a reading"),
        ("0, 3.20\n1, 3.21\n2, 3.22\n3, 3.23\n4, 3.24", "show no end point"),
    ],
)
def test_a_bad_curve_is_refused_by_its_label_and_nothing_is_written(app, conn, world, form_token, curve, words):
    batch = new_batch(conn, 0)
    before = count(app, "runs"), count(app, "replicate_curves")
    form = {**top(world), "action": "record", "r1_mass_g": MASSES[0], "r1_curve": curve}
    resp = post(world["staff"], form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 422
    html = unescape(resp.get_data(as_text=True))
    assert "Replicate 1, titration curve" in html and words in html, html[html.find("Nothing was saved") :][:800]
    assert (count(app, "runs"), count(app, "replicate_curves")) == before


def test_a_titre_that_disagrees_with_its_curve_by_more_than_3u_is_refused_at_every_door(app, client, conn, world):
    pts = world["curves"][0]
    ep = located(pts)
    body = as_json(world)
    body["replicates"] = [
        {"mass_g": float(MASSES[0]), "initial_ml": 0.0, "final_ml": round(ep.volume_ml + 4 * ep.u_ml, 2) + 0.01}
    ]
    body["replicates"][0]["curve"] = [list(p) for p in pts]
    resp = by_api(client, world, new_batch(conn, 0), body)
    assert resp.status_code == 422
    (err,) = resp.get_json()["errors"]
    assert err["field"] == "replicates[0].final_ml" and "more than 3 standard uncertainties" in err["message"]
    # Within 3 u it is taken, and the typed titre (not the located one) is the replicate's volume.
    ok = {"performed_on": TODAY.isoformat(), **{k: v for k, v in body.items() if k != "performed_on"}}
    ok["replicates"] = [
        {"mass_g": float(MASSES[0]), "initial_ml": 0.0, "final_ml": round(ep.volume_ml, 2), "curve": ok["replicates"][0]["curve"]}
    ]
    parsed = run_input.parse_run(ok, today=TODAY)
    assert parsed.replicates[0].volume_ml == round(ep.volume_ml, 2)
    assert parsed.replicates[0].curve.end_point.volume_ml == pytest.approx(ep.volume_ml, rel=1e-12)
    assert count(app, "replicate_curves") == 0


def test_a_curve_showing_two_breaks_is_refused_in_words():
    # Sodium carbonate titrated with HCl breaks twice, at 12.5 and 25 mL (exact charge balance with the CRC
    # Handbook's carbonic acid constants, tests/curve_models.py).
    vols = curve_models.schedule([12.5, 25.0], 28.0)
    ph = curve_models.carbonate_with_hcl(vols)
    body = {
        "purpose": "certify",
        "performed_on": TODAY.isoformat(),
        "analyst": "A",
        "burette_capacity_ml": 50,
        "standard_lot_id": 1,
        "replicates": [{"mass_g": 0.1, "curve": "\n".join(f"{v:g}, {e:.3f}" for v, e in zip(vols, ph, strict=True))}],
    }
    with pytest.raises(InvalidInput) as caught:
        run_input.parse_run(body, today=TODAY)
    (err,) = caught.value.errors
    assert err.field == "replicates[0].curve" and "shows 2 end points" in err.message


def test_the_stored_curve_keeps_its_u_when_a_replicate_is_excluded(app, client, conn, world, form_token):
    run_id = by_form(world, form_token, new_batch(conn, 0))
    run = records.run_by_id(conn, run_id)
    u1 = [c["curve"]["u_ml"] for c in run["replicates"]]
    resp = post(world["staff"], form_token, f"/runs/{run_id}/exclude", {"position": "3", "reason": "electrode drift (invented)"})
    assert resp.status_code in (302, 303), resp.get_data(as_text=True)[:2000]
    result = records.run_by_id(conn, run_id)["current"]["result"]
    line = budget_line(result, "end point (located)")
    # Two included replicates, each with its located u: √(u1² + u2²) / 2 (mL), relative to the effective titre.
    expected_ml = math.sqrt(u1[0] ** 2 + u1[1] ** 2) / 2
    assert f"({expected_ml:.2g} mL)" in line["derivation"]


@pytest.mark.parametrize(
    ("text", "line", "words"),
    [
        ("replicate,volume_ml,ph,mv\n1,0,3", 1, "one of ph or mv"),
        ("replicate,volume_ml,ph\n4,0,3.2", 2, "replicate must be a whole number from 1 to 3"),
        ("replicate,volume_ml,ph\n1,,3.2", 2, "needs both volume_ml and ph"),
        ("replicate,volume_ml,ph\n1,0", 2, "has 2 cells; the header has 3"),
        ("replicate,volume_ml,ph\n", 0, "a header but no points"),
    ],
)
def test_a_broken_curve_file_is_refused_line_by_line(text, line, words):
    from stockroom import csvio

    sheet = csvio.read_curve_sheet(text, 3, 500)
    assert any(n == line and words in message for n, message in sheet.problems), sheet.problems


def test_the_curve_file_fills_each_replicates_box_with_its_own_points():
    from stockroom import csvio

    sheet = csvio.read_curve_sheet("# meter export (invented)\nreplicate,mv,volume_ml\n2,-120,0\n1,-118,0\n2,-110,1.5", 3, 500)
    assert sheet.problems == [] and sheet.reading == "mv"
    assert sheet.curves == {2: ["0, -120", "1.5, -110"], 1: ["0, -118"]}


def test_the_curve_export_reads_back_through_the_curve_sheet_reader(app, conn, world, form_token):
    from stockroom import csvio

    batch = new_batch(conn, 0)
    run_id = by_form(world, form_token, batch)
    run = records.run_by_id(conn, run_id)
    resp = world["staff"].get(f"/runs/{run_id}/curves.csv")
    assert resp.status_code == 200 and resp.mimetype == "text/csv"
    assert resp.headers["Content-Disposition"] == f'attachment; filename="{batch["code"]}-run-{run_id}-curves.csv"'
    text = resp.get_data(as_text=True)
    sheet = csvio.read_curve_sheet(text, 3, run_input.LIMITS.max_curve_points)
    assert sheet.problems == [] and sheet.reading == "ph"
    assert sorted(sheet.curves) == [1, 2, 3]
    for rep, pasted in zip(run["replicates"], world["curves"], strict=True):
        lines = sheet.curves[rep["position"]]
        # Every digit stored comes back: the points equal what was pasted (as the form's box held it).
        assert [tuple(float(x) for x in line.split(",")) for line in lines] == [(float(f"{v:g}"), round(e, 2)) for v, e in pasted]
        # Read again by the one curve parser, the end point is the stored one.
        p = run_input.Parser()
        again = run_input.read_curve(p, "\n".join(lines), "curve", reading="ph", method="derivative", scale_ml=50.0)
        assert p.errors == []
        assert again.end_point.volume_ml == pytest.approx(rep["curve"]["volume_ml"], rel=1e-12)
        assert again.end_point.u_ml == pytest.approx(rep["curve"]["u_ml"], rel=1e-12)
    # The located end point and its u stand in a comment line per replicate (U = k u with the app's k).
    k = float(app.config["COVERAGE_FACTOR"])
    first = run["replicates"][0]["curve"]
    comments = [line for line in text.splitlines() if line.startswith('"#')]
    assert any(
        f"replicate 1: end point located at {first['volume_ml']:.4f} mL, standard uncertainty u = " in c
        and f"± {k * first['u_ml']:.3f}"[:6] in c
        for c in comments
    ), comments
    assert text.splitlines()[len(comments)] == '"replicate","volume_ml","ph"'


def test_exported_curves_imported_again_store_the_same_curves(app, conn, world, form_token):
    """Export a run's curves, upload the file as the curve file of a CSV import, record: the same curve rows."""
    original = by_form(world, form_token, new_batch(conn, 0))
    exported = world["staff"].get(f"/runs/{original}/curves.csv").get_data(as_text=True)
    staff = world["staff"]
    initial, final = readings_for(world)
    sheet = ["replicate,mass_g,initial_ml,final_ml", f"1,{MASSES[0]},,", f"2,{MASSES[1]},{initial},{final}", f"3,{MASSES[2]},,"]
    batch = new_batch(conn, 1)
    data = {
        "csrf_token": form_token(staff, "/"),
        "sheet": (io.BytesIO("\n".join(sheet).encode()), "bench.csv"),
        "curves": (io.BytesIO(exported.encode()), "exported-curves.csv"),
    }
    page = staff.post(f"/batches/{batch['code']}/runs/import", data=data, content_type="multipart/form-data")
    html = page.get_data(as_text=True)
    assert page.status_code == 200, unescape(html)[:3000]
    grid = {m.group(1): unescape(m.group(2)) for m in re.finditer(r'name="(r\d+_\w+)" id="[^"]+" value="([^"]*)"', html)}
    grid.update(
        {
            m.group(1): unescape(m.group(2))
            for m in re.finditer(r'<textarea id="f-(r\d+_curve)"[^>]*>(.*?)</textarea>', html, re.S)
        }
    )
    form = {**top(world), "action": "record", "curve_method": "derivative", **{k: v for k, v in grid.items() if v}}
    resp = post(staff, form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, unescape(resp.get_data(as_text=True))[:3000]
    again = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    before, after = stored(conn, original), stored(conn, again)
    drop = ("recorded_by",)
    assert [{k: v for k, v in c.items() if k not in drop} for c in after["curves"]] == [
        {k: v for k, v in c.items() if k not in drop} for c in before["curves"]
    ]
    assert after["replicates"] == before["replicates"]


def test_a_run_without_curves_has_no_curve_export(app, conn, world, form_token):
    batch = new_batch(conn, 0)
    form = {**top(world), "action": "record", "r1_mass_g": MASSES[0], "r1_initial_ml": "0.10", "r1_final_ml": "40.15"}
    resp = post(world["staff"], form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 303, unescape(resp.get_data(as_text=True))[:3000]
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    missing = world["staff"].get(f"/runs/{run_id}/curves.csv")
    assert missing.status_code == 404 and "has no titration curves" in missing.get_data(as_text=True)
    # The run page offers the download only where it shows curves.
    assert "curves.csv" not in world["staff"].get(f"/runs/{run_id}").get_data(as_text=True)


def test_a_curve_in_a_row_past_the_server_rendered_ones_is_read_and_shown_again(app, conn, world, form_token):
    """Row 7 (one the script adds): its curve is read as row 1's, and a refused form shows it again in its box."""
    batch = new_batch(conn, 0)
    text = curve_synth.as_text(world["curves"][0])
    form = {**top(world), "action": "record", "r7_mass_g": MASSES[0], "r7_curve": text, "analyst": ""}
    resp = post(world["staff"], form_token, f"/batches/{batch['code']}/runs/new", form)
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    shown = re.search(r'<textarea id="f-r7_curve" name="r7_curve"[^>]*>(.*?)</textarea>', html, re.S)
    assert shown is not None and unescape(shown.group(1)) == text
    assert "Replicate 7, titration curve (volume mL, reading)" in html
    assert 'name="r7_mass_g" id="f-r7_mass_g" value="0.8179"' in html


def test_the_curve_export_keeps_numbers_bare_and_text_in_one_defused_cell():
    """OWASP "CSV Injection": comment text is one quoted cell; negative mV readings stay numbers."""
    import csv

    from stockroom import csvio, csvsafe

    points = [(0.0, -310.5), (5.0, -250.0), (10.0, -120.25), (10.5, 80.0), (15.0, 150.0)]
    curve = {"reading": "mv", "method": "derivative", "points": points, "volume_ml": 10.25, "u_ml": 0.0125}
    run = {"id": 4, "replicates": [{"position": 1, "curve": curve}, {"position": 2}]}
    text = csvio.write_curves(run, {"code": "=HYPERLINK(1)", "reagent": "+cmd"}, 2.0)
    rows = list(csv.reader(io.StringIO(text)))
    comments = [r for r in rows if r[0].startswith("#")]
    assert all(len(r) == 1 for r in comments) and "=HYPERLINK(1)" in comments[0][0]
    # u = 0.0125 mL, so U = 0.025 mL at k = 2: "10.250 ± 0.025 mL (k = 2)" (two significant figures of U).
    assert "end point located at 10.2500 mL, standard uncertainty u = 0.013 mL, that is 10.250 ± 0.025 mL (k = 2)" in text
    data = rows[len(comments) :]
    assert data[0] == ["replicate", "volume_ml", "mv"]
    assert [(int(a), float(b), float(c)) for a, b, c in data[1:]] == [(1, v, e) for v, e in points]
    assert "\n1,0.0,-310.5\n" in text  # bare, not a quoted or apostrophed cell
    assert all(csvsafe.is_number(c) for r in data[1:] for c in r)
