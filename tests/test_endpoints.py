"""End points located on titration curves computed from the exact charge balance (tests/curve_models.py).

The stoichiometric volumes are exact by construction (moles of standard / titrant molarity), so each
method is checked against arithmetic outside the module; the curves use published constants (CRC
Handbook of Chemistry and Physics: phthalic acid pKa2 5.41, carbonic acid pKa1 6.35 and pKa2 10.33,
Kw 1.0e-14 at 25 °C), solved for [H+] with scipy.optimize.brentq.
"""

from __future__ import annotations

import numpy as np
import pytest
from curve_models import carbonate_with_hcl, khp_with_naoh, schedule, strong_acid_with_naoh

from stockroom import create_app, endpoints
from stockroom.errors import InvalidInput

# 1.000 mmol of KHP (or HCl) in 50 mL with 0.1 mol/L NaOH: 10.000 mL; 1.25 mmol of Na2CO3 with
# 0.1 mol/L HCl: 12.500 mL to HCO3- and 25.000 mL to H2CO3 (stoichiometry).
KHP_VE = 10.0
CARBONATE_VE = (12.5, 25.0)
# Nernst slope at 25 °C, RT ln(10) / F = 59.16 mV per pH (CODATA constants): pH -> a glass electrode's mV.
NERNST_MV = 59.16


def _khp():
    v = schedule([KHP_VE], 15.0)
    return v, khp_with_naoh(v)


def _carbonate():
    v = schedule(list(CARBONATE_VE), 30.0)
    return v, carbonate_with_hcl(v)


def test_schedule_is_uneven_like_a_recorded_curve():
    v, _ = _khp()
    steps = np.round(np.diff(v), 4)
    assert set(steps) == {1.0, 0.1, 0.05}


@pytest.mark.parametrize("method", [endpoints.DERIVATIVE, endpoints.SECOND_DERIVATIVE, endpoints.GRAN])
def test_khp_with_naoh_exact_curve(method):
    v, e = _khp()
    (found,) = endpoints.locate(v, e, method=method)
    # Within 0.01 mL (0.1 %) of the stoichiometric 10.000 mL: the inflection of a pKa 5.41 acid at
    # 0.02 mol/L lies within a few µL of equivalence (computed curve), Gran's line within 0.01 mL.
    assert found.volume_ml == pytest.approx(KHP_VE, abs=0.01)
    assert found.method == method
    assert 0 < found.u_ml < 0.2
    if method != endpoints.GRAN:
        # The step the value falls in is the 0.05 mL step near the end point: u_step = 0.025 / sqrt(3).
        assert found.step_ml == pytest.approx(0.05)
        assert found.u_step_ml == pytest.approx(0.025 / np.sqrt(3))
        assert found.reading == pytest.approx(8.8, abs=0.3)  # the equivalence pH of 0.017 mol/L phthalate


@pytest.mark.parametrize("method", [endpoints.DERIVATIVE, endpoints.SECOND_DERIVATIVE])
def test_carbonate_with_hcl_shows_both_end_points(method):
    v, e = _carbonate()
    found = endpoints.locate(v, e, method=method)
    assert [round(p.volume_ml, 2) for p in found] == [12.5, 25.0]
    for p, ve in zip(found, CARBONATE_VE, strict=True):
        assert p.volume_ml == pytest.approx(ve, abs=0.01)
    # The first break (HCO3-, pH near 8.3) and the second (H2CO3, pH near 4); computed curve.
    assert found[0].reading == pytest.approx(8.34, abs=0.1)
    assert found[1].reading == pytest.approx(4.1, abs=0.2)


def test_millivolt_readings_give_the_same_volume():
    v, e = _khp()
    mv = 400.0 - NERNST_MV * e
    (by_ph,) = endpoints.locate(v, e)
    (by_mv,) = endpoints.locate(v, mv, kind=endpoints.MV)
    assert by_mv.volume_ml == pytest.approx(by_ph.volume_ml, abs=1e-9)  # a linear map moves no extremum


def test_gran_strong_acid_with_initial_volume():
    v = schedule([KHP_VE], 15.0)
    e = strong_acid_with_naoh(v)
    (found,) = endpoints.locate(v, e, method=endpoints.GRAN, initial_volume_ml=50.0)
    # (V0 + V) [H+] = c_b (Ve - V) exactly while [OH-] is negligible: the line meets zero at 10.000 mL.
    assert found.volume_ml == pytest.approx(KHP_VE, abs=1e-4)
    assert found.u_fit_ml < 1e-6
    assert found.points_used >= endpoints.GRAN_MIN_POINTS


def test_noisy_khp_curve_within_its_uncertainty():
    rng = np.random.default_rng(19)
    v, e = _khp()
    e = e + rng.normal(0.0, 0.01, len(e))  # 0.01 pH reading noise
    (d,) = endpoints.locate(v, e, u_reading=0.01)
    assert d.volume_ml == pytest.approx(KHP_VE, abs=0.02)
    assert abs(d.volume_ml - KHP_VE) <= 3 * d.u_ml
    (g,) = endpoints.locate(v, e, method=endpoints.GRAN, u_reading=0.01)
    # Gran extrapolates 10^-pH: 0.01 pH is 2.3 % on each G, so the value is a tenth of a mL out.
    assert abs(g.volume_ml - KHP_VE) <= 3 * g.u_ml
    assert g.u_ml > d.u_ml


def test_noisy_carbonate_curve_still_shows_both():
    rng = np.random.default_rng(19)
    v, e = _carbonate()
    e = e + rng.normal(0.0, 0.003, len(e))  # 0.003 pH reading noise
    found = endpoints.locate(v, e, u_reading=0.003)
    assert len(found) == 2
    # The first break is weak (1.7 pH/mL at most), so it is the less certain: 0.1 mL; the second 0.03 mL.
    assert found[0].volume_ml == pytest.approx(CARBONATE_VE[0], abs=0.1)
    assert found[1].volume_ml == pytest.approx(CARBONATE_VE[1], abs=0.03)


def test_noise_raises_the_uncertainty():
    v, e = _khp()
    (quiet,) = endpoints.locate(v, e, u_reading=0.0)
    (loud,) = endpoints.locate(v, e, u_reading=0.05)
    assert quiet.u_noise_ml == 0.0
    assert quiet.u_ml == pytest.approx(0.025 / np.sqrt(3))
    assert loud.u_ml > quiet.u_ml


# ---------------------------------------------------------------- refusals


def _message(exc_info) -> str:
    return " | ".join(f"{e.field}: {e.message}" for e in exc_info.value.errors)


def test_refuses_too_few_points():
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate([0, 1, 2, 3], [3, 4, 5, 6])
    assert "at least 5 points" in _message(exc)


@pytest.mark.parametrize(("second", "word"), [(0.0, "repeats"), (-0.5, "goes back")])
def test_refuses_volumes_that_repeat_or_go_back(second, word):
    v, e = _khp()
    v = v.copy()
    v[2] = v[1] + second
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate(v, e)
    assert exc.value.errors[0].field == "points[2].volume_ml"
    assert word in exc.value.errors[0].message


def test_refuses_a_curve_without_a_break():
    v = np.linspace(0, 10, 21)
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate(v, 3.0 + 0.05 * v)
    assert "no end point" in _message(exc)


def test_refuses_a_curve_stopped_at_the_break():
    v, e = _khp()
    keep = v <= 10.05
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate(v[keep], e[keep])
    assert "too few readings past the break" in _message(exc)


def test_refuses_coarse_steps_across_the_end_point():
    v = np.arange(0.0, 16.0, 1.0)
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate(v, khp_with_naoh(v))
    assert "too far apart near the end point" in _message(exc)


def test_refuses_readings_out_of_range():
    v, e = _khp()
    e = e.copy()
    e[3] = 17.0
    with pytest.raises(InvalidInput) as exc:
        endpoints.locate(v, e)
    assert exc.value.errors[0].field == "points[3].ph"


def test_gran_refuses_millivolts_and_falling_curves():
    v, e = _khp()
    with pytest.raises(InvalidInput, match="reads pH"):
        endpoints.locate(v, 400 - NERNST_MV * e, kind=endpoints.MV, method=endpoints.GRAN)
    v, e = _carbonate()
    with pytest.raises(InvalidInput, match="pH rising"):
        endpoints.locate(v, e, method=endpoints.GRAN)


# ---------------------------------------------------------------- API


@pytest.fixture
def client(tmp_path):
    app = create_app({"DATABASE": str(tmp_path / "ep.db"), "TESTING": True, "SECRET_KEY": "t"})
    return app.test_client()


def test_api_locates_both_carbonate_end_points(client):
    v, e = _carbonate()
    body = {"points": [{"volume_ml": float(a), "ph": float(b)} for a, b in zip(v, e, strict=True)]}
    resp = client.post("/api/v1/end-points", json=body)
    assert resp.status_code == 200, resp.get_json()
    out = resp.get_json()
    assert [round(p["volume_ml"], 2) for p in out["end_points"]] == [12.5, 25.0]
    assert all(p["method"] == "derivative" and p["u_ml"] > 0 for p in out["end_points"])
    assert out["points"] == len(v)
    first = out["end_points"][0]
    # The weak first break at the default 0.01 pH: u near 0.2 mL, so U (k = 2) reads to two figures.
    assert first["u_ml"] == pytest.approx(0.21, abs=0.02)
    assert first["display"]["volume"] == f"12.50 ± {2 * first['u_ml']:.2f} mL (k = 2)"
    assert first["display"]["reading"] == "pH 8.34"


def test_api_gran_in_millivolts_is_refused_by_field(client):
    v, e = _khp()
    body = {
        "method": "gran",
        "points": [{"volume_ml": float(a), "mv": float(400 - NERNST_MV * b)} for a, b in zip(v, e, strict=True)],
    }
    resp = client.post("/api/v1/end-points", json=body)
    assert resp.status_code == 422
    assert resp.get_json()["errors"][0]["field"] == "method"


def test_api_names_each_bad_field(client):
    points = [{"volume_ml": i, "ph": 3 + i} for i in range(6)]
    points[2] = {"volume_ml": 2, "mv": 100}
    points[4] = {"volume_ml": "x", "ph": 20}
    resp = client.post("/api/v1/end-points", json={"points": points, "method": "guess", "extra": 1})
    assert resp.status_code == 422
    fields = {e["field"] for e in resp.get_json()["errors"]}
    assert fields == {"extra", "method", "points[2].mv", "points[4].volume_ml", "points[4].ph"}
    resp = client.post("/api/v1/end-points", json={"points": points[:3]})
    assert resp.status_code == 422
    assert resp.get_json()["errors"] == [{"field": "points", "message": "must have at least 5 entries"}]


def test_api_refuses_backwards_volumes(client):
    points = [{"volume_ml": v, "ph": 3 + i} for i, v in enumerate([0, 1, 2, 1.5, 4, 5])]
    resp = client.post("/api/v1/end-points", json={"points": points})
    assert resp.status_code == 422
    assert resp.get_json()["errors"][0]["field"] == "points[3].volume_ml"
