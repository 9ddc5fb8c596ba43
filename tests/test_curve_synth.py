"""The demo's curve generator agrees with the tests' own charge-balance model and puts the break where it belongs."""

from __future__ import annotations

import curve_models
import numpy as np
import pytest

from stockroom import curve_synth, endpoints


def test_the_ph_matches_the_independent_charge_balance_model():
    # tests/curve_models.py solves the same charge balance separately (CRC Handbook constants).
    vols = np.array([0.0, 5.0, 10.0, 19.0, 19.9, 20.0, 20.1, 25.0])
    mine = curve_synth.khp_with_naoh_ph(vols, khp_mol=0.002, v0_ml=50.0, c_naoh=0.1)
    theirs = curve_models.khp_with_naoh(vols, khp_mol=0.002, v0_ml=50.0, c_naoh=0.1)
    np.testing.assert_allclose(mine, theirs, atol=1e-9)


def test_half_way_to_the_end_point_the_ph_is_near_pka2():
    # Henderson-Hasselbalch: at half-neutralization pH ≈ pKa2 = 5.41 (CRC Handbook), shifted a little by
    # the ionic balance of water and the dilution; within 0.05 pH here.
    ph = curve_synth.khp_with_naoh_ph(np.array([20.0]), khp_mol=0.004, v0_ml=50.0, c_naoh=0.1)[0]
    assert ph == pytest.approx(5.41, abs=0.05)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_a_noisy_curve_locates_at_its_equivalence_volume(seed):
    mass, c = 0.8150, 0.1003
    pts = curve_synth.khp_curve(mass, c, seed=seed)
    ve = 1000 * mass / curve_synth.KHP_MOLAR_MASS_G_MOL / c  # V_e = n(KHP) / c(NaOH), mL
    (ep,) = endpoints.locate([p[0] for p in pts], [p[1] for p in pts])
    assert abs(ep.volume_ml - ve) < 3 * ep.u_ml, (ep.volume_ml, ve, ep.u_ml)
    # Steps as an analyst adds titrant: 1 mL far away, 0.05 mL within 0.3 mL of the end point.
    vols = np.array([p[0] for p in pts])
    near = vols[np.abs(vols - ve) < 0.25]
    assert np.allclose(np.diff(near), 0.05) and np.diff(vols).max() == pytest.approx(1.0)
    assert all(round(e, 2) == e for _, e in pts)  # read to 0.01 pH, as a bench meter shows
