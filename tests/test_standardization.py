"""Standardization runs checked against published worked examples, reference libraries and invariants."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats as scipy_stats
from uncertainties import ufloat

from stockroom import chemistry, corrections, stats
from stockroom import settings as stock_settings
from stockroom.errors import InvalidInput
from stockroom.standardization import (
    AliquotReplicate,
    Exclusion,
    Instruments,
    PrimaryRun,
    Reference,
    Replicate,
    SecondaryRun,
    StandardSpec,
    standard_spec,
    standardize_primary,
    standardize_secondary,
)
from stockroom.uncertainty import InputQuantity

# QUAM:2012 A2 works with the older IUPAC atomic weights: M(KHP) = 204.2212 g/mol, u = 0.0038 g/mol.
KHP_QUAM = StandardSpec("KHP", "potassium hydrogen phthalate", 204.2212, 0.0038, 1.0, 1.636)


def quam_instruments(**changes) -> Instruments:
    """Instrument figures of QUAM:2012 A2.4 (from memory where the GTC reproduction does not show them):
    balance linearity ±0.15 mg (readability left in the repeatability term, as QUAM does), piston
    burette ±0.03 mL, lab ±3 °C at 95 % with α = 2.1e-4 /K (GTC shows the resulting 0.006 mL)."""
    base = Instruments(
        balance_readability_g=0.0,
        balance_linearity_g=0.00015,
        burette_capacity_ml=20.0,
        burette_tolerance_ml=0.03,
        pipette_tolerance_ml=0.02,
        lab_temperature_half_range_k=3.0,
        expansion_coefficient_per_k=2.1e-4,
        coverage_factor=2.0,
        monte_carlo_draws=100_000,
        lab_temperature_distribution="normal",
        # QUAM:2012 states U with k = 2 fixed, not from ν_eff.
        k_policy="fixed",
    )
    return dataclasses.replace(base, **changes)


def quam_a2_run() -> PrimaryRun:
    # QUAM:2012 A2: 0.3888 g KHP by difference, P = 1.0 ± 0.0005 (rectangular), 18.64 mL NaOH,
    # repeatability 0.05 % relative; QUAM applies no buoyancy correction.
    return PrimaryRun(
        standard=KHP_QUAM,
        replicates=(Replicate(18.64, gross_g=10.3888, tare_g=10.0),),
        purity=InputQuantity.rectangular("purity", 1.0, 0.0005),
        buoyancy=False,
        u_repeatability_rel=0.0005,
    )


def fast(inst: Instruments) -> Instruments:
    return dataclasses.replace(inst, monte_carlo_draws=2_000)


DEFAULTS = Instruments.from_settings({})


# --------------------------------------------------------------------------- published examples


def test_quam_a2_naoh_against_khp():
    r = standardize_primary(quam_a2_run(), quam_instruments())
    # QUAM:2012 Example A2, Table A2.1: c(NaOH) = 0.10214 mol/L, u = 0.00010 mol/L.
    assert round(r.molarity, 5) == 0.10214
    assert round(r.u, 5) == 0.00010
    # GTC's reproduction of A2 gives u = 0.000100500722 mol/L; ours uses 18.64 mL rather than QUAM's
    # rounded 19 mL in the temperature term, hence the 0.1 % tolerance.
    assert r.u == pytest.approx(0.000100500722, rel=1e-3)
    assert r.U == pytest.approx(2 * r.u)
    by = {f.name: f for f in r.gum.factors}
    # Table A2.1 standard uncertainties: m 0.00013 g (QUAM rounds 0.09 mg per weighing before
    # combining; unrounded √2·0.15/√3 = 0.122 mg), P 0.00029, M 0.0038 g/mol, V 0.013 mL
    # (unrounded 0.0136), repeatability 0.0005.
    assert by["mass"].u == pytest.approx(0.00013, rel=0.06)
    assert by["mass"].u == pytest.approx(math.sqrt(2) * 0.15e-3 / math.sqrt(3), rel=1e-12)
    assert round(by["purity"].u, 5) == 0.00029
    assert round(by["molar mass"].u, 4) == 0.0038
    assert by["titre volume"].u == pytest.approx(0.013, rel=0.06)
    assert by["repeatability"].u == 0.0005
    # Shares of the variance from GTC's A2 budget (u(y,x) 7.47E-5 V, 5.11E-5 R, 3.22E-5 m,
    # 2.95E-5 P, 1.88E-6 M over u_c 1.005E-4): V 55 %, R 26 %, m 10 %, P 9 %, M 0.04 %.
    assert by["titre volume"].share == pytest.approx(0.553, abs=0.01)
    assert by["repeatability"].share == pytest.approx(0.258, abs=0.01)
    assert by["mass"].share == pytest.approx(0.102, abs=0.01)
    assert by["purity"].share == pytest.approx(0.086, abs=0.01)
    assert by["molar mass"].share < 0.001
    # One replicate is not an accepted run under the default rule (n >= 3), whatever its numbers.
    assert not r.accepted
    assert any("at least 3" in reason for reason in r.reasons)


def test_quam_a3_hcl_against_that_naoh():
    # QUAM:2012 Example A3 takes the temperature range as ±4 °C rectangular for every volume
    # (GTC's reproduction: type_b.uniform(V·2.1e-4·4)), and a 15 mL pipette of ±0.02 mL.
    inst = quam_instruments(lab_temperature_half_range_k=4.0, lab_temperature_distribution="rectangular")
    naoh = standardize_primary(quam_a2_run(), inst)
    # QUAM A3 lumps the repeatability of the whole procedure into one 0.001 relative term. Our chain
    # carries the reference's full u (with its own 0.0005 repeatability) plus this run's own, so the
    # same total is reached with a run repeatability of √(0.001² − 0.0005²) (docs/measurement-model.md).
    run_rep = math.sqrt(0.001**2 - 0.0005**2)
    run = SecondaryRun(
        reference=Reference(naoh.molarity, naoh.u, "NaOH"),
        nu=1.0,
        replicates=(AliquotReplicate(aliquot_ml=15.0, volume_ml=14.89),),
        u_repeatability_rel=run_rep,
        # QUAM A3 gives the titre and the aliquot a temperature term each, independent.
        temperature_terms="independent",
    )
    r = standardize_secondary(run, inst)
    # QUAM:2012 A3: c(HCl) = 0.10139 mol/L, u ≈ 0.00018 mol/L.
    assert round(r.molarity, 5) == 0.10139
    assert round(r.u, 5) == 0.00018
    # GTC's reproduction prints u = 0.0001843 mol/L.
    assert r.u == pytest.approx(0.0001843, rel=5e-3)
    by = {f.name: f for f in r.gum.factors}
    # QUAM A3 Table A3.1 (GTC's figures): u(V_HCl) 0.011 mL, u(V_T2) 0.015 mL (our 14.89 mL in the
    # temperature term instead of 15 mL gives 0.0142).
    assert round(by["aliquot volume"].u, 3) == 0.011
    assert by["titre volume"].u == pytest.approx(0.015, rel=0.06)
    # Carrying QUAM's full 0.001 on top of the reference's own repeatability counts 0.0005 twice and
    # gives a larger, conservative u.
    double = standardize_secondary(dataclasses.replace(run, u_repeatability_rel=0.001), inst)
    assert double.u > r.u
    assert double.u == pytest.approx(r.molarity * math.sqrt(r.u_rel**2 - run_rep**2 + 0.001**2), rel=1e-9)


# --------------------------------------------------------------------------- model agreement


def _khp_run(n: int = 5, **changes) -> PrimaryRun:
    """An invented 0.1 mol/L NaOH run against KHP, masses by difference, with blanks (demo data)."""
    masses = [0.8123, 0.8241, 0.8090, 0.8302, 0.8177, 0.8212, 0.8150, 0.8266, 0.8105, 0.8230][:n]
    titres = [39.80, 40.39, 39.62, 40.70, 40.04, 40.22, 39.93, 40.49, 39.71, 40.33][:n]
    reps = tuple(
        Replicate(volume_ml=v, gross_g=15.0 + m, tare_g=15.0, blank_ml=0.03) for m, v in zip(masses, titres, strict=True)
    )
    run = PrimaryRun(
        standard=standard_spec("NaOH", "KHP"),
        replicates=reps,
        purity=InputQuantity.expanded("purity", 0.99995, 0.0002, 2.0),
        nominal_molarity=0.1,
    )
    return dataclasses.replace(run, **changes)


def _direct_ufloat_mean(run: PrimaryRun, inst: Instruments, result) -> tuple[float, float]:
    """The mean-of-replicates model written out with the `uncertainties` package.

    Every replicate shares the same balance, burette, temperature, blank, purity and molar-mass
    errors (each one ufloat used in all replicates); repeatability multiplies the mean.
    """
    spec = run.standard
    lin = inst.balance_linearity_g / math.sqrt(3)
    rd = inst.balance_readability_g / math.sqrt(12)
    d_mass = ufloat(0, lin) - ufloat(0, lin) + ufloat(0, rd) - ufloat(0, rd)
    p = ufloat(run.purity.value, run.purity.u)
    big_m = ufloat(spec.molar_mass_g_mol, spec.u_molar_mass_g_mol)
    d_cal = ufloat(0, inst.burette_tolerance_ml / math.sqrt(6))
    d_temp = ufloat(0, inst.lab_temperature_half_range_k / math.sqrt(3))  # K
    mean_blank = np.mean([r.blank_ml for r in run.replicates])
    d_blank = ufloat(0, mean_blank / math.sqrt(3))
    beta = result.replicates[0].mass_g / run.replicates[0].air_mass_g
    cs = []
    for rep in run.replicates:
        m = (rep.air_mass_g + d_mass) * beta
        v = (rep.volume_ml - rep.blank_ml - d_blank + d_cal) * (1 + inst.expansion_coefficient_per_k * d_temp)
        cs.append(1000 * m * p * spec.nu / (big_m * v))
    mean = sum(cs) / len(cs)
    s = result.summary
    r = ufloat(1.0, s.sd / math.sqrt(s.n) / s.mean)
    c = mean * r
    return c.nominal_value, c.std_dev


def test_product_model_equals_mean_of_replicates_model():
    run = _khp_run()
    r = standardize_primary(run, DEFAULTS)
    value, u = _direct_ufloat_mean(run, DEFAULTS, r)
    # The effective-quantity product model is the first-order expansion of the mean of the
    # replicates, so the `uncertainties` package (first order) must agree to rounding.
    assert r.molarity == pytest.approx(value, rel=1e-12)
    assert r.molarity == pytest.approx(r.summary.mean, rel=1e-14)
    assert r.u == pytest.approx(u, rel=1e-6)


def test_gum_agrees_with_monte_carlo_of_the_run():
    r = standardize_primary(_khp_run(), DEFAULTS)
    # JCGM 101:2008 7.9 validation: |GUM − MC| small against u for a nearly linear model.
    assert r.monte_carlo.u == pytest.approx(r.u, rel=0.03)
    assert r.monte_carlo.mean == pytest.approx(r.molarity, rel=1e-4)
    assert r.monte_carlo.low < r.molarity < r.monte_carlo.high


def test_monte_carlo_of_the_full_replicate_model_agrees():
    # Draw every shared error and push it through all replicates (no effective quantities), with
    # numpy directly, and compare with the product-model Monte Carlo the module reports.
    run = _khp_run()
    inst = DEFAULTS
    r = standardize_primary(run, inst)
    n = 100_000
    rng = np.random.default_rng(99)
    lin, d = inst.balance_linearity_g, inst.balance_readability_g
    d_mass = rng.uniform(-lin, lin, n) - rng.uniform(-lin, lin, n) + rng.uniform(-d / 2, d / 2, n) - rng.uniform(-d / 2, d / 2, n)
    p = run.purity.value + run.purity.u * rng.standard_normal(n)
    big_m = run.standard.molar_mass_g_mol + run.standard.u_molar_mass_g_mol * rng.standard_normal(n)
    tol = inst.burette_tolerance_ml
    d_cal = rng.triangular(-tol, 0, tol, n)
    a = inst.lab_temperature_half_range_k
    d_temp = rng.uniform(-a, a, n)
    d_blank = rng.uniform(-0.03, 0.03, n)
    beta = r.replicates[0].mass_g / run.replicates[0].air_mass_g
    total = np.zeros(n)
    for rep in run.replicates:
        m = (rep.air_mass_g + d_mass) * beta
        v = (rep.volume_ml - rep.blank_ml - d_blank + d_cal) * (1 + inst.expansion_coefficient_per_k * d_temp)
        total += 1000 * m * p * run.standard.nu / (big_m * v)
    s = r.summary
    c = total / len(run.replicates) * (1 + s.sd / math.sqrt(s.n) / s.mean * rng.standard_normal(n))
    assert float(c.std(ddof=1)) == pytest.approx(r.monte_carlo.u, rel=0.03)
    assert float(c.mean()) == pytest.approx(r.monte_carlo.mean, rel=1e-4)


# --------------------------------------------------------------------------- corrections in the chain


def test_buoyancy_of_tris_matches_textbook_factor():
    # Harvey, Analytical Chemistry 2.1 (buoyancy appendix): TRIS at 1.33 g/cm3 weighed against 8.0
    # g/cm3 weights in 0.0012 g/cm3 air reads low by a factor 1.00075.
    spec = standard_spec("HCl", "TRIS")
    reps = (Replicate(volume_ml=40.0, mass_g=0.4845),)
    on = standardize_primary(PrimaryRun(spec, reps, purity_value=1.0), fast(DEFAULTS))
    off = standardize_primary(PrimaryRun(spec, reps, purity_value=1.0, buoyancy=False), fast(DEFAULTS))
    assert on.molarity / off.molarity == pytest.approx(1.00075, abs=1e-5)
    assert on.replicates[0].mass_g == pytest.approx(0.4845 * 1.00075, rel=1e-5)


def test_temperature_referral_to_20c():
    # c(20 °C) = c(T)·[1 + α(T − 20)], α = 2.1e-4 /K (QUAM:2012; linear expansion model).
    base = _khp_run(3)
    warm = dataclasses.replace(base, replicates=tuple(dataclasses.replace(r, temperature_c=25.0) for r in base.replicates))
    c20 = standardize_primary(base, fast(DEFAULTS))
    c25 = standardize_primary(warm, fast(DEFAULTS))
    assert c25.molarity / c20.molarity == pytest.approx(1 + 2.1e-4 * 5, rel=1e-12)


def test_mass_by_difference_counts_two_weighings():
    by_diff = standardize_primary(_khp_run(3), fast(DEFAULTS))
    direct_reps = tuple(
        Replicate(volume_ml=r.volume_ml, mass_g=r.air_mass_g, blank_ml=r.blank_ml) for r in _khp_run(3).replicates
    )
    direct = standardize_primary(_khp_run(3, replicates=direct_reps), fast(DEFAULTS))
    assert by_diff.molarity == pytest.approx(direct.molarity, rel=1e-12)
    u_diff = {f.name: f.u for f in by_diff.gum.factors}["mass"]
    u_direct = {f.name: f.u for f in direct.gum.factors}["mass"]
    # Two independent readings, each with linearity a/√3 and readability d/√12 (GUM 4.3.7, F.2.2.1).
    assert u_diff == pytest.approx(math.sqrt(2) * u_direct, rel=1e-12)
    lin, d = DEFAULTS.balance_linearity_g, DEFAULTS.balance_readability_g
    assert u_direct == pytest.approx(math.hypot(lin / math.sqrt(3), d / math.sqrt(12)), rel=1e-12)


def test_stated_overrides_replace_instrument_terms():
    run = _khp_run(3, u_mass_g=0.0002, u_volume_ml=0.02, u_repeatability_rel=0.0004)
    r = standardize_primary(run, fast(DEFAULTS))
    by = {f.name: f for f in r.gum.factors}
    sources = {line.source for line in r.gum.lines}
    assert "burette calibration" not in sources and "balance linearity (gross weighing)" not in sources
    assert by["mass"].u == pytest.approx(0.0002)
    assert by["titre volume"].u == pytest.approx(math.hypot(0.02, 0.03 / math.sqrt(3)))  # blank stays
    assert by["repeatability"].u == 0.0004


# --------------------------------------------------------------------------- run handling


def test_outlier_is_flagged_not_dropped():
    base = _khp_run(5)
    reps = list(base.replicates)
    reps[2] = dataclasses.replace(reps[2], volume_ml=reps[2].volume_ml * 0.99)  # 1 % high molarity
    r = standardize_primary(dataclasses.replace(base, replicates=tuple(reps)), fast(DEFAULTS))
    # The same values through stats.grubbs, which the run uses (Grubbs 1969 critical value).
    g = stats.grubbs([x.molarity for x in r.replicates])
    assert g.outlier and g.index == 2
    assert r.replicates[2].outlier and "grubbs" in r.replicates[2].outlier_tests
    assert not r.replicates[2].excluded
    assert r.n == 5
    assert r.molarity == pytest.approx(np.mean([x.molarity for x in r.replicates]), rel=1e-14)
    assert any("replicate 3 is flagged" in w for w in r.warnings)


def test_exclusion_is_explicit_and_kept_in_the_result():
    base = _khp_run(5)
    r = standardize_primary(dataclasses.replace(base, exclusions=(Exclusion(2, "spilled at the end point"),)), fast(DEFAULTS))
    assert r.n == 4 and r.n_total == 5
    assert r.replicates[2].excluded and r.replicates[2].exclusion_reason == "spilled at the end point"
    kept = [x.molarity for i, x in enumerate(r.replicates) if i != 2]
    assert r.molarity == pytest.approx(np.mean(kept), rel=1e-14)
    assert r.summary.sd == pytest.approx(np.std(kept, ddof=1), rel=1e-10)
    with pytest.raises(InvalidInput) as exc:
        standardize_primary(dataclasses.replace(base, exclusions=(Exclusion(1, "  "),)), fast(DEFAULTS))
    assert "exclusions[0].reason" in exc.value.fields
    with pytest.raises(InvalidInput) as exc:
        standardize_primary(dataclasses.replace(base, exclusions=(Exclusion(7, "x"),)), fast(DEFAULTS))
    assert "exclusions[0].index" in exc.value.fields
    everything = tuple(Exclusion(i, "bad day") for i in range(5))
    with pytest.raises(InvalidInput) as exc:
        standardize_primary(dataclasses.replace(base, exclusions=everything), fast(DEFAULTS))
    assert "exclusions" in exc.value.fields


def test_acceptance_uses_the_rule_passed_in():
    r = standardize_primary(_khp_run(5), fast(DEFAULTS))
    assert r.summary.rsd is not None and r.summary.rsd < 0.002
    assert r.accepted, r.reasons
    strict = standardize_primary(_khp_run(5), fast(DEFAULTS), stats.AcceptanceRule(min_n=6, max_rsd=0.0001))
    assert not strict.accepted
    assert any("at least 6" in x for x in strict.reasons)
    assert any("exceeds the limit" in x for x in strict.reasons)


def test_nominal_checks_warn_and_refuse_with_a_cause():
    ok = standardize_primary(_khp_run(3, nominal_molarity=0.1), fast(DEFAULTS))
    assert ok.accepted and not any("nominal" in w for w in ok.warnings)
    off = standardize_primary(_khp_run(3, nominal_molarity=0.085), fast(DEFAULTS))
    assert off.accepted and any("beyond ±10 %" in w for w in off.warnings)
    dilution = standardize_primary(_khp_run(3, nominal_molarity=1.0), fast(DEFAULTS))
    assert not dilution.accepted and any("dilution or decimal-point" in x for x in dilution.reasons)
    unit = standardize_primary(_khp_run(3, nominal_molarity=0.0001), fast(DEFAULTS))
    assert not unit.accepted and any("unit slip" in x for x in unit.reasons)
    # KHP masses entered against sodium carbonate: c comes out ×3.85 (ν 2, M 105.99 against ν 1,
    # M 204.22), and the alternatives name KHP.
    wrong = _khp_run(
        3,
        standard=standard_spec("HCl", "Na2CO3"),
        alternatives=(
            standard_spec("HCl", "Na2CO3"),
            standard_spec("HCl", "TRIS"),
            StandardSpec("KHP", "potassium hydrogen phthalate", 204.22, 0.01, 1.0),
        ),
    )
    res = standardize_primary(wrong, fast(DEFAULTS))
    assert not res.accepted
    assert res.nominal_ratio == pytest.approx(2 * 204.22 / 105.99, rel=0.01)
    assert any("wrong standard" in x and "KHP" in x for x in res.reasons)


def test_low_titre_warning():
    # USP <31>: a titre under 30 % of the burette's capacity is imprecise.
    reps = (Replicate(volume_ml=12.0, mass_g=0.245), Replicate(volume_ml=16.0, mass_g=0.327))
    r = standardize_primary(PrimaryRun(standard_spec("NaOH", "KHP"), reps, purity_value=1.0), fast(DEFAULTS))
    assert r.replicates[0].warnings and "30 %" in r.replicates[0].warnings[0]
    assert not r.replicates[1].warnings  # 16 mL is above 15 mL, 30 % of 50 mL
    small = standardize_primary(
        PrimaryRun(standard_spec("NaOH", "KHP"), reps, purity_value=1.0, burette_capacity_ml=25.0), fast(DEFAULTS)
    )
    assert not any(x.warnings for x in small.replicates)


def test_small_runs_use_a_stated_or_limit_repeatability():
    reps = _khp_run(2).replicates
    r = standardize_primary(_khp_run(2), fast(DEFAULTS))
    rep_u = {f.name: f.u for f in r.gum.factors}["repeatability"]
    assert rep_u == pytest.approx(0.002 / math.sqrt(2))
    assert any("cannot be estimated" in w for w in r.warnings)
    stated = standardize_primary(_khp_run(2, u_repeatability_rel=0.0003), fast(DEFAULTS))
    assert {f.name: f.u for f in stated.gum.factors}["repeatability"] == 0.0003
    assert len(reps) == 2


def test_secondary_reverse_direction_and_reference_u_carried():
    ref = Reference(0.1000, 0.00008, "NaOH")
    reps = tuple(AliquotReplicate(aliquot_ml=25.0, volume_ml=v) for v in (24.80, 24.84, 24.78))
    fwd = standardize_secondary(SecondaryRun(ref, 1.0, reps), fast(DEFAULTS))
    rev = standardize_secondary(SecondaryRun(ref, 1.0, reps, aliquot_of="reference"), fast(DEFAULTS))
    assert fwd.molarity == pytest.approx(0.1 * np.mean([v / 25.0 for v in (24.80, 24.84, 24.78)]), rel=1e-12)
    assert rev.molarity == pytest.approx(0.1 * np.mean([25.0 / v for v in (24.80, 24.84, 24.78)]), rel=1e-12)
    # H2SO4 against NaOH: ν = 1/2 (chemistry.stoichiometric_factor), so half the molarity.
    half = standardize_secondary(SecondaryRun(ref, 0.5, reps), fast(DEFAULTS))
    assert half.molarity == pytest.approx(fwd.molarity / 2, rel=1e-12)
    by = {f.name: f for f in fwd.gum.factors}
    assert by["reference molarity"].u_rel == pytest.approx(0.0008, rel=1e-12)
    assert fwd.u_rel > 0.0008


def test_instruments_come_from_settings():
    config = stock_settings.resolve({"DATABASE": "/tmp/x/t.db", "SECRET_KEY": "k", "BURETTE_TOLERANCE_ML": 0.03})
    inst = Instruments.from_settings(config)
    assert inst.burette_tolerance_ml == 0.03
    defaults = {s.name: s.default for s in stock_settings.SETTINGS}
    assert DEFAULTS.balance_linearity_g == defaults["BALANCE_LINEARITY_G"]
    assert DEFAULTS.monte_carlo_draws == defaults["MONTE_CARLO_DRAWS"]
    assert DEFAULTS.lab_temperature_half_range_k == defaults["LAB_TEMPERATURE_HALF_RANGE_K"]


def test_invalid_runs_name_the_field():
    bad = PrimaryRun(
        standard_spec("NaOH", "KHP"),
        (
            Replicate(volume_ml=40.0, mass_g=-0.8),
            Replicate(volume_ml=0.0, mass_g=0.8),
            Replicate(volume_ml=40.0, gross_g=10.0, tare_g=10.5),
            Replicate(volume_ml=0.5, mass_g=0.8, blank_ml=0.6),
            Replicate(volume_ml=40.0, mass_g=0.8, temperature_c=60.0),
        ),
        purity_value=1.2,
    )
    with pytest.raises(InvalidInput) as exc:
        standardize_primary(bad, fast(DEFAULTS))
    fields = exc.value.fields
    assert fields["replicates[0].mass_g"] == "must be greater than 0 g"
    assert "replicates[1].volume_ml" in fields
    assert "replicates[2].gross_g" in fields
    assert "replicates[3].blank_ml" in fields
    assert fields["replicates[4].temperature_c"] == "must be between 5 and 40 °C"
    assert "purity" in fields


# --------------------------------------------------------------------------- properties

_masses = st.floats(min_value=0.05, max_value=5.0)
_volumes = st.floats(min_value=5.0, max_value=50.0)
_replicates = st.lists(st.tuples(_masses, _volumes, st.floats(min_value=0.0, max_value=0.2)), min_size=1, max_size=8)


def _run_of(rows, buoyancy=True) -> PrimaryRun:
    reps = tuple(Replicate(volume_ml=v, mass_g=m, blank_ml=min(b, v / 2)) for m, v, b in rows)
    return PrimaryRun(standard_spec("NaOH", "KHP"), reps, purity_value=0.9998, buoyancy=buoyancy)


@settings(max_examples=40, deadline=None)
@given(_replicates, st.floats(min_value=0.2, max_value=5.0))
def test_scaling_all_masses_scales_molarity(rows, f):
    base = standardize_primary(_run_of(rows), fast(DEFAULTS))
    scaled = standardize_primary(_run_of([(m * f, v, b) for m, v, b in rows]), fast(DEFAULTS))
    # c = 1000·m·P·ν/(M·V) is linear in m (buoyancy is a factor too).
    assert scaled.molarity == pytest.approx(base.molarity * f, rel=1e-12)
    for a, b in zip(base.replicates, scaled.replicates, strict=True):
        assert b.molarity == pytest.approx(a.molarity * f, rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(_replicates.filter(lambda r: len(r) >= 2), st.randoms(use_true_random=False))
def test_permuting_replicates_changes_nothing(rows, rnd):
    shuffled = list(rows)
    rnd.shuffle(shuffled)
    a = standardize_primary(_run_of(rows), fast(DEFAULTS))
    b = standardize_primary(_run_of(shuffled), fast(DEFAULTS))
    assert b.molarity == pytest.approx(a.molarity, rel=1e-12)
    assert b.u == pytest.approx(a.u, rel=1e-9)
    assert b.U == pytest.approx(a.U, rel=1e-9)
    assert (b.summary.sd or 0.0) == pytest.approx(a.summary.sd or 0.0, rel=1e-9, abs=1e-15)
    assert b.monte_carlo.u == pytest.approx(a.monte_carlo.u, rel=1e-6)
    assert sorted(r.molarity for r in b.replicates) == pytest.approx(sorted(r.molarity for r in a.replicates))


@settings(max_examples=60, deadline=None)
@given(_replicates, st.booleans())
def test_molarity_finite_and_positive_for_valid_input(rows, buoyancy):
    r = standardize_primary(_run_of(rows, buoyancy), fast(DEFAULTS))
    for x in (r.molarity, r.u, r.U, r.monte_carlo.u, *(x.molarity for x in r.replicates)):
        assert math.isfinite(x) and x > 0
    assert math.fsum(f.share for f in r.gum.factors) == pytest.approx(1.0, rel=1e-9)


def test_repeatability_never_below_what_two_burette_readings_resolve():
    """Four titres identical to 0.01 mL show s = 0; the repeatability then takes the reading floor.

    Independent arithmetic (GUM 4.3.7 rectangular resolution, JCGM 100:2008 F.2.2.1): one reading of a
    burette read to d = 0.01 mL has u = d/√12; a titre is two readings (×√2); the mean of n titres /√n.
    """
    from stockroom.standardization import AliquotReplicate, Instruments, Reference, SecondaryRun, standardize_secondary

    inst = Instruments(
        balance_readability_g=0.0001,
        balance_linearity_g=0.00015,
        burette_capacity_ml=50,
        burette_tolerance_ml=0.05,
        pipette_tolerance_ml=0.03,
        lab_temperature_half_range_k=3,
        expansion_coefficient_per_k=2.1e-4,
        coverage_factor=2,
        monte_carlo_draws=2000,
    )
    reps = tuple(AliquotReplicate(aliquot_ml=25.0, volume_ml=24.85) for _ in range(4))
    result = standardize_secondary(SecondaryRun(reference=Reference(1.0032, 0.00085), nu=1.0, replicates=reps), inst)
    line = next(b for b in result.gum.lines if b.source == "repeatability")
    expected = 0.01 / math.sqrt(12) * math.sqrt(2) / 24.85 / math.sqrt(4)
    assert line.u == pytest.approx(expected, rel=1e-12)
    assert result.summary.sd == 0.0


# --------------------------------------------------------------------------- metrology at the edges

NAOH = chemistry.titrant("NaOH")


def _small_run(n: int = 3, **changes) -> PrimaryRun:
    """An invented 0.1 mol/L NaOH run with ~20 mL titres and direct masses (demo data)."""
    masses = [0.4101, 0.4123, 0.4088, 0.4110][:n]
    titres = [20.09, 20.20, 20.03, 20.13][:n]
    reps = tuple(Replicate(volume_ml=v, mass_g=m) for m, v in zip(masses, titres, strict=True))
    run = PrimaryRun(standard_spec("NaOH", "KHP"), reps, purity_value=1.0, buoyancy=False, nominal_molarity=0.1)
    return dataclasses.replace(run, **changes)


def test_titrant_model_refers_dilute_runs_by_waters_density():
    base = _khp_run(3, titrant=NAOH)
    warm = dataclasses.replace(base, replicates=tuple(dataclasses.replace(r, temperature_c=25.0) for r in base.replicates))
    c20 = standardize_primary(base, fast(DEFAULTS))
    c25 = standardize_primary(warm, fast(DEFAULTS))
    # 0.1 mol/L is dilute: ρw(20)/ρw(25) = 998.2067/997.0470 (Tanaka et al. 2001 table), not 1 + 5·2.1e-4.
    assert c25.molarity / c20.molarity == pytest.approx(998.2067 / 997.0470, rel=2e-7)


def test_titrant_model_sets_the_temperature_sensitivity():
    reps = tuple(dataclasses.replace(r, temperature_c=28.0) for r in _khp_run(3).replicates)
    r = standardize_primary(_khp_run(3, replicates=reps, titrant=NAOH), fast(DEFAULTS))
    line = next(ln for ln in r.gum.lines if ln.source == "titre temperature")
    v = next(f for f in r.gum.factors if f.name == "titre volume").value
    alpha = corrections.expansion_coefficient(corrections.AQUEOUS_NAOH, 0.1, 28.0)
    # Water expands by 2.57e-4 /K at 25 °C and 3.03e-4 at 30 °C (handbook table of water, from memory), so
    # about 2.85e-4 at 28 °C: a third more than QUAM's 2.1e-4.
    assert alpha == pytest.approx(2.85e-4, abs=0.05e-4)
    assert line.u == pytest.approx(v * alpha * 3.0 / math.sqrt(3), rel=1e-12)


def test_burette_figure_follows_the_capacity_used():
    run = _small_run(burette_capacity_ml=25.0)
    r = standardize_primary(run, fast(DEFAULTS))
    line = next(ln for ln in r.gum.lines if ln.source == "burette calibration")
    # ISO 385 Class A 25 mL: ±0.03 mL (from memory), triangular as QUAM A2 — not the 50 mL ±0.05.
    assert line.u == pytest.approx(0.03 / math.sqrt(6), rel=1e-12)
    assert standardize_primary(_small_run(), fast(DEFAULTS)).gum.lines[0].source  # default run still computes
    default_line = next(
        ln for ln in standardize_primary(_small_run(), fast(DEFAULTS)).gum.lines if ln.source == "burette calibration"
    )
    assert default_line.u == pytest.approx(0.05 / math.sqrt(6), rel=1e-12)


def test_titres_past_the_burette_are_two_fills_and_three_are_refused():
    r = standardize_primary(_khp_run(3, burette_capacity_ml=25.0), fast(DEFAULTS))
    assert all(x.fills == 2 for x in r.replicates)
    second = next(ln for ln in r.gum.lines if ln.source == "burette calibration (second fill)")
    assert second.u == pytest.approx(0.03 / math.sqrt(6), rel=1e-12)
    assert any("two fills" in w for w in r.warnings)
    with pytest.raises(InvalidInput) as err:
        standardize_primary(_khp_run(3, burette_capacity_ml=10.0), fast(DEFAULTS))
    assert err.value.errors[0].field == "replicates[0].volume_ml" and "more than 2 fills" in err.value.errors[0].message


def test_a_result_stronger_than_the_titrant_can_be_is_refused():
    # Saturated NaOH(aq) is 19.1 mol/L at 25 °C (Sipos et al., J. Chem. Eng. Data 45 (2000) 613).
    reps = tuple(dataclasses.replace(r, mass_g=r.mass_g * 1000) for r in _small_run().replicates)
    r = standardize_primary(_small_run(replicates=reps, nominal_molarity=None, titrant=NAOH), fast(DEFAULTS))
    assert not r.accepted
    assert any("stronger than any sodium hydroxide solution" in x and "mg" in x for x in r.reasons)


def test_one_replicate_off_by_a_thousand_is_named_with_its_unit():
    reps = list(_small_run(4).replicates)
    reps[1] = dataclasses.replace(reps[1], mass_g=412.3)  # typed in mg (common practice: the usual slip)
    r = standardize_primary(_small_run(4, replicates=tuple(reps), titrant=NAOH), fast(DEFAULTS))
    assert not r.accepted
    slip = next(c for c in r.checks if c.code == "replicate-unit-slip")
    assert slip.replicate == 1 and "replicate 2" in slip.message and "typed in mg as if in g" in slip.message
    assert not any("wrong standard" in x for x in r.reasons)
    # Overridden with a reason: the check stays on the result, its message moves to the warnings.
    gone = standardize_primary(
        _small_run(4, replicates=tuple(reps), overrides={"replicate-unit-slip": "balance printout shows 0.4123 g"}),
        fast(DEFAULTS),
    )
    assert gone.checks[0].overridden and gone.overrides == (("replicate-unit-slip", "balance printout shows 0.4123 g"),)
    assert not any("replicate-unit-slip" in x for x in gone.reasons)


def test_twice_or_half_the_nominal_is_refused_unless_overridden():
    twice = standardize_primary(_small_run(nominal_molarity=0.05), fast(DEFAULTS))
    assert not twice.accepted and any("first end point" in x for x in twice.reasons)
    half = standardize_primary(_small_run(nominal_molarity=0.2), fast(DEFAULTS))
    assert not half.accepted and any("normality" in x for x in half.reasons)
    ok = standardize_primary(
        _small_run(nominal_molarity=0.05, overrides={"nominal-twice-or-half": "batch made up as 0.1 mol/L; label wrong"}),
        fast(DEFAULTS),
    )
    assert ok.accepted and ok.checks[0].code == "nominal-twice-or-half" and ok.checks[0].overridden
    with pytest.raises(InvalidInput) as err:
        standardize_primary(_small_run(overrides={"nominal-twice-or-half": " ", "made-up": "x"}), fast(DEFAULTS))
    assert {e.field for e in err.value.errors} == {"overrides[nominal-twice-or-half]", "overrides[made-up]"}


def test_purity_just_above_one_is_accepted_and_percentages_are_named():
    # Certified assays of acidimetric standards read on both sides of 100 % (common practice).
    assert standardize_primary(_small_run(purity_value=1.0003), fast(DEFAULTS)).molarity > 0
    with pytest.raises(InvalidInput) as err:
        standardize_primary(_small_run(purity_value=1.002), fast(DEFAULTS))
    assert "at most 1.001" in err.value.errors[0].message
    with pytest.raises(InvalidInput) as err:
        standardize_primary(_small_run(purity_value=99.95), fast(DEFAULTS))
    assert "write 99.95 % as 0.9995" in err.value.errors[0].message


def test_two_replicates_never_claim_less_than_their_scatter():
    reps = (Replicate(volume_ml=20.09, mass_g=0.4101), Replicate(volume_ml=20.09, mass_g=0.4142))  # 1 % apart
    r = standardize_primary(_small_run(replicates=reps), fast(DEFAULTS))
    rep_u = {f.name: f.u for f in r.gum.factors}["repeatability"]
    c = [x.molarity for x in r.replicates]
    observed = np.std(c, ddof=1) / math.sqrt(2) / np.mean(c)  # numpy as the independent computation
    assert rep_u == pytest.approx(observed, rel=1e-9) and rep_u > 0.002 / math.sqrt(2)


def test_secondary_run_carries_one_shared_temperature_input():
    ref = Reference(0.1000, 0.00008, "HCl")
    reps = tuple(AliquotReplicate(aliquot_ml=25.0, volume_ml=v) for v in (24.80, 24.84, 24.78))
    shared = standardize_secondary(SecondaryRun(ref, 1.0, reps, temperature_terms="shared"), fast(DEFAULTS))
    apart = standardize_secondary(SecondaryRun(ref, 1.0, reps, temperature_terms="independent"), fast(DEFAULTS))
    # The settings' default is the shared term (SECONDARY_TEMPERATURE_TERMS); QUAM A3's independent terms
    # are the setting's other value.
    assert standardize_secondary(SecondaryRun(ref, 1.0, reps), fast(DEFAULTS)).u == shared.u
    quam = Instruments.from_settings({"SECONDARY_TEMPERATURE_TERMS": "independent"})
    assert standardize_secondary(SecondaryRun(ref, 1.0, reps), fast(quam)).u == apart.u
    sources = {ln.source for ln in shared.gum.lines}
    assert "lab temperature (shared by titre and aliquot)" in sources
    assert "titre temperature" not in sources and "aliquot temperature" not in sources
    # Both solutions expand alike: the shared temperature cancels in V_titre/V_aliquot.
    line = next(ln for ln in shared.gum.lines if ln.source.startswith("lab temperature"))
    assert line.contribution == 0.0 and shared.u < apart.u
    # A 1 mol/L NaOH batch against 0.1 mol/L HCl: the sensitivity is c·(α_ref − α_new).
    strong = SecondaryRun(
        Reference(0.1, 0.00008, "HCl", corrections.AQUEOUS_HCL),
        10.0,
        reps,
        nominal_molarity=1.0,
        titrant=NAOH,
        temperature_terms="shared",
    )
    r = standardize_secondary(strong, fast(DEFAULTS))
    line = next(ln for ln in r.gum.lines if ln.source.startswith("lab temperature"))
    a_ref = corrections.expansion_coefficient(corrections.AQUEOUS_HCL, 0.1, 20.0)
    a_new = corrections.expansion_coefficient(corrections.AQUEOUS_NAOH, 1.0, 20.0)
    assert line.sensitivity == pytest.approx(r.molarity * (a_ref - a_new), rel=1e-9)


def test_k_from_effective_degrees_of_freedom():
    inst = fast(dataclasses.replace(DEFAULTS, k_policy="effective-dof"))
    r = standardize_primary(_khp_run(3), inst)
    # Repeatability from 3 replicates carries ν = 2; every other source is Type B (GUM G.4.2).
    assert next(ln for ln in r.gum.lines if ln.source == "repeatability").dof == 2
    assert math.isfinite(r.nu_eff) and r.coverage == 0.95
    assert r.k == pytest.approx(scipy_stats.t.ppf(0.975, math.floor(r.nu_eff)), rel=1e-12)  # scipy.stats.t
    assert r.U == pytest.approx(r.k * r.u, rel=1e-12)
    # The settings' default policy is effective-dof; labs whose procedure fixes k keep k = 2.
    assert standardize_primary(_khp_run(3), fast(DEFAULTS)).k == r.k
    fixed = Instruments.from_settings({"COVERAGE_K_POLICY": "fixed"})
    assert standardize_primary(_khp_run(3), fast(fixed)).k == 2.0
