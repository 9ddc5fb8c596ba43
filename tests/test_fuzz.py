"""Hypothesis fuzzing of the preview API, the run form, the JSON run API and the CSV import: only 4xx,
never 5xx, nothing stored."""

from __future__ import annotations

import datetime as dt
import io
import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockroom import accounts, create_app, records, tokens
from stockroom import db as dbmod

TODAY = dt.date.today()

nasty_text = st.one_of(
    st.sampled_from(
        [
            "",
            " ",
            "NaN",
            "nan",
            "inf",
            "-Infinity",
            "1e309",
            "1e-320",
            "0,25",
            "1.2.3",
            "--1",
            "0x10",
            "１２",
            "٣",
            "12 g",
            "<script>alert(1)</script>",
            "'; DROP TABLE runs;--",
            "\x00",
            "9" * 400,
            "0",
            "-0",
            "+5",
            ".5",
            "5.",
        ]
    ),
    st.text(max_size=30),
)
nasty_number = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.sampled_from([0, -1, 1e-300, 1e300, True, False, None]),
)
# Two levels of nesting, built explicitly (st.recursive's unused-argument check misfires under newer Hypothesis).
_leaf = st.one_of(nasty_number, nasty_text)
_nested = st.lists(_leaf, max_size=3) | st.dictionaries(st.text(max_size=8), _leaf, max_size=3)
json_value = _leaf | _nested | st.lists(_nested, max_size=2) | st.dictionaries(st.text(max_size=8), _nested, max_size=2)


@pytest.fixture(scope="module")
def world(tmp_path_factory):
    path = tmp_path_factory.mktemp("fuzz") / "f.db"
    app = create_app(
        {"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "t", "WTF_CSRF_ENABLED": False, "MONTE_CARLO_DRAWS": 2000}
    )
    conn = dbmod.connect(path)
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    user = accounts.create_user(conn, "fuzzer", "Fuzzer", "staff", "fuzzing-Test-91ab", "test")
    token = tokens.create(conn, user.id, user.username, "fuzzing")[1]
    batch = records.create_batch(
        conn,
        {"reagent": "HCl", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": TODAY.isoformat(), "prepared_by": "t"},
        "test",
    )
    lot = records.create_lot(
        conn,
        {
            "substance": "Na2CO3",
            "assay": 0.9998,
            "assay_expanded_u": 0.0004,
            "assay_k": 2,
            "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 280,
        },
        "test",
    )
    conn.close()
    client = app.test_client()
    assert client.post("/sign-in", data={"username": "fuzzer", "password": "fuzzing-Test-91ab"}).status_code == 303
    return {"app": app, "client": client, "batch": batch, "lot": lot, "path": path, "token": token}


def _counts(world):
    conn = dbmod.connect(world["path"])
    try:
        return tuple(conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in ("runs", "replicates"))
    finally:
        conn.close()


def _check_answer(resp):
    assert resp.status_code < 500, resp.get_data(as_text=True)[:500]


FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


@FUZZ
@given(
    fields=st.dictionaries(
        st.sampled_from(
            [
                "titrant",
                "standard",
                "purity",
                "u_purity",
                "nominal_molarity",
                "buoyancy",
                "u_mass_g",
                "u_volume_ml",
                "reference",
                "exclusions",
                "monte_carlo_draws",
                "extra",
            ]
        ),
        json_value,
        max_size=6,
    ),
    reps=st.lists(
        st.dictionaries(
            st.sampled_from(["mass_g", "volume_ml", "temperature_c", "blank_ml", "gross_g", "tare_g", "aliquot_ml", "bogus"]),
            st.one_of(nasty_number, nasty_text),
            max_size=4,
        ),
        max_size=4,
    ),
)
def test_preview_api_never_fails_with_5xx(world, fields, reps):
    body = {"titrant": "HCl", "standard": "Na2CO3", "purity": 0.9998, **fields, "replicates": reps}
    try:
        data = json.dumps(body)
    except (ValueError, TypeError):
        return
    resp = world["client"].post("/api/v1/standardizations/preview", data=data, content_type="application/json")
    _check_answer(resp)
    if resp.status_code != 200:
        errors = resp.get_json()["errors"]
        assert errors and all(e["field"] and e["message"] for e in errors)


@FUZZ
@given(raw=st.binary(max_size=200))
def test_preview_api_survives_any_body(world, raw):
    resp = world["client"].post("/api/v1/standardizations/preview", data=raw, content_type="application/json")
    _check_answer(resp)


@FUZZ
@given(
    values=st.dictionaries(
        st.sampled_from(
            [
                "purpose",
                "standard_lot_id",
                "performed_on",
                "analyst",
                "burette_capacity_ml",
                "temperature_c",
                "endpoint",
                "r1_gross_g",
                "r1_tare_g",
                "r1_mass_g",
                "r1_initial_ml",
                "r1_final_ml",
                "r1_blank_ml",
                "r1_temperature_c",
                "r1_exclude",
                "r1_exclude_reason",
                "r2_mass_g",
                "r2_initial_ml",
                "r2_final_ml",
                "r60_final_ml",
            ]
        ),
        nasty_text,
        max_size=12,
    )
)
def test_run_form_never_fails_with_5xx_and_stores_nothing_when_refused(world, values):
    before = _counts(world)
    values = dict(values, action="record")
    resp = world["client"].post(f"/batches/{world['batch']['code']}/runs/new", data=values)
    _check_answer(resp)
    if resp.status_code >= 400:
        assert _counts(world) == before
        assert "field-error" in resp.get_data(as_text=True) or resp.status_code in (404, 409)


@FUZZ
@given(
    text=st.one_of(
        st.text(max_size=300),
        st.builds(
            lambda header, rows: header + "\n" + "\n".join(rows),
            st.sampled_from(
                [
                    "replicate,mass_g,initial_ml,final_ml",
                    "gross_g,tare_g,initial_ml,final_ml,exclude_reason",
                    "initial_ml,final_ml",
                    "a,b,c",
                ]
            ),
            st.lists(
                st.lists(nasty_text, min_size=1, max_size=5).map(lambda cells: ",".join(c.replace("\n", " ") for c in cells)),
                max_size=5,
            ),
        ),
    )
)
def test_csv_import_never_fails_with_5xx_and_stores_nothing(world, text):
    before = _counts(world)
    data = {"sheet": (io.BytesIO(text.encode("utf-8", "surrogatepass")), "f.csv")}
    resp = world["client"].post(f"/batches/{world['batch']['code']}/runs/import", data=data, content_type="multipart/form-data")
    _check_answer(resp)
    assert _counts(world) == before


@FUZZ
@given(
    fields=st.dictionaries(
        st.sampled_from(
            [
                "method",
                "purpose",
                "performed_on",
                "analyst",
                "burette_capacity_ml",
                "temperature_c",
                "standard_lot_id",
                "reference_batch",
                "burette_id",
                "balance_id",
                "notes",
                "extra",
            ]
        ),
        json_value,
        max_size=6,
    ),
    reps=st.one_of(
        json_value,
        st.lists(
            st.dictionaries(
                st.sampled_from(["mass_g", "gross_g", "tare_g", "initial_ml", "final_ml", "blank_ml", "exclude_reason", "bogus"]),
                st.one_of(nasty_number, nasty_text),
                max_size=5,
            ),
            max_size=4,
        ),
    ),
)
def test_run_api_never_fails_with_5xx_and_stores_nothing_when_refused(world, fields, reps):
    body = {
        "purpose": "certify",
        "performed_on": TODAY.isoformat(),
        "analyst": "Fuzzer",
        "burette_capacity_ml": 50,
        "standard_lot_id": world["lot"]["id"],
        **fields,
        "replicates": reps,
    }
    try:
        data = json.dumps(body)
    except (ValueError, TypeError):
        return
    before = _counts(world)
    resp = world["client"].post(
        f"/api/v1/batches/{world['batch']['code']}/runs",
        data=data,
        content_type="application/json",
        headers={"Authorization": f"Bearer {world['token']}"},
    )
    _check_answer(resp)
    if resp.status_code >= 400:
        assert _counts(world) == before
        errors = resp.get_json()["errors"]
        assert errors and all(e["field"] and e["message"] for e in errors)


@FUZZ
@given(
    fields=st.dictionaries(st.sampled_from(["method", "u_reading", "initial_volume_ml", "extra"]), json_value, max_size=3),
    points=st.lists(
        st.dictionaries(st.sampled_from(["volume_ml", "ph", "mv", "bogus"]), st.one_of(nasty_number, nasty_text), max_size=3),
        max_size=8,
    ),
)
def test_end_points_api_never_fails_with_5xx(world, fields, points):
    try:
        data = json.dumps({**fields, "points": points})
    except (ValueError, TypeError):
        return
    resp = world["client"].post("/api/v1/end-points", data=data, content_type="application/json")
    _check_answer(resp)
    if resp.status_code != 200:
        errors = resp.get_json()["errors"]
        assert errors and all(e["field"] and e["message"] for e in errors)


@FUZZ
@given(
    volumes=st.lists(st.floats(min_value=0, max_value=1000), min_size=5, max_size=30),
    readings=st.lists(st.floats(min_value=-2, max_value=16), min_size=30, max_size=30),
    method=st.sampled_from(["derivative", "second-derivative", "gran"]),
)
def test_end_points_api_on_valid_looking_curves_never_fails_with_5xx(world, volumes, readings, method):
    points = [{"volume_ml": v, "ph": e} for v, e in zip(sorted(volumes), readings, strict=False)]
    resp = world["client"].post("/api/v1/end-points", json={"points": points, "method": method})
    _check_answer(resp)
