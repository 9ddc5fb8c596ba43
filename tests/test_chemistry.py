"""Atomic weights, formula parsing, molar masses, catalogue look-ups, stoichiometry and drying rules.

Each external figure names its source beside it. The periodictable package (PyPI) carries the CIAAW 2021
standard atomic weights with abridged values for interval elements (see its periodictable/mass.py); the
uncertainties package (PyPI) propagates correlated uncertainties independently of stockroom's code.
"""

from __future__ import annotations

import math

import periodictable
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from uncertainties import ufloat

from stockroom import chemistry as chem
from stockroom.errors import InvalidInput, StockroomError


def _pt_syntax(formula: str) -> str:
    """The same formula in periodictable's syntax: '+' for a hydrate's dot, round brackets only."""
    return formula.replace("·", "+").replace("*", "+").replace("[", "(").replace("]", ")")


def _pt_mass(formula: str) -> float:
    return periodictable.formula(_pt_syntax(formula)).mass


def _pt_atoms(formula: str) -> dict[str, float]:
    return {str(el): float(n) for el, n in periodictable.formula(_pt_syntax(formula)).atoms.items()}


# ---------------------------------------------------------------------------------------------------------
# Atomic weights


@pytest.mark.parametrize("symbol", sorted(chem.ATOMIC_WEIGHTS))
def test_atomic_weight_matches_periodictable(symbol):
    # Source: periodictable package (CIAAW 2021, Prohaska et al. Pure Appl. Chem. 94 (2022)); its
    # uncertainty sits in the private attribute _mass_unc, the table's printed ± figure.
    el = getattr(periodictable, symbol)
    w = chem.atomic_weight(symbol)
    assert w.value == pytest.approx(el.mass, rel=1e-12, abs=0)
    assert w.half_width == pytest.approx(el._mass_unc, rel=1e-9)
    # Rectangular distribution of half-width a: u = a/sqrt(3) (JCGM 100:2008, 4.3.7).
    assert w.u == pytest.approx(el._mass_unc / math.sqrt(3.0), rel=1e-9)


# CIAAW 2021 intervals of the standard atomic weight (Prohaska et al. 2022, Table 1) — from memory.
CIAAW_2021_INTERVALS = {
    "H": (1.00784, 1.00811),
    "Li": (6.938, 6.997),
    "B": (10.806, 10.821),
    "C": (12.0096, 12.0116),
    "N": (14.00643, 14.00728),
    "O": (15.99903, 15.99977),
    "Mg": (24.304, 24.307),
    "Si": (28.084, 28.086),
    "S": (32.059, 32.076),
    "Cl": (35.446, 35.457),
    "Ar": (39.792, 39.963),
    "Br": (79.901, 79.907),
    "Tl": (204.382, 204.385),
    "Pb": (206.14, 207.94),
}


@pytest.mark.parametrize("symbol", sorted(CIAAW_2021_INTERVALS))
def test_abridged_value_and_half_width_cover_the_ciaaw_interval(symbol):
    # The choice u = a/sqrt(3) with the printed ±a only makes sense if value ± a covers the interval.
    lo, hi = CIAAW_2021_INTERVALS[symbol]
    w = chem.atomic_weight(symbol)
    assert w.is_interval
    assert w.value - w.half_width <= lo + 1e-12
    assert w.value + w.half_width >= hi - 1e-12


def test_interval_elements_are_exactly_the_ciaaw_2021_set():
    # CIAAW 2021: fourteen elements have an interval (Pb became one in 2020) — from memory.
    assert chem.INTERVAL_ELEMENTS == frozenset(CIAAW_2021_INTERVALS)


def test_atomic_weight_of_a_real_element_without_entry_and_of_no_element():
    with pytest.raises(chem.FormulaError, match="no atomic weight"):
        chem.atomic_weight("Hf")
    with pytest.raises(chem.FormulaError, match="not an element"):
        chem.atomic_weight("Xq")


# ---------------------------------------------------------------------------------------------------------
# Molar masses


CATALOGUE_FORMULAS = sorted({s.formula for s in chem.STANDARDS} | {t.formula for t in chem.TITRANTS})


@pytest.mark.parametrize("formula", CATALOGUE_FORMULAS)
def test_catalogue_molar_mass_matches_periodictable(formula):
    # Source: periodictable.formula(...).mass (CIAAW 2021 abridged values); tolerance 0.001 g/mol.
    assert chem.molar_mass(formula).value == pytest.approx(_pt_mass(formula), abs=1e-3)
    assert chem.parse_formula(formula) == pytest.approx(_pt_atoms(formula))


@pytest.mark.parametrize(
    ("key", "published"),
    [
        # ACS Reagent Chemicals monographs print KHP 204.22 and TRIS 121.14.
        ("KHP", 204.22),
        ("TRIS", 121.14),
        # Handbook/reagent-label values printed with pre-2009 atomic weights (B 10.811, H 1.00794):
        # 381.37 against 381.363 now, hence the 0.01 g/mol tolerance.
        ("borax", 381.37),
        ("Na2CO3", 105.99),
    ],
)
def test_published_molar_masses(key, published):
    assert chem.standard(key).molar_mass.value == pytest.approx(published, abs=0.01)


@pytest.mark.parametrize(
    ("key", "published"),
    [
        # Reagent labels, from memory: HCl 36.46, NaOH 40.00, H2SO4 98.08 (older S 32.065: 98.079).
        ("HCl", 36.46),
        ("NaOH", 40.00),
        ("H2SO4", 98.08),
    ],
)
def test_published_titrant_molar_masses(key, published):
    assert chem.titrant(key).molar_mass.value == pytest.approx(published, abs=0.01)


@pytest.mark.parametrize("formula", CATALOGUE_FORMULAS)
def test_molar_mass_uncertainty_matches_the_uncertainties_package(formula):
    # Source: the uncertainties package propagates one ufloat per element; multiplying the same
    # ufloat by a count makes the atoms of one element fully correlated, as stockroom assumes.
    atoms = {sym: ufloat(w.value, w.u) for sym, w in chem.ATOMIC_WEIGHTS.items()}
    total = sum(n * atoms[sym] for sym, n in chem.parse_formula(formula).items())
    mm = chem.molar_mass(formula)
    assert mm.value == pytest.approx(total.nominal_value, rel=1e-12)
    assert mm.u == pytest.approx(total.std_dev, rel=1e-9)


def test_khp_molar_mass_uncertainty_is_of_the_quam_order():
    # EURACHEM/CITAC QUAM:2012 Example A2 finds u(M_KHP) = 0.0038 g/mol with the 2001 atomic weights
    # (C ±0.0008); the CIAAW 2021 abridged C (±0.002) makes it larger, about 0.0095. Same method,
    # wider inputs: the value must exceed QUAM's and stay the right order of magnitude.
    u = chem.standard("KHP").molar_mass.u
    assert 0.0038 < u < 0.02


def test_molar_mass_of_an_element_without_weight_is_refused():
    with pytest.raises(chem.FormulaError, match="Hf"):
        chem.molar_mass("HfO2")


# ---------------------------------------------------------------------------------------------------------
# Parser


@pytest.mark.parametrize(
    ("formula", "expected"),
    [
        ("H2O", {"H": 2, "O": 1}),
        ("NaCl", {"Na": 1, "Cl": 1}),
        ("Ca3(PO4)2", {"Ca": 3, "P": 2, "O": 8}),
        ("(NH4)2SO4", {"N": 2, "H": 8, "S": 1, "O": 4}),
        ("(HOCH2)3CNH2", {"H": 11, "O": 3, "C": 4, "N": 1}),
        ("K4[Fe(CN)6]·3H2O", {"K": 4, "Fe": 1, "C": 6, "N": 6, "H": 6, "O": 3}),
        ("Al2(SO4)3", {"Al": 2, "S": 3, "O": 12}),
        ("Na2B4O7·10H2O", {"Na": 2, "B": 4, "O": 17, "H": 20}),
        ("Na2B4O7.10H2O", {"Na": 2, "B": 4, "O": 17, "H": 20}),
        ("Na2B4O7*10H2O", {"Na": 2, "B": 4, "O": 17, "H": 20}),
        ("Na2B4O7 · 10H2O", {"Na": 2, "B": 4, "O": 17, "H": 20}),
        ("CuSO4·5H2O", {"Cu": 1, "S": 1, "O": 9, "H": 10}),
        ("CaSO4·0.5H2O", {"Ca": 1, "S": 1, "O": 4.5, "H": 1}),
        ("CaSO4.0.5H2O", {"Ca": 1, "S": 1, "O": 4.5, "H": 1}),
        ("MgSO4·7H2O·H2O", {"Mg": 1, "S": 1, "O": 12, "H": 16}),
        ("2H2O", {"H": 4, "O": 2}),
        ("CH3COOH", {"C": 2, "H": 4, "O": 2}),
        ("  NaOH ", {"Na": 1, "O": 1, "H": 1}),
    ],
)
def test_parse_formula(formula, expected):
    # Expected counts worked by hand from the formulas.
    assert chem.parse_formula(formula) == pytest.approx(expected)


@pytest.mark.parametrize(
    "formula",
    ["Ca3(PO4)2", "(NH4)2SO4", "K4[Fe(CN)6]", "Al2(SO4)3", "Na2B4O7·10H2O", "CuSO4·5H2O", "Co(NO3)2·6H2O"],
)
def test_parse_formula_agrees_with_periodictable(formula):
    # Source: periodictable's own formula parser.
    assert chem.parse_formula(formula) == pytest.approx(_pt_atoms(formula))


@pytest.mark.parametrize(
    "formula",
    [
        "",
        "   ",
        "h2o",  # lower-case symbol
        "Xx2",  # not an element
        "H2O)",
        "(H2O",
        "K4[Fe(CN)6)",  # mismatched brackets
        "()",
        "H0",  # zero count
        "0H2O",  # zero coefficient
        "Na2B4O7.",
        ".H2O",
        "Na2B4O7..10H2O",
        "Na2B4O7·10",
        "Na Cl",
        "SO4^2-",
        "H2O+",
        "H-2",
        "H2O(2)",
        "H2 3O",
        "Na2B4O7·10H2O·",
    ],
)
def test_bad_formulas_are_refused(formula):
    with pytest.raises(chem.FormulaError) as caught:
        chem.parse_formula(formula)
    assert isinstance(caught.value, StockroomError)
    assert caught.value.status == 422
    assert caught.value.message  # says what is wrong


def test_formula_error_names_the_position_and_symbol():
    with pytest.raises(chem.FormulaError, match=r"'Qq' at position 3"):
        chem.parse_formula("H2QqO")


def test_non_text_formula_is_refused():
    with pytest.raises(chem.FormulaError):
        chem.parse_formula(42)  # type: ignore[arg-type]


def test_parse_result_is_a_fresh_dict():
    first = chem.parse_formula("H2O")
    first["H"] = 99.0
    assert chem.parse_formula("H2O")["H"] == 2.0


# Random formulas over the elements stockroom holds, for property tests.
_SYMBOLS = sorted(chem.ATOMIC_WEIGHTS)
_term = st.tuples(st.sampled_from(_SYMBOLS), st.integers(min_value=1, max_value=12)).map(
    lambda t: t[0] + (str(t[1]) if t[1] > 1 else "")
)
_plain = st.lists(_term, min_size=1, max_size=5).map("".join)
_group = st.tuples(_plain, st.integers(min_value=2, max_value=4)).map(lambda t: f"({t[0]}){t[1]}")
_formula = st.lists(st.one_of(_term, _group), min_size=1, max_size=4).map("".join)


@settings(max_examples=150, deadline=None)
@given(_formula, _formula)
def test_molar_mass_of_a_concatenation_is_the_sum(a, b):
    total = chem.molar_mass(a).value + chem.molar_mass(b).value
    assert chem.molar_mass(a + b).value == pytest.approx(total, rel=1e-12)
    assert chem.molar_mass(f"{a}·{b}").value == pytest.approx(total, rel=1e-12)


@settings(max_examples=100, deadline=None)
@given(_formula)
def test_random_formula_agrees_with_periodictable(f):
    # Source: periodictable's parser and atomic weights.
    assert chem.molar_mass(f).value == pytest.approx(_pt_mass(f), rel=1e-9)


@settings(max_examples=100, deadline=None)
@given(_formula, st.integers(min_value=2, max_value=6))
def test_uncertainty_scales_with_a_whole_multiple(f, k):
    # k copies share every atomic weight: u(k·X) = k·u(X) exactly (full correlation within an element).
    assert chem.molar_mass(f"{k}{f}").u == pytest.approx(k * chem.molar_mass(f).u, rel=1e-9)


# ---------------------------------------------------------------------------------------------------------
# Catalogue


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("KHP", "KHP"),
        ("khp", "KHP"),
        ("potassium hydrogen phthalate", "KHP"),
        ("Potassium  Hydrogen Phthalate", "KHP"),
        ("KHC8H4O4", "KHP"),
        ("C8H5KO4", "KHP"),  # Hill order, matched by composition
        ("TRIS", "TRIS"),
        ("THAM", "TRIS"),
        ("tromethamine", "TRIS"),
        ("C4H11NO3", "TRIS"),
        ("sodium carbonate", "Na2CO3"),
        ("Na2CO3", "Na2CO3"),
        ("CNa2O3", "Na2CO3"),
        ("borax", "borax"),
        ("Na2B4O7.10H2O", "borax"),
        ("Na2B4O7*10H2O", "borax"),
        ("B4H20Na2O17", "borax"),
        ("sulfamic acid", "sulfamic"),
        ("NH2SO3H", "sulfamic"),
        ("KH(IO3)2", "biiodate"),
        ("potassium hydrogen iodate", "biiodate"),
        ("benzoic acid", "benzoic"),
        ("C7H6O2", "benzoic"),
        ("(COOH)2·2H2O", "oxalic"),
    ],
)
def test_standard_lookup(text, key):
    assert chem.standard(text).key == key


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ("HCl", "HCl"),
        ("hcl", "HCl"),
        ("hydrochloric acid", "HCl"),
        ("ClH", "HCl"),
        ("sulphuric acid", "H2SO4"),
        ("H2SO4", "H2SO4"),
        ("sodium hydroxide", "NaOH"),
        ("HNaO", "NaOH"),
        ("KOH", "KOH"),
        ("Ba(OH)2", "Ba(OH)2"),
        ("barium hydroxide", "Ba(OH)2"),
        ("perchloric acid", "HClO4"),
        ("nitric acid", "HNO3"),
    ],
)
def test_titrant_lookup(text, key):
    assert chem.titrant(text).key == key


@pytest.mark.parametrize("text", ["unobtainium", "", "NaBr", "H2O", "KHP2"])
def test_unknown_standard_lists_what_is_known(text):
    with pytest.raises(chem.UnknownSubstance) as caught:
        chem.standard(text)
    assert caught.value.status == 422
    if text:
        for s in chem.STANDARDS:
            assert s.key in caught.value.message


def test_unknown_titrant_lists_what_is_known():
    with pytest.raises(chem.UnknownSubstance) as caught:
        chem.titrant("KHP")  # a standard, not a titrant
    for t in chem.TITRANTS:
        assert t.key in caught.value.message


def test_catalogue_entries_are_consistent():
    keys = [s.key for s in chem.STANDARDS] + [t.key for t in chem.TITRANTS]
    assert len(set(keys)) == len(keys)
    for entry in (*chem.STANDARDS, *chem.TITRANTS):
        if entry.reaction_class != chem.ACID_BASE:
            continue  # tests/test_reaction_classes.py checks the other classes
        assert entry.role in (chem.ACID, chem.BASE)
        assert entry.equivalents >= 1
        assert chem.molar_mass(entry.formula).value > 0
    for s in chem.STANDARDS:
        assert s.density_g_cm3 > 0
        assert s.endpoint
        rule = s.drying
        if rule.min_c is not None and rule.max_c is not None:
            assert rule.min_c < rule.max_c
        if not rule.oven_allowed:
            assert rule.min_c is None and rule.max_c is None


# Role and equivalents per formula unit, from the balanced equations (and DOMAIN.md's list):
#   Na2CO3 + 2 H+ -> 2 Na+ + H2O + CO2;  Na2B4O7·10H2O + 2 H+ -> 2 Na+ + 4 H3BO3 + 5 H2O;
#   (HOCH2)3CNH2 + H+;  KHC8H4O4 + OH-;  H3NSO3 + OH-;  KH(IO3)2 + OH-;  C6H5COOH + OH-;
#   H2C2O4 + 2 OH-.
@pytest.mark.parametrize(
    ("key", "role", "equivalents"),
    [
        ("Na2CO3", "base", 2),
        ("borax", "base", 2),
        ("TRIS", "base", 1),
        ("KHP", "acid", 1),
        ("sulfamic", "acid", 1),
        ("biiodate", "acid", 1),
        ("benzoic", "acid", 1),
        ("oxalic", "acid", 2),
    ],
)
def test_standard_roles_and_equivalents(key, role, equivalents):
    s = chem.standard(key)
    assert (s.role, s.equivalents) == (role, equivalents)


def test_densities_of_the_buoyancy_example_and_memory_values():
    # Harvey, Analytical Chemistry 2.1 (buoyancy example) uses 1.33 g/cm3 for TRIS; the others are the
    # handbook values DOMAIN.md lists (memory — verify).
    assert chem.standard("TRIS").density_g_cm3 == 1.33
    assert chem.standard("KHP").density_g_cm3 == 1.636
    assert chem.standard("Na2CO3").density_g_cm3 == 2.532
    assert chem.standard("borax").density_g_cm3 == 1.73


def test_list_standards_for_a_titrant_offers_only_the_opposite_role():
    for t in chem.list_titrants():
        offered = chem.list_standards(t)
        if t.secondary_only or t.key == "K2Cr2O7":
            # standardized against another titrant only (tests/test_reaction_classes.py)
            assert not offered and chem.list_references(t)
            continue
        assert offered
        if t.solvent == "water":  # in anhydrous acetic acid KHP is the base (BP 2012 Appendix I B)
            assert all(s.role != t.role for s in offered)
        for s in offered:
            chem.stoichiometric_factor(t, s)  # every offered pair is accepted
    assert len(chem.list_standards()) == len(chem.STANDARDS)


# ---------------------------------------------------------------------------------------------------------
# Stoichiometry


@pytest.mark.parametrize(
    ("titrant_key", "partner_key", "partner_is_titrant", "nu"),
    [
        # Primary: moles of titrant per mole of standard, from the balanced equations above.
        ("HCl", "Na2CO3", False, 2.0),  # 2 HCl + Na2CO3
        ("H2SO4", "Na2CO3", False, 1.0),  # H2SO4 + Na2CO3
        ("HNO3", "borax", False, 2.0),
        ("HCl", "TRIS", False, 1.0),
        ("H2SO4", "TRIS", False, 0.5),  # H2SO4 + 2 TRIS
        ("NaOH", "KHP", False, 1.0),
        ("KOH", "benzoic", False, 1.0),
        ("NaOH", "oxalic", False, 2.0),  # 2 NaOH + H2C2O4
        ("Ba(OH)2", "KHP", False, 0.5),  # Ba(OH)2 + 2 KHP
        # Secondary, c_x = c_ref·V_ref·ν/V_x (QUAM:2012 Example A3 form).
        ("H2SO4", "NaOH", True, 0.5),  # H2SO4 + 2 NaOH
        ("NaOH", "H2SO4", True, 2.0),
        ("HCl", "NaOH", True, 1.0),
        ("HCl", "Ba(OH)2", True, 2.0),
    ],
)
def test_stoichiometric_factor(titrant_key, partner_key, partner_is_titrant, nu):
    partner = chem.titrant(partner_key) if partner_is_titrant else chem.standard(partner_key)
    assert chem.stoichiometric_factor(chem.titrant(titrant_key), partner) == nu


def test_every_same_role_pair_is_refused():
    refused = 0
    for t in chem.ACID_BASE_TITRANTS:
        for partner in (*chem.ACID_BASE_STANDARDS, *chem.ACID_BASE_TITRANTS):
            if partner.role != t.role:
                continue
            with pytest.raises(chem.IncompatiblePair) as caught:
                chem.stoichiometric_factor(t, partner)
            assert caught.value.status == 422
            refused += 1
    # 4 acid titrants × (5 acid standards + 4 acid titrants) + 3 bases × (3 basic standards + 3 bases)
    assert refused == 4 * 9 + 3 * 6


def test_incompatible_pair_message_says_why():
    with pytest.raises(chem.IncompatiblePair) as caught:
        chem.stoichiometric_factor(chem.titrant("HCl"), chem.standard("KHP"))
    msg = caught.value.message
    assert "an acid titrant" in msg and "basic" in msg and "Na2CO3" in msg
    with pytest.raises(chem.IncompatiblePair) as caught:
        chem.stoichiometric_factor(chem.titrant("NaOH"), chem.standard("TRIS"))
    assert "a base titrant" in caught.value.message and "KHP" in caught.value.message


@pytest.mark.parametrize(
    ("titrant_key", "standard_key", "grams"),
    [
        # DOMAIN.md (prep-room rule of thumb, 0.1 mol/L at a 40 mL titre): KHP about 0.82 g,
        # Na2CO3 about 0.21 g, TRIS about 0.48 g, borax decahydrate about 0.76 g.
        ("NaOH", "KHP", 0.82),
        ("HCl", "Na2CO3", 0.21),
        ("HCl", "TRIS", 0.48),
        ("HCl", "borax", 0.76),
    ],
)
def test_suggested_standard_mass(titrant_key, standard_key, grams):
    m = chem.suggested_standard_mass(chem.titrant(titrant_key), chem.standard(standard_key), 0.1)
    assert m == pytest.approx(grams, abs=0.005)


def test_suggested_mass_gives_back_the_molarity_through_the_primary_equation():
    # DOMAIN.md: c = 1000·m·P·ν/(M·V). A mass suggested for 0.1 mol/L, 35 mL, P = 0.998 must return
    # 0.1 mol/L when put back through it.
    t, s = chem.titrant("H2SO4"), chem.standard("Na2CO3")
    m = chem.suggested_standard_mass(t, s, 0.05, titre_ml=35.0, purity=0.998)
    nu = chem.stoichiometric_factor(t, s)
    c = 1000.0 * m * 0.998 * nu / (s.molar_mass.value * 35.0)
    assert c == pytest.approx(0.05, rel=1e-12)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"molarity_mol_l": 0.0}, "molarity_mol_l"),
        ({"molarity_mol_l": -0.1}, "molarity_mol_l"),
        ({"molarity_mol_l": float("nan")}, "molarity_mol_l"),
        ({"molarity_mol_l": 0.1, "titre_ml": 0.0}, "titre_ml"),
        ({"molarity_mol_l": 0.1, "purity": 1.2}, "purity"),
        ({"molarity_mol_l": 0.1, "purity": 0.0}, "purity"),
    ],
)
def test_suggested_mass_refuses_bad_numbers(kwargs, field):
    with pytest.raises(InvalidInput) as caught:
        chem.suggested_standard_mass(chem.titrant("NaOH"), chem.standard("KHP"), **kwargs)
    assert field in caught.value.fields


def test_suggested_mass_refuses_a_same_role_pair():
    with pytest.raises(chem.IncompatiblePair):
        chem.suggested_standard_mass(chem.titrant("NaOH"), chem.standard("TRIS"), 0.1)


# ---------------------------------------------------------------------------------------------------------
# Drying (rules are common practice; see chemistry.STANDARDS)


def test_borax_oven_dried_at_105_is_refused():
    reason = chem.check_drying("borax", 105.0)
    assert reason is not None
    assert "must not be oven-dried" in reason and "105" in reason


def test_khp_at_120_is_fine():
    assert chem.check_drying(chem.standard("KHP"), 120.0) is None
    assert chem.check_drying("KHP", 110.0) is None


@pytest.mark.parametrize(
    ("key", "t_c", "word"),
    [
        ("KHP", 90.0, "below"),
        ("KHP", 160.0, "above"),
        ("Na2CO3", 110.0, "below"),  # too cool to turn NaHCO3 into Na2CO3
        ("Na2CO3", 400.0, "above"),
        ("TRIS", 130.0, "above"),
        ("sulfamic", 150.0, "above"),
        ("oxalic", 100.0, "must not be oven-dried"),
        ("benzoic", 60.0, "must not be oven-dried"),
    ],
)
def test_drying_records_that_break_the_rule(key, t_c, word):
    reason = chem.check_drying(key, t_c)
    assert reason is not None and word in reason


def test_drying_within_rule_or_not_recorded():
    assert chem.check_drying("Na2CO3", 285.0) is None
    assert chem.check_drying("sulfamic", 105.0) is None
    assert chem.check_drying("borax", None) is None
    assert chem.check_drying("KHP", None) is None  # missing is a warning, not a break
    assert chem.check_drying("KHP", float("nan")) is not None


def test_missing_drying_warning():
    for key in ("KHP", "Na2CO3", "TRIS", "biiodate"):
        warning = chem.missing_drying_warning(key)
        assert warning is not None and "no drying is recorded" in warning
    for key in ("borax", "oxalic", "benzoic", "sulfamic"):
        assert chem.missing_drying_warning(key) is None
