"""Preparation and adjustment calculators: concentrate molarity, plans, mass balances, refusals, cautions.

External checks: molar masses from the periodictable package (PyPI; CIAAW 2021 atomic weights), figures from
the domain primer (marked "memory — verify" there, so each is also re-derived here by arithmetic written out
independently of the module), and the mass balance c1·V1 + c2·V2 = c·(V1 + V2) (conservation of amount of
substance, volume contraction neglected), checked with Hypothesis over random cases.
"""

from __future__ import annotations

import periodictable
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stockroom import chemistry
from stockroom import preparation as prep
from stockroom.errors import InvalidInput

# Molar masses from the periodictable package (independent of stockroom's own atomic-weight table).
M_HCL = periodictable.formula("HCl").mass
M_NAOH = periodictable.formula("NaOH").mass


def _fields(exc: pytest.ExceptionInfo[InvalidInput]) -> set[str]:
    return {e.field for e in exc.value.errors}


def _text(plan: prep.PreparationPlan | prep.AdjustmentPlan) -> str:
    return " ".join(plan.instructions + plan.cautions + plan.notes)


# ---------------------------------------------------------------------------------------------------------
# Molar masses the module uses


@pytest.mark.parametrize("key", sorted({c.reagent for c in prep.CONCENTRATES} | {t.key for t in chemistry.TITRANTS}))
def test_molar_mass_in_plans_matches_periodictable(key):
    # Source: periodictable package, CIAAW 2021 standard atomic weights.
    plan = prep.preparation_plan(key, 0.1, 1.0, 0.5, 1.5)
    assert plan.molar_mass_g_mol == pytest.approx(periodictable.formula(chemistry.titrant(key).formula).mass, rel=1e-9)


# ---------------------------------------------------------------------------------------------------------
# Concentrate molarity


def test_hcl_37_percent_is_about_12_1_mol_l():
    # Arithmetic, written out: 1000 mL/L · 1.19 g/mL · 0.37 / 36.46 g/mol = 12.08 mol/L.
    by_hand = 1000 * 1.19 * 0.37 / 36.46
    assert by_hand == pytest.approx(12.076, abs=0.001)
    c = prep.concentrate_molarity("HCl", 0.37, 1.19)
    # 36.46 (rounded) against periodictable's 36.458: agreement to 1e-4 relative is all rounding allows.
    assert c == pytest.approx(by_hand, rel=1e-4)
    # Same formula with periodictable's molar mass: exact to floating point.
    assert c == pytest.approx(1000 * 1.19 * 0.37 / M_HCL, rel=1e-12)
    # DOMAIN.md: "about 12 mol/L" (memory — verify; confirmed by the arithmetic above).
    assert round(c, 1) == 12.1


def test_naoh_50_percent_is_about_19_0_mol_l():
    # Arithmetic: 1000 · 1.52 · 0.50 / 40.00 = 19.00 mol/L; DOMAIN.md "about 19 mol/L" (memory — verify).
    by_hand = 1000 * 1.52 * 0.50 / 40.00
    c = prep.concentrate_molarity("NaOH", 0.50, 1.52)
    assert c == pytest.approx(by_hand, rel=1e-4)
    assert c == pytest.approx(1000 * 1.52 * 0.50 / M_NAOH, rel=1e-12)
    assert round(c, 1) == 19.0


def test_sulfuric_acid_molarity_counts_formula_units_not_equivalents():
    # 1000 · 1.84 · 0.96 / 98.08 (periodictable) ≈ 18.0 mol/L of H2SO4 (36 mol/L of H+ would be wrong here).
    m = periodictable.formula("H2SO4").mass
    assert prep.concentrate_molarity("H2SO4", 0.96, 1.84) == pytest.approx(1000 * 1.84 * 0.96 / m, rel=1e-12)
    assert prep.concentrate_molarity("H2SO4", 0.96, 1.84) == pytest.approx(18.0, abs=0.05)


# Molarities commonly quoted on suppliers' dilution charts for these concentrates — from memory. They check the
# catalogue's assay and density data (a mistyped density shows here), not the formula.
QUOTED_MOLARITY = {
    "HCl-37": 12.1,
    "HCl-32": 10.2,
    "H2SO4-96": 18.0,
    "HNO3-65": 14.4,
    "HNO3-70": 15.8,
    "HClO4-70": 11.6,
    "NaOH-50": 19.1,
    "KOH-45": 11.7,
}


@pytest.mark.parametrize("key", sorted(QUOTED_MOLARITY))
def test_catalogue_liquids_match_commonly_quoted_molarity(key):
    entry = prep.concentrate(key)
    # Quoted values (from memory) round differently by supplier; 2 % separates that from a wrong figure.
    assert entry.molarity_mol_l == pytest.approx(QUOTED_MOLARITY[key], rel=0.02)
    m = periodictable.formula(entry.reagent).mass  # periodictable, CIAAW 2021
    assert entry.molarity_mol_l == pytest.approx(1000 * entry.density_g_ml * entry.assay_w_w / m, rel=1e-12)


def test_catalogue_is_marked_from_memory_and_consistent():
    liquids = {c.key for c in prep.ACID_BASE_CONCENTRATES if c.form == prep.LIQUID}
    solids = {c.key for c in prep.ACID_BASE_CONCENTRATES if c.form == prep.SOLID}
    assert liquids == set(QUOTED_MOLARITY)
    assert solids == {"NaOH-pellets", "KOH-pellets"}
    for c in prep.CONCENTRATES:
        assert "from memory" in c.source and "certificate" in c.source
        assert chemistry.titrant(c.reagent).key == c.reagent
        lo, hi = c.assay_range_w_w
        assert 0 < lo <= c.assay_w_w <= hi <= 1
        if c.form == prep.LIQUID:
            dlo, dhi = c.density_range_g_ml
            assert dlo <= c.density_g_ml <= dhi
        else:
            assert c.density_g_ml is None and c.molarity_mol_l is None
    assert [c.key for c in prep.concentrates_for("sodium hydroxide")] == ["NaOH-50", "NaOH-pellets"]
    assert prep.concentrates_for("Ba(OH)2") == ()
    assert prep.concentrate("hcl-37").density_g_ml == 1.19
    with pytest.raises(InvalidInput) as exc:
        prep.concentrate("HCl-99")
    assert _fields(exc) == {"concentrate"}


# ---------------------------------------------------------------------------------------------------------
# Preparation plans


def test_hcl_per_litre_for_0_1_mol_l_is_about_8_3_ml():
    # DOMAIN.md: "roughly 8.3 mL per litre" (memory — verify). Arithmetic: 0.1 mol · 36.46 g/mol /
    # (1.19 g/mL · 0.37) = 8.281 mL.
    by_hand = 0.1 * 36.46 / (1.19 * 0.37)
    plan = prep.preparation_plan("HCl", 0.1, 1.0, 0.37, 1.19)
    assert plan.concentrate_volume_ml == pytest.approx(by_hand, rel=1e-4)
    assert round(plan.concentrate_volume_ml, 1) == 8.3


def test_20_l_of_0_1_mol_l_hcl_takes_about_166_ml():
    # Arithmetic: 0.1 mol/L · 20 L · 36.46 g/mol / (1.19 g/mL · 0.37) = 165.6 mL, i.e. 197.1 g.
    by_hand_ml = 0.1 * 20 * 36.46 / (1.19 * 0.37)
    plan = prep.preparation_plan("HCl", 0.1, 20.0, 0.37, 1.19)
    assert by_hand_ml == pytest.approx(165.6, abs=0.05)
    assert plan.concentrate_volume_ml == pytest.approx(by_hand_ml, rel=1e-4)
    assert plan.concentrate_mass_g == pytest.approx(by_hand_ml * 1.19, rel=1e-4)
    assert plan.reagent_mass_g == pytest.approx(0.1 * 20 * M_HCL, rel=1e-12)
    assert plan.concentrate_molarity_mol_l == pytest.approx(1000 * 1.19 * 0.37 / M_HCL, rel=1e-12)
    # Water to bring to volume, contraction neglected: 20 L − 0.1656 L.
    assert plan.water_approx_l == pytest.approx(20.0 - by_hand_ml / 1000, rel=1e-4)
    assert plan.planned_molarity_mol_l == plan.target_molarity_mol_l == 0.1
    assert plan.form == "liquid" and plan.reagent == "HCl"
    assert "165.6 mL" in " ".join(plan.instructions)


def test_naoh_from_pellets_80_g_for_20_l_then_divided_by_assay():
    # Arithmetic: 0.1 mol/L · 20 L · 40.00 g/mol = 80.0 g of NaOH at 100 %; at 98 % assay, 80.0/0.98 g.
    pure = prep.preparation_plan("NaOH", 0.1, 20.0, 1.0, form="solid")
    assert round(pure.concentrate_mass_g, 1) == 80.0
    assert pure.concentrate_mass_g == pytest.approx(0.1 * 20 * M_NAOH, rel=1e-12)  # periodictable M
    pellets = prep.preparation_plan("NaOH", 0.1, 20.0, 0.98, density_g_ml=2.13, form="solid")
    assert pellets.concentrate_mass_g == pytest.approx(0.1 * 20 * M_NAOH / 0.98, rel=1e-12)
    assert pellets.reagent_mass_g == pytest.approx(pure.concentrate_mass_g, rel=1e-12)
    # A solid's density plays no part in the plan.
    assert pellets.density_g_ml is None and pellets.concentrate_volume_ml is None
    assert pellets.concentrate_molarity_mol_l is None


def test_naoh_50_percent_plan_follows_aoac_practice():
    plan = prep.preparation_plan("NaOH", 0.1, 20.0, 0.50, 1.52)
    # 2 mol · 40.00 g/mol / (1.52 g/mL · 0.50) = 105.3 mL (arithmetic).
    assert plan.concentrate_volume_ml == pytest.approx(0.1 * 20 * 40.00 / (1.52 * 0.50), rel=1e-4)
    steps = " ".join(plan.instructions)
    # AOAC Official Methods, Appendix A (standard solutions): clear 50 % NaOH, CO2-free water, polyethylene,
    # soda-lime guard tube.
    for phrase in ("clear liquid", "CO2-free", "polyethylene", "soda-lime guard tube", "AOAC"):
        assert phrase in steps
    # Weaker NaOH concentrate: no "clear liquid" claim; the step says carbonate passes on instead.
    weak = " ".join(prep.preparation_plan("NaOH", 0.1, 1.0, 0.30, 1.33).instructions)
    assert "Use the clear liquid" not in weak and "only near 50 %" in weak


def test_acid_plan_puts_water_in_first():
    # "Acid into water, never the reverse" (DOMAIN.md, common practice): the water step comes first.
    for key in ("HCl-37", "H2SO4-96", "HNO3-65", "HClO4-70"):
        c = prep.concentrate(key)
        steps = prep.preparation_plan(c.reagent, 0.1, 10.0, c.assay_w_w, c.density_g_ml).instructions
        water_first = next(i for i, s in enumerate(steps) if "water" in s and "first" in s)
        add_acid = next(i for i, s in enumerate(steps) if "acid to water, never the reverse" in s)
        measure = next(i for i, s in enumerate(steps) if "measure" in s)
        assert water_first < measure < add_acid


def test_overshoot_scales_the_amount_taken():
    base = prep.preparation_plan("HCl", 0.1, 10.0, 0.37, 1.19)
    over = prep.preparation_plan("HCl", 0.1, 10.0, 0.37, 1.19, overshoot_rel=0.02)
    assert over.planned_molarity_mol_l == pytest.approx(0.102, rel=1e-12)
    assert over.concentrate_volume_ml == pytest.approx(base.concentrate_volume_ml * 1.02, rel=1e-12)
    assert over.target_molarity_mol_l == 0.1
    assert any("above nominal" in n for n in over.notes)
    with pytest.raises(InvalidInput) as exc:
        prep.preparation_plan("HCl", 0.1, 10.0, 0.37, 1.19, overshoot_rel=0.1)
    assert _fields(exc) == {"overshoot_rel"}
    with pytest.raises(InvalidInput):
        prep.preparation_plan("HCl", 0.1, 10.0, 0.37, 1.19, overshoot_rel=-0.01)


@settings(max_examples=200, deadline=None)
@given(
    w=st.floats(0.05, 1.0),
    rho=st.floats(1.0, 2.0),
    fraction_of_conc=st.floats(1e-4, 0.9),
    vol=st.floats(0.1, 50.0),
)
def test_plan_amount_balances_for_random_cases(w, rho, fraction_of_conc, vol):
    # Amount of substance: the concentrate taken holds c·V mol (conservation); formula written out here
    # with periodictable's molar mass: v = c·V·M/(ρ·w) mL.
    m = periodictable.formula("HNO3").mass
    c_conc = 1000 * rho * w / m
    c = fraction_of_conc * c_conc
    plan = prep.preparation_plan("HNO3", c, vol, w, rho)
    assert plan.concentrate_volume_ml == pytest.approx(c * vol * m / (rho * w), rel=1e-12)
    assert plan.concentrate_volume_ml * plan.concentrate_molarity_mol_l / 1000 == pytest.approx(c * vol, rel=1e-12)
    assert plan.water_approx_l + plan.concentrate_volume_ml / 1000 == pytest.approx(vol, rel=1e-12)


def test_density_unlike_the_catalogue_is_noted():
    odd = prep.preparation_plan("HCl", 0.1, 1.0, 0.37, 1.05)
    assert any("certificate" in n for n in odd.notes)
    usual = prep.preparation_plan("HCl", 0.1, 1.0, 0.37, 1.185)
    assert not any("certificate" in n for n in usual.notes)


@pytest.mark.parametrize(
    "kwargs, field",
    [
        (dict(target_molarity_mol_l=0), "target_molarity_mol_l"),
        (dict(target_molarity_mol_l=-0.1), "target_molarity_mol_l"),
        (dict(target_molarity_mol_l=float("nan")), "target_molarity_mol_l"),
        (dict(target_molarity_mol_l="0.1"), "target_molarity_mol_l"),
        (dict(final_volume_l=0), "final_volume_l"),
        (dict(final_volume_l=float("inf")), "final_volume_l"),
        (dict(assay_w_w=0), "assay_w_w"),
        (dict(assay_w_w=37), "assay_w_w"),
        (dict(assay_w_w=1.01), "assay_w_w"),
        (dict(density_g_ml=None), "density_g_ml"),
        (dict(density_g_ml=1190), "density_g_ml"),
        (dict(density_g_ml=-1.19), "density_g_ml"),
        (dict(form="gas"), "form"),
        (dict(form="solid"), "form"),  # hydrochloric acid has no solid form
        (dict(reagent="ammonia"), "reagent"),
        (dict(container_capacity_l=10), "final_volume_l"),  # 20 L does not fit a 10 L carboy
        (dict(container_capacity_l=0), "container_capacity_l"),
        (dict(target_molarity_mol_l=12.5), "target_molarity_mol_l"),  # above the 12.08 mol/L concentrate
    ],
)
def test_preparation_refuses_bad_input_naming_the_field(kwargs, field):
    args = dict(reagent="HCl", target_molarity_mol_l=0.1, final_volume_l=20.0, assay_w_w=0.37, density_g_ml=1.19)
    args.update(kwargs)
    with pytest.raises(InvalidInput) as exc:
        prep.preparation_plan(**args)
    assert field in _fields(exc)
    assert all(e.message for e in exc.value.errors)


def test_preparation_reports_every_broken_field_at_once():
    with pytest.raises(InvalidInput) as exc:
        prep.preparation_plan("HCl", -1, 0, 37, 1190)
    assert _fields(exc) == {"target_molarity_mol_l", "final_volume_l", "assay_w_w", "density_g_ml"}
    messages = exc.value.fields
    assert "give 0.37" in messages["assay_w_w"]
    assert "kg/m³" in messages["density_g_ml"] and "1.19" in messages["density_g_ml"]


# ---------------------------------------------------------------------------------------------------------
# Adjustment plans


def test_strong_batch_gets_water_worked_example():
    # Arithmetic: 20 L at 0.1032 mol/L → w = 20 · (0.1032/0.1000 − 1) = 0.640 L.
    plan = prep.adjustment_plan("HCl", 0.1032, 0.1000, 20.0)
    assert plan.action == prep.ADD_WATER
    assert plan.water_to_add_l == pytest.approx(0.640, rel=1e-12)
    assert plan.concentrate_to_add_ml == 0.0
    assert plan.final_volume_l == pytest.approx(20.640, rel=1e-12)
    assert plan.restandardize is True


def test_weak_batch_gets_concentrate_worked_example():
    # Arithmetic: 20 L at 0.0985 mol/L, 19.0 mol/L concentrate → v = 20 · 0.0015 / 18.9 L = 1.587 mL.
    plan = prep.adjustment_plan("NaOH", 0.0985, 0.1000, 20.0, concentrate_molarity_mol_l=19.0)
    assert plan.action == prep.ADD_CONCENTRATE
    assert plan.concentrate_to_add_ml == pytest.approx(1000 * 20 * 0.0015 / 18.9, rel=1e-9)
    assert plan.water_to_add_l == 0.0
    # The same concentrate given by assay and density (19.0015 mol/L) gives nearly the same volume.
    by_comp = prep.adjustment_plan("NaOH", 0.0985, 0.1000, 20.0, concentrate_assay_w_w=0.50, concentrate_density_g_ml=1.52)
    assert by_comp.concentrate_molarity_mol_l == pytest.approx(1000 * 1.52 * 0.50 / M_NAOH, rel=1e-12)
    assert by_comp.concentrate_to_add_ml == pytest.approx(plan.concentrate_to_add_ml, rel=1e-3)
    assert "clear liquid" in " ".join(by_comp.instructions)  # AOAC Official Methods, Appendix A


@settings(max_examples=300, deadline=None)
@given(
    target=st.floats(0.001, 2.0),
    weak_by=st.floats(1e-4, 0.5),
    vol=st.floats(0.05, 50.0),
    conc_over_target=st.floats(1.5, 20000.0),
)
def test_concentrate_addition_mass_balance(target, weak_by, vol, conc_over_target):
    # Conservation of amount of substance: (c·V + c_conc·v)/(V + v) = c_target, contraction neglected.
    c = target * (1 - weak_by)
    c_conc = target * conc_over_target
    plan = prep.adjustment_plan("HCl", c, target, vol, tolerance_rel=0.0, concentrate_molarity_mol_l=c_conc)
    v_l = plan.concentrate_to_add_ml / 1000
    assert plan.action == prep.ADD_CONCENTRATE
    assert (c * vol + c_conc * v_l) / (vol + v_l) == pytest.approx(target, rel=1e-12)
    assert plan.final_volume_l == pytest.approx(vol + v_l, rel=1e-12)
    assert plan.expected_molarity_mol_l == pytest.approx(target, rel=1e-12)


@settings(max_examples=300, deadline=None)
@given(target=st.floats(0.001, 2.0), strong_by=st.floats(1e-4, 1.0), vol=st.floats(0.05, 50.0))
def test_water_addition_mass_balance(target, strong_by, vol):
    # Dilution: c·V/(V + w) = c_target; the water added is a fraction (c/c_target − 1) of V, never more.
    c = target * (1 + strong_by)
    plan = prep.adjustment_plan("NaOH", c, target, vol, tolerance_rel=0.0)
    w = plan.water_to_add_l
    assert plan.action == prep.ADD_WATER
    assert c * vol / (vol + w) == pytest.approx(target, rel=1e-12)
    assert 0 < w <= vol * strong_by * (1 + 1e-12)
    assert plan.concentrate_to_add_ml == 0.0


def test_within_tolerance_needs_no_adjustment():
    # 0.1004 against 0.1000 is +0.40 %, inside the default 0.5 % tolerance.
    plan = prep.adjustment_plan("HCl", 0.1004, 0.1000, 20.0)
    assert plan.action == prep.NO_ADJUSTMENT
    assert plan.water_to_add_l == 0.0 and plan.concentrate_to_add_ml == 0.0
    assert plan.final_volume_l == 20.0 and plan.restandardize is False
    assert plan.deviation_rel == pytest.approx(0.004, rel=1e-9)
    assert "No adjustment is needed" in plan.instructions[0]
    # The same batch with a tighter tolerance is adjusted.
    assert prep.adjustment_plan("HCl", 0.1004, 0.1000, 20.0, tolerance_rel=0.001).action == prep.ADD_WATER
    # A weak batch within tolerance needs no concentrate, so none has to be given.
    assert prep.adjustment_plan("HCl", 0.0996, 0.1000, 20.0).action == prep.NO_ADJUSTMENT


def test_adjustment_says_contraction_neglected_and_restandardize():
    for plan in (
        prep.adjustment_plan("HCl", 0.105, 0.1, 10.0),
        prep.adjustment_plan("HCl", 0.095, 0.1, 10.0, concentrate_molarity_mol_l=12.0),
    ):
        text = _text(plan)
        assert "Volume contraction on mixing is neglected" in text
        assert "re-standardized" in text and "new measurement" in text


def test_far_off_batch_gets_a_check_the_standardization_note():
    # DOMAIN.md: a result far off nominal means a wrong standard, unit or dilution (common practice).
    plan = prep.adjustment_plan("HCl", 0.125, 0.1, 10.0)
    assert any("check the standardization" in n for n in plan.notes)
    assert not any("check the standardization" in n for n in prep.adjustment_plan("HCl", 0.103, 0.1, 10.0).notes)


@pytest.mark.parametrize(
    "kwargs, field",
    [
        (dict(measured_molarity_mol_l=0), "measured_molarity_mol_l"),
        (dict(measured_molarity_mol_l=-0.1), "measured_molarity_mol_l"),
        (dict(target_molarity_mol_l=0), "target_molarity_mol_l"),
        (dict(current_volume_l=-1), "current_volume_l"),
        (dict(current_volume_l=True), "current_volume_l"),
        (dict(tolerance_rel=-0.001), "tolerance_rel"),
        (dict(tolerance_rel=0.2), "tolerance_rel"),
        (dict(reagent="vinegar"), "reagent"),
        # Weak batch without any concentrate to raise it.
        (dict(concentrate_molarity_mol_l=None), "concentrate_molarity_mol_l"),
        # Target above the concentrate's strength.
        (dict(concentrate_molarity_mol_l=0.09), "concentrate_molarity_mol_l"),
        (dict(concentrate_molarity_mol_l=0.1), "concentrate_molarity_mol_l"),
        (dict(concentrate_molarity_mol_l=-12.0), "concentrate_molarity_mol_l"),
        # Both ways of giving the concentrate at once.
        (dict(concentrate_assay_w_w=0.37, concentrate_density_g_ml=1.19), "concentrate_molarity_mol_l"),
        # Composition half given.
        (dict(concentrate_molarity_mol_l=None, concentrate_assay_w_w=0.37), "concentrate_density_g_ml"),
        (dict(concentrate_molarity_mol_l=None, concentrate_density_g_ml=1.19), "concentrate_assay_w_w"),
        (dict(concentrate_molarity_mol_l=None, concentrate_assay_w_w=37, concentrate_density_g_ml=1.19), "concentrate_assay_w_w"),
        # Already fuller than the container, or would overflow it.
        (dict(container_capacity_l=19.0), "current_volume_l"),
        (dict(container_capacity_l=20.0001), "current_volume_l"),
    ],
)
def test_adjustment_refuses_impossible_cases(kwargs, field):
    # Base case: 20 L at 0.095 mol/L HCl, target 0.1, with 12.08 mol/L concentrate (needs 8.7 mL).
    args = dict(
        reagent="HCl",
        measured_molarity_mol_l=0.095,
        target_molarity_mol_l=0.1,
        current_volume_l=20.0,
        concentrate_molarity_mol_l=12.08,
    )
    args.update(kwargs)
    with pytest.raises(InvalidInput) as exc:
        prep.adjustment_plan(**args)
    assert field in _fields(exc)


def test_water_addition_refused_when_it_would_overflow():
    # 20 L at 0.11 mol/L needs 2.0 L of water: a 21 L carboy cannot take it, a 25 L one can.
    with pytest.raises(InvalidInput) as exc:
        prep.adjustment_plan("HCl", 0.11, 0.1, 20.0, container_capacity_l=21.0)
    assert _fields(exc) == {"current_volume_l"}
    assert "21 L" in exc.value.fields["current_volume_l"]
    ok = prep.adjustment_plan("HCl", 0.11, 0.1, 20.0, container_capacity_l=25.0)
    assert ok.water_to_add_l == pytest.approx(2.0, rel=1e-12)


# ---------------------------------------------------------------------------------------------------------
# Cautions, in every plan

# Phrases each family of cautions must carry (common practice), and phrases that would be wrong there.
DEFERRAL = ("safety data sheet", "local regulations", "chemical hygiene plan")
BY_KIND = {
    prep.ACID_CONCENTRATE: (("acid to water", "fume hood", "face shield", "acid-resistant gloves", "exothermic"), ("pellets",)),
    prep.OXIDIZING_ACID: (
        ("acid to water", "fume hood", "face shield", "oxidizer", "organic matter", "gloves of the material"),
        ("pellets", "acid-resistant gloves"),
    ),
    prep.BASE_PELLETS: (
        ("pellets", "never water onto the pellets", "exothermic", "alkali-resistant gloves", "face shield", "polyethylene"),
        ("acid to water", "acid-resistant", "add acid"),
    ),
    prep.BASE_CONCENTRATE: (
        ("concentrate slowly to the water", "exothermic", "pipette filler", "alkali-resistant gloves", "polyethylene"),
        ("acid to water", "acid-resistant", "pellets"),
    ),
}


def _every_plan():
    for c in prep.ACID_BASE_CONCENTRATES:  # the other classes: tests/test_reaction_classes.py
        yield (
            prep.caution_kind(c.reagent, c.form),
            prep.preparation_plan(c.reagent, 0.1, 10.0, c.assay_w_w, c.density_g_ml, form=c.form),
        )
    yield prep.BASE_PELLETS, prep.preparation_plan("Ba(OH)2", 0.05, 1.0, 0.97, form="solid")
    yield prep.ACID_CONCENTRATE, prep.adjustment_plan("HCl", 0.1002, 0.1, 10.0)
    yield prep.ACID_CONCENTRATE, prep.adjustment_plan("H2SO4", 0.06, 0.05, 10.0)
    yield prep.BASE_CONCENTRATE, prep.adjustment_plan("NaOH", 0.09, 0.1, 10.0, concentrate_molarity_mol_l=19.0)


@pytest.mark.parametrize("kind,plan", list(_every_plan()), ids=lambda p: p if isinstance(p, str) else p.reagent)
def test_cautions_present_in_every_plan_chosen_by_reagent_and_form(kind, plan):
    # Project rule: the usual cautions for the reagent and form, deferring to local codes and the chemical
    # hygiene plan, always as the last line.
    text = " ".join(plan.cautions).lower()
    must, must_not = BY_KIND[kind]
    for phrase in must + DEFERRAL:
        assert phrase in text, phrase
    for phrase in must_not:
        assert phrase not in text, phrase
    assert plan.cautions[-1] == prep.DEFER


@pytest.mark.parametrize(
    "reagent,form,kind",
    [
        ("NaOH", "solid", prep.BASE_PELLETS),
        ("KOH", "solid", prep.BASE_PELLETS),
        ("NaOH", "liquid", prep.BASE_CONCENTRATE),
        ("KOH", "liquid", prep.BASE_CONCENTRATE),
        ("HCl", "liquid", prep.ACID_CONCENTRATE),
        ("H2SO4", "liquid", prep.ACID_CONCENTRATE),
        ("HNO3", "liquid", prep.OXIDIZING_ACID),
        ("HClO4", "liquid", prep.OXIDIZING_ACID),
    ],
)
def test_caution_family_by_reagent_and_form(reagent, form, kind):
    assert prep.caution_kind(reagent, form) == kind


def test_naoh_pellets_get_base_cautions_not_acid_ones():
    # The reported fault: the calculator showed "add acid to water" and acid-resistant gloves for NaOH pellets.
    plan = prep.preparation_plan("NaOH", 0.1, 1.0, 0.98, form="solid")
    text = " ".join(plan.cautions)
    assert "acid" not in text.lower().replace("safety data sheet", "")
    assert "never water onto the pellets" in text and "alkali-resistant gloves" in text


def test_reagent_specific_cautions_are_added():
    assert any("Perchloric acid: never let it evaporate to dryness" in c for c in prep.cautions_for("HClO4", "liquid"))
    assert any("nitrogen oxides" in c for c in prep.cautions_for("nitric acid", "liquid"))
    assert any("sulfuric" in c for c in prep.cautions_for("H2SO4", "liquid"))
    assert any("Barium" in c for c in prep.cautions_for("Ba(OH)2", "solid"))
    # Before the form is known a base gets its pellet and its concentrate lines, and never an acid's.
    unknown = " ".join(prep.cautions_for("NaOH")).lower()
    assert "pellets" in unknown and "concentrate slowly" in unknown and "acid to water" not in unknown
    assert prep.CAUTIONS[-1] == prep.DEFER and "acids:" in prep.CAUTIONS[0].lower()
