"""Atomic weights, formula parsing, molar masses and the catalogue of titrants and primary standards.

Pure module: plain values and frozen dataclasses in and out; no web or database import.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import TypeVar

from stockroom import corrections
from stockroom.errors import FieldError, InvalidInput, StockroomError


class FormulaError(StockroomError):
    """A chemical formula could not be read, or names an element without an atomic weight here."""

    status = 422


class UnknownSubstance(StockroomError):
    """A titrant or primary standard name that the catalogue does not hold."""

    status = 422


class IncompatiblePair(StockroomError):
    """A titrant paired with a standard or reference of the same acid/base role."""

    status = 422


# ---------------------------------------------------------------------------------------------------------
# Atomic weights
#
# Standard atomic weights of the elements 2021, IUPAC/CIAAW (Prohaska et al., Pure Appl. Chem. 94 (2022)
# 573). Where CIAAW gives the standard atomic weight as an interval (H, Li, B, C, N, O, Mg, Si, S, Cl, Ar,
# Br, Tl, Pb) the value is the abridged ("conventional") value with its abridged uncertainty; elsewhere it
# is the single standard atomic weight with its uncertainty. This is the same table the periodictable
# package carries, and tests/test_chemistry.py checks every entry against it.
#
# Standard uncertainty: each entry's printed "±a" is treated as the half-width of a rectangular
# distribution, u = a/sqrt(3), as EURACHEM/CITAC QUAM:2012 (Appendix A2) does for IUPAC atomic weights.
# For interval elements CIAAW chose the abridged value and its ±a so that value ± a covers the whole
# interval; taking the interval's own half-width about the conventional value would not, because the
# conventional value is not always its centre (Li: 6.94 against an interval of [6.938, 6.997]).
# Using the printed ±a therefore keeps one rule for every element and never understates the spread.
_ATOMIC_WEIGHT_TABLE: dict[str, tuple[float, float]] = {
    # symbol: (atomic weight, printed ± half-width)
    "H": (1.008, 0.0002),
    "He": (4.002602, 0.000002),
    "Li": (6.94, 0.06),
    "Be": (9.0121831, 0.0000005),
    "B": (10.81, 0.02),
    "C": (12.011, 0.002),
    "N": (14.007, 0.001),
    "O": (15.999, 0.001),
    "F": (18.998403162, 0.000000005),
    "Ne": (20.1797, 0.0006),
    "Na": (22.98976928, 0.00000002),
    "Mg": (24.305, 0.002),
    "Al": (26.9815384, 0.0000003),
    "Si": (28.085, 0.001),
    "P": (30.973761998, 0.000000005),
    "S": (32.06, 0.02),
    "Cl": (35.45, 0.01),
    "Ar": (39.95, 0.16),
    "K": (39.0983, 0.0001),
    "Ca": (40.078, 0.004),
    "Ti": (47.867, 0.001),
    "V": (50.9415, 0.0001),
    "Cr": (51.9961, 0.0006),
    "Mn": (54.938043, 0.000002),
    "Fe": (55.845, 0.002),
    "Co": (58.933194, 0.000003),
    "Ni": (58.6934, 0.0004),
    "Cu": (63.546, 0.003),
    "Zn": (65.38, 0.02),
    "Ga": (69.723, 0.001),
    "Ge": (72.630, 0.008),
    "As": (74.921595, 0.000006),
    "Se": (78.971, 0.008),
    "Br": (79.904, 0.003),
    "Kr": (83.798, 0.002),
    "Rb": (85.4678, 0.0003),
    "Sr": (87.62, 0.01),
    "Zr": (91.224, 0.002),
    "Mo": (95.95, 0.01),
    "Pd": (106.42, 0.01),
    "Ag": (107.8682, 0.0002),
    "Cd": (112.414, 0.004),
    "Sn": (118.710, 0.007),
    "Sb": (121.760, 0.001),
    "I": (126.90447, 0.00003),
    "Xe": (131.293, 0.006),
    "Cs": (132.90545196, 0.00000006),
    "Ba": (137.327, 0.007),
    "La": (138.90547, 0.00007),
    "Ce": (140.116, 0.001),
    "Nd": (144.242, 0.003),
    "W": (183.84, 0.01),
    "Pt": (195.084, 0.009),
    "Au": (196.966570, 0.000004),
    "Hg": (200.592, 0.003),
    "Tl": (204.38, 0.01),
    "Pb": (207.2, 1.1),
    "Bi": (208.98040, 0.00001),
    "Th": (232.0377, 0.0004),
    "U": (238.02891, 0.00003),
}

# Elements whose CIAAW 2021 standard atomic weight is an interval (their table value is the abridged one).
INTERVAL_ELEMENTS: frozenset[str] = frozenset({"H", "Li", "B", "C", "N", "O", "Mg", "Si", "S", "Cl", "Ar", "Br", "Tl", "Pb"})


@dataclass(frozen=True)
class AtomicWeight:
    """One element's atomic weight: value and standard uncertainty, both in g/mol."""

    symbol: str
    value: float  # g/mol
    u: float  # standard uncertainty, g/mol
    half_width: float  # the table's printed ± figure, g/mol

    @property
    def is_interval(self) -> bool:
        """True where CIAAW gives an interval and this is its abridged value."""
        return self.symbol in INTERVAL_ELEMENTS


ATOMIC_WEIGHTS: dict[str, AtomicWeight] = {
    sym: AtomicWeight(sym, value, a / math.sqrt(3.0), a) for sym, (value, a) in _ATOMIC_WEIGHT_TABLE.items()
}

# Every element symbol, so that a parse can tell "not an element" from "no atomic weight held here".
_ALL_SYMBOLS: frozenset[str] = frozenset(
    """H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se Br Kr
    Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb
    Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr Rf
    Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og""".split()
)


def atomic_weight(symbol: str) -> AtomicWeight:
    """The atomic weight of one element.

    symbol: element symbol, case as written ("Na"). Returns an AtomicWeight in g/mol.
    Raises FormulaError for a symbol that is no element or has no entry in the table.
    """
    if symbol in ATOMIC_WEIGHTS:
        return ATOMIC_WEIGHTS[symbol]
    if symbol in _ALL_SYMBOLS:
        raise FormulaError(
            f"element {symbol!r} has no atomic weight in stockroom's table; known: {', '.join(sorted(ATOMIC_WEIGHTS))}"
        )
    raise FormulaError(f"{symbol!r} is not an element symbol")


# ---------------------------------------------------------------------------------------------------------
# Formula parsing

# Ways people write the dot of a hydrate or adduct: middle dot, full stop, asterisk, bullet, operators.
_SEPARATORS = "·.*•∙⋅"
_SPACES_AROUND_SEPARATOR = re.compile(r"\s*([·.*•∙⋅])\s*")
_COEFFICIENT = re.compile(r"\d+(?:\.\d+)?")
_COUNT = re.compile(r"\d+")
_OPENING = {")": "(", "]": "["}


class _FormulaReader:
    """Recursive-descent reader over one formula string; positions in messages are 1-based."""

    def __init__(self, original: str, text: str):
        self.original = original
        self.text = text
        self.pos = 0

    def fail(self, why: str) -> FormulaError:
        return FormulaError(f"cannot read formula {self.original!r}: {why}")

    def peek(self) -> str:
        return self.text[self.pos] if self.pos < len(self.text) else ""

    def read(self) -> dict[str, float]:
        total: dict[str, float] = {}
        while True:
            part = self.read_part()
            for sym, n in part.items():
                total[sym] = total.get(sym, 0.0) + n
            ch = self.peek()
            if ch == "":
                return total
            if ch in _SEPARATORS:
                self.pos += 1
                if self.peek() == "":
                    raise self.fail("it ends with a hydrate separator and nothing after it")
                if self.peek() in _SEPARATORS:
                    raise self.fail(f"two separators in a row at position {self.pos + 1}")
                continue
            if ch in ")]":
                raise self.fail(f"{ch!r} at position {self.pos + 1} closes nothing")
            raise self.fail(f"unexpected {ch!r} at position {self.pos + 1}")

    def read_part(self) -> dict[str, float]:
        start = self.pos
        coefficient = 1.0
        m = _COEFFICIENT.match(self.text, self.pos)
        if m:
            coefficient = float(m.group())
            if coefficient <= 0:
                raise self.fail(f"coefficient {m.group()!r} at position {start + 1} must be above zero")
            self.pos = m.end()
        counts = self.read_group(closing="")
        if not counts:
            where = f"position {self.pos + 1}" if self.pos < len(self.text) else "the end"
            if m:
                raise self.fail(f"coefficient {m.group()!r} is followed by no formula (at {where})")
            raise self.fail(f"expected an element symbol or '(' at {where}")
        return {sym: n * coefficient for sym, n in counts.items()}

    def read_count(self) -> int:
        m = _COUNT.match(self.text, self.pos)
        if not m:
            return 1
        n = int(m.group())
        if n == 0:
            raise self.fail(f"a count of zero at position {self.pos + 1}")
        self.pos = m.end()
        return n

    def read_group(self, closing: str) -> dict[str, float]:
        counts: dict[str, float] = {}
        while True:
            ch = self.peek()
            if ch == "" or ch in _SEPARATORS:
                if closing:
                    raise self.fail(f"a {_OPENING[closing]!r} is never closed with {closing!r}")
                return counts
            if ch == closing:
                return counts
            if ch.isupper() and ch.isascii():
                start = self.pos
                self.pos += 1
                while self.peek().islower() and self.peek().isascii():
                    self.pos += 1
                symbol = self.text[start : self.pos]
                if symbol not in _ALL_SYMBOLS:
                    raise self.fail(f"{symbol!r} at position {start + 1} is not an element symbol")
                n = self.read_count()
                counts[symbol] = counts.get(symbol, 0.0) + n
            elif ch in "([":
                open_at = self.pos
                self.pos += 1
                inner = self.read_group(closing=")" if ch == "(" else "]")
                if not inner:
                    raise self.fail(f"empty brackets at position {open_at + 1}")
                self.pos += 1  # past the closing bracket read_group stopped on
                n = self.read_count()
                for sym, k in inner.items():
                    counts[sym] = counts.get(sym, 0.0) + k * n
            elif ch in ")]":
                if closing:
                    raise self.fail(f"{ch!r} at position {self.pos + 1} does not match {_OPENING[closing]!r}")
                raise self.fail(f"{ch!r} at position {self.pos + 1} closes nothing")
            elif ch.isdigit():
                raise self.fail(
                    f"a number at position {self.pos + 1} follows neither an element nor a bracket "
                    "(a coefficient may only open the formula or a hydrate part)"
                )
            elif ch.islower():
                raise self.fail(f"element symbols start with a capital letter ({ch!r} at position {self.pos + 1})")
            elif ch.isspace():
                raise self.fail(f"a space at position {self.pos + 1}; write the formula without spaces")
            else:
                raise self.fail(f"unexpected {ch!r} at position {self.pos + 1} (charges and isotopes are not read)")


@lru_cache(maxsize=512)
def _parse_cached(formula: str) -> tuple[tuple[str, float], ...]:
    if not formula.strip():
        raise FormulaError("the formula is empty")
    # Spaces are tolerated only around a hydrate separator ("Na2B4O7 · 10H2O"); elsewhere they are
    # more likely a typing slip than meaning, so the reader refuses them.
    text = _SPACES_AROUND_SEPARATOR.sub(r"\1", formula.strip())
    if text[0] in _SEPARATORS:
        raise FormulaError(f"cannot read formula {formula!r}: it starts with a hydrate separator")
    return tuple(_FormulaReader(formula, text).read().items())


def parse_formula(formula: str) -> dict[str, float]:
    """Element counts of a formula, with brackets, hydrate dots and coefficients resolved.

    formula: e.g. "KHC8H4O4", "(HOCH2)3CNH2", "Na2B4O7·10H2O" (also "." or "*" as the dot).
    Returns {element symbol: count (dimensionless, a float because a hydrate may hold 0.5 H2O)}.
    Raises FormulaError on anything malformed or a symbol that is no element.
    """
    if not isinstance(formula, str):
        raise FormulaError(f"a formula must be text, not {type(formula).__name__}")
    return dict(_parse_cached(formula))


@dataclass(frozen=True)
class MolarMass:
    """A molar mass and its standard uncertainty from the atomic weights."""

    value: float  # g/mol
    u: float  # standard uncertainty, g/mol


@lru_cache(maxsize=512)
def _molar_mass_cached(formula: str) -> MolarMass:
    value = 0.0
    variance = 0.0
    for symbol, n in _parse_cached(formula):
        w = atomic_weight(symbol)
        value += n * w.value
        # The n atoms of one element share one atomic weight, so their uncertainties add linearly
        # (fully correlated); different elements are independent and add in quadrature.
        variance += (n * w.u) ** 2
    return MolarMass(value=value, u=math.sqrt(variance))


def molar_mass(formula: str) -> MolarMass:
    """Molar mass of a formula from the CIAAW 2021 atomic weights.

    formula: as parse_formula reads it. Returns MolarMass(value g/mol, u g/mol).
    Raises FormulaError for a bad formula or an element without an atomic weight here.
    """
    if not isinstance(formula, str):
        raise FormulaError(f"a formula must be text, not {type(formula).__name__}")
    return _molar_mass_cached(formula)


def _composition(formula: str) -> tuple[tuple[str, float], ...] | None:
    """Order-free composition key of a formula, or None when the text is not a formula."""
    try:
        counts = parse_formula(formula)
    except FormulaError:
        return None
    return tuple(sorted((sym, round(n, 9)) for sym, n in counts.items()))


# ---------------------------------------------------------------------------------------------------------
# Catalogue


@dataclass(frozen=True)
class DryingRule:
    """How a primary standard is brought to a known composition before weighing (temperatures in °C)."""

    oven_allowed: bool
    min_c: float | None  # °C; None: no lower limit (drying optional when oven_allowed)
    max_c: float | None  # °C; None: no upper limit
    text: str

    @property
    def drying_required(self) -> bool:
        """True when the rule asks for oven drying at or above a stated temperature."""
        return self.oven_allowed and self.min_c is not None


ACID = "acid"
BASE = "base"


@dataclass(frozen=True)
class Titrant:
    """A titrant solution kind; role is what the dissolved reagent is (acid or base).

    expansion: how its density follows temperature (corrections.ExpansionModel), used to refer
    molarities to 20 °C and for the budget's temperature term. max_molarity: mol/L, the strongest such
    solution that can exist (the concentrated or saturated form); a result above it is a slip, not a
    solution. max_molarity_source names where that figure is from.
    """

    key: str
    name: str
    formula: str
    role: str  # "acid" | "base"
    equivalents: int  # protons given (acid) or taken (base) per formula unit
    aliases: tuple[str, ...] = ()
    expansion: corrections.ExpansionModel = corrections.WATER_LIKE
    max_molarity: float = math.inf
    max_molarity_source: str = ""
    # Beyond acids and bases (see "Reaction classes" below). role then reads oxidant, reductant, ligand,
    # metal ion, precipitant; equivalents stays the acid-base count and is 0 for the other classes,
    # whose stoichiometry comes from the balanced reaction of each pair (PAIRS).
    reaction_class: str = "acid-base"
    solvent: str = "water"
    species: str = ""  # the reacting species the formula unit gives, charge after "^" ("MnO4^-")
    electrons: int = 0  # redox: electrons taken (oxidant) or given (reductant) per formula unit
    weighed_as: str = ""  # the solid reagent weighed to make it, when not the formula ("Na2S2O3·5H2O")
    endpoint: str = ""
    storage: str = ""
    secondary_only: bool = False  # standardized against another titrant only
    back_titrant: bool = False  # used to titrate the excess of another titrant

    @property
    def molar_mass(self) -> MolarMass:
        """Molar mass of the reagent, g/mol."""
        return molar_mass(self.formula)

    @property
    def expansion_model_text(self) -> str:
        """Which expansion model refers this titrant to 20 °C, in words."""
        m = self.expansion
        if m.kind == "linear":
            return f"{m.key}: {m.alpha_per_k:.2g} per °C ({m.source})"
        return f"{m.key} ({m.source})"


@dataclass(frozen=True)
class PrimaryStandard:
    """A primary standard substance; role is what the substance itself is (KHP is an acid)."""

    key: str
    name: str
    formula: str
    role: str  # "acid" | "base"
    equivalents: int  # protons given or taken per formula unit at the stated end point
    density_g_cm3: float  # g/cm3, for the air-buoyancy correction of its weighings
    drying: DryingRule
    endpoint: str
    aliases: tuple[str, ...] = ()
    density_source: str = ""
    reaction_class: str = "acid-base"

    @property
    def molar_mass(self) -> MolarMass:
        """Molar mass of the standard as weighed (hydrate water included), g/mol."""
        return molar_mass(self.formula)


ACID_BASE_TITRANTS: tuple[Titrant, ...] = (
    Titrant(
        "HCl",
        "hydrochloric acid",
        "HCl",
        ACID,
        1,
        ("hydrochloric acid", "muriatic acid"),
        corrections.AQUEOUS_HCL,
        12.4,
        "38 % HCl, 12.39 mol/L at 20 °C (the concentration table of hydrochloric acid's physical properties)",
    ),
    Titrant(
        "HNO3",
        "nitric acid",
        "HNO3",
        ACID,
        1,
        ("nitric acid",),
        corrections.WATER_LIKE,
        24.0,
        "100 % HNO3, about 1.51 g/cm3, 24 mol/L (from memory)",
    ),
    Titrant(
        "H2SO4",
        "sulfuric acid",
        "H2SO4",
        ACID,
        2,
        ("sulfuric acid", "sulphuric acid"),
        corrections.WATER_LIKE,
        18.7,
        "98 % H2SO4, about 1.84 g/cm3, 18.4 mol/L (from memory); 100 % is 18.7 mol/L",
    ),
    # Aqueous perchloric acid. Perchloric acid in anhydrous acetic acid is its own titrant
    # ("HClO4-AcOH" below): another solvent, its own expansion, KHP acting as a base.
    Titrant(
        "HClO4",
        "perchloric acid",
        "HClO4",
        ACID,
        1,
        ("perchloric acid",),
        corrections.WATER_LIKE,
        12.0,
        "72 % HClO4, about 1.68 g/cm3, 12 mol/L (from memory)",
    ),
    Titrant(
        "NaOH",
        "sodium hydroxide",
        "NaOH",
        BASE,
        1,
        ("sodium hydroxide", "caustic soda"),
        corrections.AQUEOUS_NAOH,
        19.1,
        "saturated NaOH(aq) at 25 °C, 19.1 mol/L (Sipos, May, Hefter, Pannell, J. Chem. Eng. Data 45 (2000) 613)",
    ),
    Titrant(
        "KOH",
        "potassium hydroxide",
        "KOH",
        BASE,
        1,
        ("potassium hydroxide", "caustic potash"),
        corrections.WATER_LIKE,
        14.1,
        "saturated KOH(aq) at 25 °C, 14.1 mol/L (Sipos et al., J. Chem. Eng. Data 45 (2000) 613)",
    ),
    Titrant(
        "Ba(OH)2",
        "barium hydroxide",
        "Ba(OH)2",
        BASE,
        2,
        ("barium hydroxide", "baryta"),
        corrections.WATER_LIKE,
        0.3,
        "saturated at 20 °C, about 0.23 mol/L (solubility about 3.9 g Ba(OH)2 per 100 g water, from memory)",
    ),
)

# ---------------------------------------------------------------------------------------------------------
# Reaction classes beyond acids and bases
#
# A titrant's molarity is of its formula unit (KMnO4, Na2S2O3, Na2H2EDTA, ...), never normality. The
# titrant/partner mole ratio comes from the balanced equation(s) of the pair (PAIRS below), checked for
# atoms and charge on import. Media, end points and storage are common practice unless a source is named;
# the pharmacopoeias' chapters on volumetric solutions (USP <541> and the VS list, Ph. Eur. 4.2.2, BP
# Appendix I B) and ASTM E200 describe these standardizations.

ACID_BASE = "acid-base"
REDOX = "redox"
COMPLEXOMETRIC = "complexometric"
PRECIPITATION = "precipitation"
REACTION_CLASSES: tuple[str, ...] = (ACID_BASE, REDOX, COMPLEXOMETRIC, PRECIPITATION)

OXIDANT = "oxidant"
REDUCTANT = "reductant"
LIGAND = "ligand"
METAL_ION = "metal ion"
PRECIPITANT = "precipitant"
PRECIPITATED = "precipitated ion"

_DARK = "Keep in a well-closed amber glass bottle, away from light (common practice)."

OTHER_TITRANTS: tuple[Titrant, ...] = (
    Titrant(
        "KMnO4",
        "potassium permanganate",
        "KMnO4",
        OXIDANT,
        0,
        ("potassium permanganate", "permanganate"),
        max_molarity=0.4,
        max_molarity_source="solubility about 6.4 g per 100 g water at 20 °C, about 0.4 mol/L (from memory)",
        reaction_class=REDOX,
        species="MnO4^-",
        electrons=5,
        endpoint="Self-indicating: the first faint pink that persists 30 s (common practice)",
        storage="Let stand a week or boil an hour, filter off MnO2 through sintered glass (not paper); "
        + _DARK
        + " Re-check often: it decomposes in light and on any organic matter (common practice).",
    ),
    Titrant(
        "Na2S2O3",
        "sodium thiosulfate",
        "Na2S2O3",
        REDUCTANT,
        0,
        ("sodium thiosulfate", "sodium thiosulphate", "thiosulfate", "hypo"),
        max_molarity=3.0,
        max_molarity_source="solubility of the pentahydrate about 70 g per 100 g water at 20 °C (from memory)",
        reaction_class=REDOX,
        species="S2O3^2-",
        electrons=1,
        weighed_as="Na2S2O3·5H2O",
        endpoint="Starch added near the end point (pale straw colour), blue to colourless (common practice)",
        storage="Make with boiled, cooled water and a little Na2CO3 (about 0.1 g/L) against bacterial "
        "decomposition; " + _DARK + " Re-check often (common practice).",
    ),
    Titrant(
        "I2",
        "iodine",
        "I2",
        OXIDANT,
        0,
        ("iodine", "iodine solution", "triiodide"),
        max_molarity=0.5,
        max_molarity_source="iodine in concentrated KI solution; 0.05 mol/L is the usual strength (from memory)",
        reaction_class=REDOX,
        species="I2",
        electrons=2,
        endpoint="Starch, colourless to blue; or the iodine's own yellow (common practice)",
        storage="Dissolved in KI solution (about 36 g KI per 0.05 mol I2 per litre); keep in a glass-stoppered "
        "amber bottle, cool: iodine is volatile (common practice).",
        secondary_only=True,
    ),
    Titrant(
        "Ce(SO4)2",
        "cerium(IV) sulfate",
        "Ce(SO4)2",
        OXIDANT,
        0,
        ("cerium(IV) sulfate", "ceric sulfate", "ceric sulphate", "cerium(IV) sulphate", "cerium sulfate"),
        max_molarity=0.5,
        max_molarity_source="about 0.5 mol/L in 1 mol/L sulfuric acid (from memory)",
        reaction_class=REDOX,
        species="Ce^4+",
        electrons=1,
        weighed_as="Ce(SO4)2·4H2O",
        endpoint="Ferroin, red to pale blue (common practice)",
        storage="Made in sulfuric acid (about 0.5 mol/L H2SO4) so it does not hydrolyse; stable for months (common practice).",
    ),
    Titrant(
        "FAS",
        "ammonium iron(II) sulfate",
        "(NH4)2Fe(SO4)2",
        REDUCTANT,
        0,
        (
            "ammonium iron(II) sulfate",
            "ferrous ammonium sulfate",
            "ferrous ammonium sulphate",
            "ammonium iron(II) sulphate",
            "Mohr's salt",
        ),
        max_molarity=0.5,
        max_molarity_source="0.1 mol/L is the usual strength; the hexahydrate dissolves to about 0.7 mol/L (from memory)",
        reaction_class=REDOX,
        species="Fe^2+",
        electrons=1,
        weighed_as="(NH4)2Fe(SO4)2·6H2O",
        endpoint="Ferroin or sodium diphenylamine sulfonate, or potentiometric (common practice)",
        storage="Made in dilute sulfuric acid; air oxidizes it slowly: standardize on the day of use (common practice).",
    ),
    Titrant(
        "K2Cr2O7",
        "potassium dichromate",
        "K2Cr2O7",
        OXIDANT,
        0,
        ("potassium dichromate", "potassium bichromate", "dichromate"),
        max_molarity=0.4,
        max_molarity_source="solubility about 12 g per 100 g water at 20 °C, about 0.4 mol/L (from memory)",
        reaction_class=REDOX,
        species="Cr2O7^2-",
        electrons=6,
        endpoint="Sodium diphenylamine sulfonate, green to violet, in H2SO4/H3PO4 (common practice)",
        storage="Very stable; weighed from the dried primary standard it needs no standardization, "
        "checking it against iron(II) is a secondary check (common practice).",
    ),
    Titrant(
        "AgNO3",
        "silver nitrate",
        "AgNO3",
        PRECIPITANT,
        0,
        ("silver nitrate",),
        max_molarity=5.0,
        max_molarity_source="0.1 mol/L is usual; solubility about 216 g per 100 g water at 20 °C (from memory)",
        reaction_class=PRECIPITATION,
        species="Ag^+",
        endpoint="Potassium chromate (Mohr, neutral), an adsorption indicator such as dichlorofluorescein "
        "(Fajans), or potentiometric with a silver electrode (common practice)",
        storage="Keep in amber glass, away from light: silver salts darken (common practice).",
    ),
    Titrant(
        "NH4SCN",
        "ammonium thiocyanate",
        "NH4SCN",
        PRECIPITATED,
        0,
        ("ammonium thiocyanate", "ammonium sulfocyanide", "thiocyanate"),
        max_molarity=5.0,
        max_molarity_source="0.1 mol/L is usual; very soluble in water (from memory)",
        reaction_class=PRECIPITATION,
        species="SCN^-",
        endpoint="Iron(III) alum in nitric acid, the first permanent red-brown (Volhard; common practice)",
        storage="Hygroscopic solid: never weighed as a standard, always standardized against silver nitrate (common practice).",
        secondary_only=True,
        back_titrant=True,
    ),
    Titrant(
        "EDTA",
        "disodium edetate",
        "Na2H2C10H12N2O8",
        LIGAND,
        0,
        (
            "disodium edetate",
            "edetate disodium",
            "disodium EDTA",
            "Na2EDTA",
            "sodium edetate",
            "disodium ethylenediaminetetraacetate",
        ),
        max_molarity=0.25,
        max_molarity_source="solubility of the dihydrate about 10 g per 100 g water at 20 °C, about 0.27 mol/L (from memory)",
        reaction_class=COMPLEXOMETRIC,
        species="C10H14N2O8^2-",  # H2Y^2-
        weighed_as="C10H14N2Na2O8·2H2O",
        endpoint="Eriochrome black T at pH 10 (NH3/NH4Cl buffer), red to blue; xylenol orange at pH 5–6 "
        "(hexamine buffer) for zinc (common practice)",
        storage="Keep in polyethylene: glass gives up calcium and magnesium to it (common practice).",
    ),
    Titrant(
        "ZnSO4",
        "zinc sulfate",
        "ZnSO4",
        METAL_ION,
        0,
        ("zinc sulfate", "zinc sulphate"),
        max_molarity=3.0,
        max_molarity_source="solubility of the heptahydrate about 96 g per 100 g water at 20 °C (from memory)",
        reaction_class=COMPLEXOMETRIC,
        species="Zn^2+",
        weighed_as="ZnSO4·7H2O",
        endpoint="Eriochrome black T at pH 10, blue to red (back-titration of excess edetate; common practice)",
        storage="Stable; standardized against a certified disodium edetate solution (common practice).",
        secondary_only=True,
        back_titrant=True,
    ),
    Titrant(
        "HClO4-AcOH",
        "perchloric acid in anhydrous acetic acid",
        "HClO4",
        ACID,
        1,
        (
            "perchloric acid in acetic acid",
            "perchloric acid in glacial acetic acid",
            "perchloric acid in anhydrous acetic acid",
            "non-aqueous perchloric acid",
        ),
        corrections.ACETIC_ACID_HCLO4,
        0.2,
        "0.1 mol/L is the pharmacopoeial strength; made from 70 % HClO4 and acetic anhydride (from memory)",
        reaction_class=ACID_BASE,
        solvent="anhydrous acetic acid",
        species="H^+",
        endpoint="Crystal violet, violet to blue-green, or potentiometric (BP 2012 Appendix I B, Perchloric Acid VS)",
        storage="Keep tightly closed, protected from moisture; record the temperature of each "
        "standardization and use: the medium expands about 0.11 % per °C (BP 2012 Appendix I B).",
    ),
)

# Drying temperatures and end points are common practice in prep rooms and volumetric-analysis texts;
# none is from a single standard. Temperatures marked "from memory" should be checked against the
# supplier's certificate of the lot in use, which overrides this table.
ACID_BASE_STANDARDS: tuple[PrimaryStandard, ...] = (
    PrimaryStandard(
        key="Na2CO3",
        name="sodium carbonate",
        formula="Na2CO3",
        role=BASE,
        equivalents=2,  # both steps, titrated through to the CO2 (second) end point
        density_g_cm3=2.532,
        density_source="from memory (handbook value for the anhydrous salt) — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=270.0,
            max_c=300.0,
            text="Dry 1 h at 270–300 °C (turns any NaHCO3 into Na2CO3), cool in a desiccator "
            "(common practice; temperatures from memory — verify)",
        ),
        endpoint="Bromocresol green or methyl orange; boil near the end point to expel CO2, cool and "
        "finish the titration (common practice)",
        aliases=("sodium carbonate", "anhydrous sodium carbonate", "sodium carbonate anhydrous", "soda ash"),
    ),
    PrimaryStandard(
        key="borax",
        name="sodium tetraborate decahydrate",
        formula="Na2B4O7·10H2O",
        role=BASE,
        equivalents=2,  # B4O7^2- + 2 H+ + 5 H2O -> 4 H3BO3
        density_g_cm3=1.73,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=False,
            min_c=None,
            max_c=None,
            text="Never oven-dry: keep over saturated NaCl/sucrose solution at constant humidity; it loses "
            "water of crystallization from about 60 °C (common practice)",
        ),
        endpoint="Methyl red (about pH 5), or bromocresol green (common practice)",
        aliases=(
            "borax decahydrate",
            "sodium tetraborate decahydrate",
            "disodium tetraborate decahydrate",
            "sodium borate decahydrate",
        ),
    ),
    PrimaryStandard(
        key="TRIS",
        name="tris(hydroxymethyl)aminomethane",
        formula="(HOCH2)3CNH2",
        role=BASE,
        equivalents=1,
        # 1.33 g/cm3 is the value of the buoyancy example in Harvey, Analytical Chemistry 2.1.
        density_g_cm3=1.33,
        density_source="Harvey, Analytical Chemistry 2.1 (buoyancy example)",
        drying=DryingRule(
            oven_allowed=True,
            min_c=100.0,
            max_c=105.0,
            text="Dry 2 h at 100–105 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Bromocresol green or methyl red, about pH 4.5–5.5 (common practice)",
        aliases=("THAM", "tromethamine", "trometamol", "tris(hydroxymethyl)aminomethane", "tris base"),
    ),
    PrimaryStandard(
        key="KHP",
        name="potassium hydrogen phthalate",
        formula="KHC8H4O4",
        role=ACID,
        equivalents=1,
        density_g_cm3=1.636,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=110.0,
            max_c=120.0,
            text="Dry 2 h at 110–120 °C, cool in a desiccator (common practice)",
        ),
        endpoint="Phenolphthalein (about pH 8.6), with a blank on the CO2-free water used (AOAC; common practice)",
        aliases=(
            "KHPh",
            "potassium hydrogen phthalate",
            "potassium acid phthalate",
            "potassium biphthalate",
        ),
    ),
    PrimaryStandard(
        key="sulfamic",
        name="sulfamic acid",
        formula="H3NSO3",
        role=ACID,
        equivalents=1,
        density_g_cm3=2.15,
        density_source="from memory — verify",
        drying=DryingRule(
            # Not hygroscopic: a desiccator is enough; a short oven drying does no harm below ~110 °C.
            oven_allowed=True,
            min_c=None,
            max_c=110.0,
            text="Keep in a desiccator over silica gel; if oven-dried, not above 110 °C (common practice; from memory — verify)",
        ),
        endpoint="Phenolphthalein or bromothymol blue (a strong acid: any indicator changing in "
        "pH 4.5–9 serves; common practice)",
        aliases=("sulfamic acid", "sulphamic acid", "amidosulfonic acid", "amidosulfuric acid"),
    ),
    PrimaryStandard(
        key="biiodate",
        name="potassium hydrogen iodate",
        formula="KH(IO3)2",
        role=ACID,
        equivalents=1,
        density_g_cm3=3.2,
        density_source="from memory, uncertain — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=120.0,
            text="Dry 2 h at 105–120 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Phenolphthalein or bromothymol blue (a strong acid; common practice)",
        aliases=(
            "potassium hydrogen iodate",
            "potassium biiodate",
            "potassium hydrogen diiodate",
            "KH(IO3)2",
        ),
    ),
    PrimaryStandard(
        key="benzoic",
        name="benzoic acid",
        formula="C6H5COOH",
        role=ACID,
        equivalents=1,
        density_g_cm3=1.27,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=False,
            min_c=None,
            max_c=None,
            text="Do not oven-dry: it sublimes and melts at about 122 °C; keep in a desiccator over silica gel (common practice)",
        ),
        endpoint="Phenolphthalein; dissolve first in neutralized ethanol, as it is sparingly soluble in water (common practice)",
        aliases=("benzoic acid",),
    ),
    PrimaryStandard(
        key="oxalic",
        name="oxalic acid dihydrate",
        formula="H2C2O4·2H2O",
        role=ACID,
        equivalents=2,  # both protons at a phenolphthalein end point
        density_g_cm3=1.65,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=False,
            min_c=None,
            max_c=None,
            text="Never oven-dry and keep away from strong desiccants: both drive off its water of "
            "crystallization; store in a closed bottle at room conditions (common practice)",
        ),
        endpoint="Phenolphthalein (both protons titrate; common practice)",
        aliases=("oxalic acid dihydrate", "oxalic acid", "ethanedioic acid dihydrate"),
    ),
)

TITRANTS: tuple[Titrant, ...] = ACID_BASE_TITRANTS + OTHER_TITRANTS


# Standards for the other classes. Drying rules follow the pharmacopoeias' volumetric-solution texts
# where they name one (from memory, as marked) and are otherwise common practice; the lot's certificate
# overrides them. Densities are handbook values from memory (they enter only the buoyancy correction,
# where a 10 % error in density moves the mass by under 0.005 %).
OTHER_STANDARDS: tuple[PrimaryStandard, ...] = (
    PrimaryStandard(
        key="Na2C2O4",
        name="sodium oxalate",
        formula="Na2C2O4",
        role=REDUCTANT,
        equivalents=0,
        density_g_cm3=2.34,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=110.0,
            text="Dry 2 h at 105–110 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Titrated hot (above 60 °C) in dilute sulfuric acid; permanganate is its own indicator (common practice)",
        aliases=("sodium oxalate", "disodium oxalate"),
        reaction_class=REDOX,
    ),
    PrimaryStandard(
        key="KIO3",
        name="potassium iodate",
        formula="KIO3",
        role=OXIDANT,
        equivalents=0,
        density_g_cm3=3.93,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=120.0,
            text="Dry to constant mass at about 110 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="With excess KI in acid; the iodine freed is titrated with thiosulfate to starch (common practice)",
        aliases=("potassium iodate",),
        reaction_class=REDOX,
    ),
    PrimaryStandard(
        key="KBrO3",
        name="potassium bromate",
        formula="KBrO3",
        role=OXIDANT,
        equivalents=0,
        density_g_cm3=3.27,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=180.0,
            text="Dry 1–2 h at 110–180 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="With excess KI in acid; the iodine freed is titrated with thiosulfate to starch (common practice)",
        aliases=("potassium bromate",),
        reaction_class=REDOX,
    ),
    PrimaryStandard(
        key="dichromate",
        name="potassium dichromate",
        formula="K2Cr2O7",
        role=OXIDANT,
        equivalents=0,
        density_g_cm3=2.68,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=110.0,
            max_c=150.0,
            text="Crush and dry 4 h at about 120 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="With excess KI in acid, in the dark for 5–10 min, then thiosulfate to starch; or titrating "
        "iron(II) to diphenylamine sulfonate (common practice)",
        aliases=("potassium dichromate", "potassium bichromate"),
        reaction_class=REDOX,
    ),
    PrimaryStandard(
        key="NaCl",
        name="sodium chloride",
        formula="NaCl",
        role=PRECIPITATED,
        equivalents=0,
        density_g_cm3=2.165,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=300.0,
            text="Dry 2 h at about 110 °C (or heat to 300 °C), cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Potassium chromate in neutral solution, or an adsorption indicator, or potentiometric (common practice)",
        aliases=("sodium chloride", "halite"),
        reaction_class=PRECIPITATION,
    ),
    PrimaryStandard(
        key="KCl",
        name="potassium chloride",
        formula="KCl",
        role=PRECIPITATED,
        equivalents=0,
        density_g_cm3=1.984,
        density_source="from memory — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=300.0,
            text="Dry 2 h at about 110 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Potassium chromate in neutral solution, or potentiometric (common practice)",
        aliases=("potassium chloride", "sylvite"),
        reaction_class=PRECIPITATION,
    ),
    PrimaryStandard(
        key="Zn",
        name="zinc metal",
        formula="Zn",
        role=METAL_ION,
        equivalents=0,
        density_g_cm3=7.14,
        density_source="from memory — verify",
        drying=DryingRule(
            # The metal is not oven-dried: its surface oxide is rinsed off with dilute acid before weighing.
            oven_allowed=False,
            min_c=None,
            max_c=None,
            text="Not oven-dried: rinse the granules in dilute HCl, then water and acetone, air-dry and weigh; "
            "dissolve in dilute HCl (common practice)",
        ),
        endpoint="Dissolved in HCl, buffered to pH 10 for eriochrome black T or pH 5–6 for xylenol orange (common practice)",
        aliases=("zinc", "zinc metal", "granulated zinc"),
        reaction_class=COMPLEXOMETRIC,
    ),
    PrimaryStandard(
        key="CaCO3",
        name="calcium carbonate",
        formula="CaCO3",
        role=METAL_ION,
        equivalents=0,
        density_g_cm3=2.71,
        density_source="from memory (calcite) — verify",
        drying=DryingRule(
            oven_allowed=True,
            min_c=105.0,
            max_c=200.0,
            text="Dry 2 h at 110–200 °C, cool in a desiccator (common practice; from memory — verify)",
        ),
        endpoint="Dissolved in a little dilute HCl, boiled to expel CO2, buffered to pH 10 (eriochrome black T, with "
        "a little Mg–EDTA) or pH 12–13 (calconcarboxylic acid) (common practice)",
        aliases=("calcium carbonate", "calcite"),
        reaction_class=COMPLEXOMETRIC,
    ),
)

STANDARDS: tuple[PrimaryStandard, ...] = ACID_BASE_STANDARDS + OTHER_STANDARDS


_Entry = TypeVar("_Entry", Titrant, PrimaryStandard)


def _norm(text: str) -> str:
    return " ".join(text.split()).casefold()


def _names(entry: Titrant | PrimaryStandard) -> set[str]:
    return {_norm(n) for n in (entry.key, entry.name, entry.formula, *entry.aliases)}


def _lookup(entries: tuple[_Entry, ...], key: str, kind: str) -> _Entry:
    """The catalogue entry whose key, name, alias or formula composition matches key."""
    if not isinstance(key, str) or not key.strip():
        raise UnknownSubstance(f"no {kind} named; give a key, name or formula")
    wanted = _norm(key)
    for entry in entries:
        if wanted in _names(entry):
            return entry
    # Formula text written another way ("C8H5KO4" for KHP) is matched by what it contains.
    composition = _composition(key.strip())
    if composition is not None:
        for entry in entries:
            if _composition(entry.formula) == composition:
                return entry
    known = "; ".join(f"{e.key} ({e.name})" for e in entries)
    raise UnknownSubstance(f"unknown {kind} {key!r}; known: {known}")


def titrant(key: str) -> Titrant:
    """The catalogue titrant for a key, name, alias or formula (case-insensitive).

    key: e.g. "HCl", "sodium hydroxide", "ba(oh)2". Returns a Titrant. Raises UnknownSubstance.
    """
    return _lookup(TITRANTS, key, "titrant")


def standard(key: str) -> PrimaryStandard:
    """The catalogue primary standard for a key, name, alias or formula (case-insensitive).

    key: e.g. "KHP", "THAM", "sodium carbonate", "KHC8H4O4". Returns a PrimaryStandard.
    Raises UnknownSubstance.
    """
    return _lookup(STANDARDS, key, "primary standard")


def _as_standard(value: PrimaryStandard | str) -> PrimaryStandard:
    return value if isinstance(value, PrimaryStandard) else standard(value)


def list_titrants() -> tuple[Titrant, ...]:
    """Every catalogue titrant, in catalogue order (for forms). Returns a tuple of Titrant."""
    return TITRANTS


def list_standards(for_titrant: Titrant | None = None) -> tuple[PrimaryStandard, ...]:
    """Catalogue primary standards, optionally only those that can standardize a given titrant.

    for_titrant: a Titrant, or None for all. Returns a tuple of PrimaryStandard in catalogue order.
    """
    if for_titrant is None:
        return STANDARDS
    return tuple(s for s in STANDARDS if reacts(for_titrant, s))


def list_references(for_titrant: Titrant) -> tuple[Titrant, ...]:
    """Catalogue titrants that can serve as the reference of a secondary standardization of for_titrant.

    for_titrant: a Titrant. Returns a tuple of Titrant in catalogue order.
    """
    return tuple(t for t in TITRANTS if t.key != for_titrant.key and reacts(for_titrant, t))


def reacts(titrant: Titrant, partner: Titrant | PrimaryStandard) -> bool:
    """Whether titrant and partner react as a titration (stoichiometric_factor would not refuse)."""
    return isinstance(_factor(titrant, partner), float)


# ---------------------------------------------------------------------------------------------------------
# Balanced reactions
#
# A species is a formula with its charge after "^" ("MnO4^-", "C2O4^2-", "Fe^2+", "H^+", "CO2"); an
# equation is "coefficient species + ... -> ...". Every equation below is checked for atoms and charge
# when the module loads, and each pair's mole ratio is derived from its equations, never typed in.

_CHARGE = re.compile(r"^(\d*)([+-])$")


def parse_species(text: str) -> tuple[str, int]:
    """A species' formula and charge: "C2O4^2-" -> ("C2O4", -2). Raises FormulaError when malformed."""
    formula, caret, charge = text.partition("^")
    z = 0
    if caret:
        m = _CHARGE.match(charge)
        if not m:
            raise FormulaError(f"cannot read the charge of {text!r}: write it as ^2-, ^+, ^3+")
        z = int(m.group(1) or 1) * (1 if m.group(2) == "+" else -1)
    parse_formula(formula)
    return formula, z


def parse_equation(text: str) -> tuple[tuple[tuple[float, str], ...], tuple[tuple[float, str], ...]]:
    """The two sides of an equation as ((coefficient, species), ...). Raises FormulaError when malformed."""
    if "->" not in text:
        raise FormulaError(f"an equation needs '->' between its sides: {text!r}")
    sides = []
    for side in text.split("->"):
        terms = []
        for term in side.split(" + "):
            words = term.split()
            if len(words) == 2:
                terms.append((float(words[0]), words[1]))
            elif len(words) == 1:
                terms.append((1.0, words[0]))
            else:
                raise FormulaError(f"cannot read the term {term!r} of {text!r}")
        sides.append(tuple(terms))
    if len(sides) != 2:
        raise FormulaError(f"an equation has exactly one '->': {text!r}")
    return sides[0], sides[1]


def imbalance(text: str) -> str | None:
    """Why an equation does not balance (atoms or charge), or None when it does."""
    left, right = parse_equation(text)
    totals: list[tuple[dict[str, float], float]] = []
    for side in (left, right):
        atoms: dict[str, float] = {}
        charge = 0.0
        for n, sp in side:
            formula, z = parse_species(sp)
            for sym, k in parse_formula(formula).items():
                atoms[sym] = atoms.get(sym, 0.0) + n * k
            charge += n * z
        totals.append((atoms, charge))
    (a1, z1), (a2, z2) = totals
    off = sorted(sym for sym in set(a1) | set(a2) if abs(a1.get(sym, 0.0) - a2.get(sym, 0.0)) > 1e-9)
    if off:
        return f"{', '.join(off)} not balanced in {text!r}"
    if abs(z1 - z2) > 1e-9:
        return f"charge {z1:g} on the left and {z2:g} on the right in {text!r}"
    return None


def _coefficient(side: tuple[tuple[float, str], ...], species: str) -> float | None:
    return next((n for n, sp in side if sp == species), None)


@dataclass(frozen=True)
class Pair:
    """A titrant and the standard (or reference titrant) it is standardized against, by their reaction.

    steps: balanced equations, the last one the titration; earlier ones free the species titrated (an
    iodate's iodine, a zinc granule's Zn2+). titrant_species / partner_species: what each formula unit
    brings (titrant_units / partner_units per formula unit: KH(IO3)2 brings 2 IO3-). conditions: medium
    and indicator; rules: chemistry-specific rules with their sources; equivalence: a published figure
    (mg of standard per mL of titrant) with its source; hot_min_c: the flask temperature the titration
    needs, °C, or None; blank: why a blank is run, or "".
    """

    titrant: str
    partner: str
    partner_is_titrant: bool
    reaction_class: str
    steps: tuple[str, ...]
    titrant_species: str
    partner_species: str
    partner_units: int = 1
    titrant_units: int = 1
    conditions: str = ""
    rules: tuple[str, ...] = ()
    equivalence: str = ""
    hot_min_c: float | None = None
    blank: str = ""

    @property
    def ratio(self) -> float:
        """Moles of titrant (formula units) per mole of partner (formula units), from the equations."""
        amount = float(self.partner_units)
        current = self.partner_species
        for i, step in enumerate(self.steps):
            left, right = parse_equation(step)
            a = _coefficient(left, current)
            if a is None:
                raise ValueError(f"{self.titrant}/{self.partner}: {current!r} is not a reactant of {step!r}")
            if i == len(self.steps) - 1:
                t = _coefficient(left, self.titrant_species)
                if t is None:
                    raise ValueError(f"{self.titrant}/{self.partner}: {self.titrant_species!r} is not a reactant of {step!r}")
                return amount * t / a / self.titrant_units
            following = {sp for _, sp in parse_equation(self.steps[i + 1])[0]}
            carried = [(n, sp) for n, sp in right if sp in following]
            if len(carried) != 1:
                raise ValueError(f"{self.titrant}/{self.partner}: step {step!r} must hand one species to the next")
            amount *= carried[0][0] / a
            current = carried[0][1]
        raise ValueError(f"{self.titrant}/{self.partner}: no steps")

    @property
    def overall(self) -> str:
        """The steps joined for display ("; then ")."""
        return "; then ".join(self.steps)


_IODOMETRIC_BLANK = (
    "Run a blank with the same KI, acid and water and no standard: iodate in the KI or air oxidation of "
    "iodide frees iodine of its own; subtract its titre (common practice)"
)
_THIOSULFATE_STEP = "I2 + 2 S2O3^2- -> 2 I^- + S4O6^2-"
_EDTA_ZN = "Zn^2+ + C10H14N2O8^2- -> C10H12N2ZnO8^2- + 2 H^+"
_PERMANGANATE_HOT = (
    "Titrate hot: oxalate reacts slowly with permanganate at room temperature; keep the flask above "
    "60 °C to the end point (McBride's method starts at 80–90 °C; common practice)"
)
_EDTA_PH = (
    "Buffer to the pH the indicator needs before titrating: pH 10 (NH3/NH4Cl) for eriochrome black T, "
    "pH 5–6 (hexamine) for xylenol orange; the metal complex and the indicator's colour change both "
    "depend on pH (common practice)"
)

PAIRS: tuple[Pair, ...] = (
    Pair(
        "KMnO4",
        "Na2C2O4",
        False,
        REDOX,
        ("2 MnO4^- + 5 C2O4^2- + 16 H^+ -> 2 Mn^2+ + 10 CO2 + 8 H2O",),
        "MnO4^-",
        "C2O4^2-",
        conditions="In dilute sulfuric acid (about 1 mol/L), hot; permanganate is its own indicator",
        rules=(_PERMANGANATE_HOT,),
        equivalence="1 mL of 0.02 mol/L KMnO4 ≡ 6.700 mg Na2C2O4 (pharmacopoeial VS list; from memory)",
        hot_min_c=60.0,
    ),
    Pair(
        "Ce(SO4)2",
        "Na2C2O4",
        False,
        REDOX,
        ("2 Ce^4+ + C2O4^2- -> 2 Ce^3+ + 2 CO2",),
        "Ce^4+",
        "C2O4^2-",
        conditions="In sulfuric/hydrochloric acid with iodine monochloride as catalyst, warm; ferroin (common practice)",
        equivalence="1 mL of 0.1 mol/L Ce(IV) ≡ 6.700 mg Na2C2O4 (computed from the equation; from memory)",
        hot_min_c=50.0,
        rules=("Titrate warm (about 50 °C) unless a catalyst such as ICl is used (common practice)",),
    ),
    Pair(
        "Na2S2O3",
        "KIO3",
        False,
        REDOX,
        ("IO3^- + 5 I^- + 6 H^+ -> 3 I2 + 3 H2O", _THIOSULFATE_STEP),
        "S2O3^2-",
        "IO3^-",
        conditions="Iodometric: the standard with excess KI in dilute acid; the iodine freed titrated to starch",
        rules=(_IODOMETRIC_BLANK,),
        equivalence="1 mL of 0.1 mol/L Na2S2O3 ≡ 3.567 mg KIO3 (pharmacopoeial VS list; from memory)",
        blank=_IODOMETRIC_BLANK,
    ),
    Pair(
        "Na2S2O3",
        "KBrO3",
        False,
        REDOX,
        ("BrO3^- + 6 I^- + 6 H^+ -> Br^- + 3 I2 + 3 H2O", _THIOSULFATE_STEP),
        "S2O3^2-",
        "BrO3^-",
        conditions="Iodometric: the standard with excess KI in dilute acid; the iodine freed titrated to starch",
        rules=(_IODOMETRIC_BLANK,),
        equivalence="1 mL of 0.1 mol/L Na2S2O3 ≡ 2.783 mg KBrO3 (Ph. Eur. 4.2.2, sodium thiosulfate; from memory)",
        blank=_IODOMETRIC_BLANK,
    ),
    Pair(
        "Na2S2O3",
        "dichromate",
        False,
        REDOX,
        ("Cr2O7^2- + 6 I^- + 14 H^+ -> 2 Cr^3+ + 3 I2 + 7 H2O", _THIOSULFATE_STEP),
        "S2O3^2-",
        "Cr2O7^2-",
        conditions="Iodometric: excess KI in strong acid, 5–10 min in the dark, then thiosulfate to starch",
        rules=(
            _IODOMETRIC_BLANK,
            "Let the dichromate and iodide react in the dark, stoppered, before titrating (common practice)",
        ),
        equivalence="1 mL of 0.1 mol/L Na2S2O3 ≡ 4.903 mg K2Cr2O7 (USP VS list; from memory)",
        blank=_IODOMETRIC_BLANK,
    ),
    Pair(
        "Na2S2O3",
        "biiodate",
        False,
        REDOX,
        ("IO3^- + 5 I^- + 6 H^+ -> 3 I2 + 3 H2O", _THIOSULFATE_STEP),
        "S2O3^2-",
        "IO3^-",
        partner_units=2,
        conditions="Iodometric: the standard with excess KI in dilute acid; the iodine freed titrated to starch",
        rules=(_IODOMETRIC_BLANK,),
        equivalence="1 mL of 0.1 mol/L Na2S2O3 ≡ 3.249 mg KH(IO3)2 (computed from the equation)",
        blank=_IODOMETRIC_BLANK,
    ),
    Pair(
        "FAS",
        "dichromate",
        False,
        REDOX,
        ("Cr2O7^2- + 6 Fe^2+ + 14 H^+ -> 2 Cr^3+ + 6 Fe^3+ + 7 H2O",),
        "Fe^2+",
        "Cr2O7^2-",
        conditions="In H2SO4/H3PO4; sodium diphenylamine sulfonate, green to violet (common practice)",
        equivalence="1 mL of 0.1 mol/L Fe(II) ≡ 4.903 mg K2Cr2O7 (computed from the equation)",
    ),
    Pair(
        "AgNO3",
        "NaCl",
        False,
        PRECIPITATION,
        ("Ag^+ + Cl^- -> AgCl",),
        "Ag^+",
        "Cl^-",
        conditions="Neutral solution, potassium chromate (Mohr) or dichlorofluorescein, or potentiometric",
        rules=(
            "Titrate in subdued light and keep the solution in amber glass: silver chloride and nitrate "
            "darken in light (common practice)",
        ),
        equivalence="1 mL of 0.1 mol/L AgNO3 ≡ 5.844 mg NaCl (pharmacopoeial VS list; from memory)",
    ),
    Pair(
        "AgNO3",
        "KCl",
        False,
        PRECIPITATION,
        ("Ag^+ + Cl^- -> AgCl",),
        "Ag^+",
        "Cl^-",
        conditions="Neutral solution, potassium chromate (Mohr), or potentiometric",
        rules=("Titrate in subdued light and keep the solution in amber glass (common practice)",),
        equivalence="1 mL of 0.1 mol/L AgNO3 ≡ 7.455 mg KCl (computed from the equation)",
    ),
    Pair(
        "EDTA",
        "Zn",
        False,
        COMPLEXOMETRIC,
        ("Zn + 2 H^+ -> Zn^2+ + H2", _EDTA_ZN),
        "C10H14N2O8^2-",
        "Zn",
        conditions="Zinc dissolved in dilute HCl, neutralized, buffered; xylenol orange at pH 5–6 or eriochrome black T at pH 10",
        rules=(_EDTA_PH,),
        equivalence="1 mL of 0.05 mol/L disodium edetate ≡ 3.269 mg Zn (Ph. Eur. 4.2.2, sodium edetate; from memory)",
    ),
    Pair(
        "EDTA",
        "CaCO3",
        False,
        COMPLEXOMETRIC,
        ("CaCO3 + 2 H^+ -> Ca^2+ + CO2 + H2O", "Ca^2+ + C10H14N2O8^2- -> C10H12CaN2O8^2- + 2 H^+"),
        "C10H14N2O8^2-",
        "CaCO3",
        conditions="Dissolved in a little HCl, CO2 boiled off, buffered to pH 10 (eriochrome black T with Mg–EDTA) or pH 12–13",
        rules=(_EDTA_PH,),
        equivalence="1 mL of 0.05 mol/L disodium edetate ≡ 5.004 mg CaCO3 (USP VS list, edetate disodium; from memory)",
    ),
    Pair(
        "HClO4-AcOH",
        "KHP",
        False,
        ACID_BASE,
        ("C8H5O4^- + H^+ -> C8H6O4",),
        "H^+",
        "C8H5O4^-",
        conditions="KHP dissolved in anhydrous acetic acid (warm gently, cool protected from air); "
        "crystal violet or potentiometric",
        rules=(
            "In anhydrous acetic acid the hydrogen phthalate ion acts as a base (BP 2012 Appendix I B, Perchloric Acid VS)",
            "Record the temperature of the standardization: the medium expands 0.0011 per °C (BP 2012 Appendix I B)",
        ),
        equivalence="1 mL of 0.1 mol/L HClO4 ≡ 20.42 mg C8H5KO4 (BP 2012 Appendix I B, Perchloric Acid VS)",
        blank="Titrate a blank of the acetic acid used and subtract it (common practice)",
    ),
    # Secondary standardizations: titrant against a certified titrant.
    Pair("Na2S2O3", "I2", True, REDOX, (_THIOSULFATE_STEP,), "S2O3^2-", "I2", conditions="Starch near the end point"),
    Pair(
        "NH4SCN",
        "AgNO3",
        True,
        PRECIPITATION,
        ("Ag^+ + SCN^- -> AgSCN",),
        "SCN^-",
        "Ag^+",
        conditions="Iron(III) alum in nitric acid (Volhard)",
    ),
    Pair(
        "ZnSO4",
        "EDTA",
        True,
        COMPLEXOMETRIC,
        (_EDTA_ZN,),
        "Zn^2+",
        "C10H14N2O8^2-",
        conditions="pH 10 buffer, eriochrome black T",
        rules=(_EDTA_PH,),
    ),
    Pair(
        "FAS",
        "Ce(SO4)2",
        True,
        REDOX,
        ("Ce^4+ + Fe^2+ -> Ce^3+ + Fe^3+",),
        "Fe^2+",
        "Ce^4+",
        conditions="In dilute H2SO4; ferroin",
    ),
    Pair(
        "FAS",
        "KMnO4",
        True,
        REDOX,
        ("MnO4^- + 5 Fe^2+ + 8 H^+ -> Mn^2+ + 5 Fe^3+ + 4 H2O",),
        "Fe^2+",
        "MnO4^-",
        conditions="In dilute H2SO4 (with H3PO4); permanganate is its own indicator",
    ),
    Pair(
        "FAS",
        "K2Cr2O7",
        True,
        REDOX,
        ("Cr2O7^2- + 6 Fe^2+ + 14 H^+ -> 2 Cr^3+ + 6 Fe^3+ + 7 H2O",),
        "Fe^2+",
        "Cr2O7^2-",
        conditions="In H2SO4/H3PO4; sodium diphenylamine sulfonate",
    ),
)

# Pairs that look possible but do not react as a titration, and why.
REFUSED: dict[frozenset[str], str] = {
    frozenset({"KMnO4", "Na2S2O3"}): "permanganate oxidizes thiosulfate partly to sulfate and partly to "
    "tetrathionate: there is no fixed ratio to titrate by (thiosulfate is standardized iodometrically)",
    frozenset({"Ce(SO4)2", "Na2S2O3"}): "cerium(IV) oxidizes thiosulfate to a mixture of products: no fixed "
    "ratio (thiosulfate is standardized iodometrically)",
    frozenset({"K2Cr2O7", "Na2S2O3"}): "dichromate does not oxidize thiosulfate cleanly; it is titrated "
    "through the iodine it frees from iodide (weigh K2Cr2O7 as the primary standard instead)",
}


def _check_pairs() -> None:
    titrant_keys = {t.key for t in TITRANTS}
    standard_keys = {s.key for s in STANDARDS}
    for pair in PAIRS:
        if pair.titrant not in titrant_keys or pair.partner not in (titrant_keys if pair.partner_is_titrant else standard_keys):
            raise ValueError(f"pair {pair.titrant}/{pair.partner} names an entry the catalogue lacks")
        for step in pair.steps:
            why = imbalance(step)
            if why:
                raise ValueError(f"pair {pair.titrant}/{pair.partner}: {why}")
        if not pair.ratio > 0:
            raise ValueError(f"pair {pair.titrant}/{pair.partner}: no positive ratio")


_check_pairs()


def pair_for(titrant: Titrant, partner: Titrant | PrimaryStandard) -> tuple[Pair, bool] | None:
    """The recorded reaction of a titrant with a partner, and whether it is recorded the other way round.

    Returns (Pair, inverted) or None when no reaction is recorded (acid-base pairs follow their rule).
    """
    is_titrant = isinstance(partner, Titrant)
    for pair in PAIRS:
        if pair.titrant == titrant.key and pair.partner == partner.key and pair.partner_is_titrant == is_titrant:
            return pair, False
        if is_titrant and pair.partner_is_titrant and pair.titrant == partner.key and pair.partner == titrant.key:
            return pair, True
    return None


def pairs_of(titrant: Titrant) -> tuple[Pair, ...]:
    """Recorded reactions in which titrant is standardized or serves as reference, catalogue order."""
    return tuple(p for p in PAIRS if p.titrant == titrant.key or (p.partner_is_titrant and p.partner == titrant.key))


def _aqueous_acid_base(titrant: Titrant, partner: Titrant | PrimaryStandard) -> bool:
    if titrant.reaction_class != ACID_BASE or titrant.solvent != "water" or partner.reaction_class != ACID_BASE:
        return False
    return not isinstance(partner, Titrant) or partner.solvent == "water"


def _partners_text(titrant: Titrant) -> str:
    names = [s.key for s in STANDARDS if reacts(titrant, s)]
    refs = [t.key for t in TITRANTS if t.key != titrant.key and reacts(titrant, t)]
    parts = []
    if names:
        parts.append("primary standards " + ", ".join(names))
    if refs:
        parts.append("reference titrants " + ", ".join(refs))
    return "; ".join(parts) or "no catalogue partner"


# ---------------------------------------------------------------------------------------------------------
# Stoichiometry and masses


def _factor(titrant: Titrant, partner: Titrant | PrimaryStandard) -> float | str:
    """ν for a pair that reacts, else the reason it does not (a clause)."""
    found = pair_for(titrant, partner)
    if found is not None:
        pair, inverted = found
        return 1.0 / pair.ratio if inverted else pair.ratio
    what = "reference titrant" if isinstance(partner, Titrant) else "primary standard"
    refused = REFUSED.get(frozenset({titrant.key, partner.key}))
    if refused is not None:
        return refused
    if _aqueous_acid_base(titrant, partner):
        if partner.role == titrant.role:
            return "same role"
        return partner.equivalents / titrant.equivalents
    if titrant.solvent != "water" or (isinstance(partner, Titrant) and partner.solvent != "water"):
        return f"{titrant.key} is titrated in {titrant.solvent}, against partners of its own"
    if partner.reaction_class != titrant.reaction_class:
        return (
            f"{titrant.key} is {_article(titrant.reaction_class)} titrant ({titrant.role}) and {partner.key} "
            f"{_article(partner.reaction_class)} {what} ({partner.role})"
        )
    if partner.role == titrant.role:
        return f"both are {titrant.role}s"
    return "no titration reaction between them is recorded"


def stoichiometric_factor(titrant: Titrant, partner: Titrant | PrimaryStandard) -> float:
    """Moles of titrant per mole of partner, ν, from the pair's balanced reaction.

    titrant: the solution being standardized. partner: the primary standard, or the reference titrant
    of a secondary standardization. Returns ν (dimensionless) such that
    c = 1000·m·P·ν/(M·V) (primary) and c_x = c_ref·V_ref·ν/V_x (secondary). Recorded reactions (PAIRS)
    give ν from their equations; aqueous acid-base pairs give partner.equivalents / titrant.equivalents.
    Raises IncompatiblePair for a pair that does not react as a titration.
    """
    nu = _factor(titrant, partner)
    if isinstance(nu, float):
        return nu
    what = "reference titrant" if isinstance(partner, Titrant) else "primary standard"
    if nu == "same role":
        opposite = BASE if titrant.role == ACID else ACID
        if isinstance(partner, Titrant):
            suggestions = ", ".join(t.key for t in TITRANTS if t.role == opposite and _aqueous_acid_base(titrant, t))
        else:
            suggestions = ", ".join(s.key for s in STANDARDS if s.role == opposite and _aqueous_acid_base(titrant, s))
        raise IncompatiblePair(
            f"{titrant.key} is {_a(titrant.role)} titrant and {partner.name} ({partner.key}) is "
            f"{_a(partner.role)} {what}: {_a(titrant.role)} titrant is standardized against "
            f"{'a basic' if opposite == BASE else 'an acidic'} {what} (e.g. {suggestions})"
        )
    raise IncompatiblePair(
        f"{titrant.name} ({titrant.key}) cannot be standardized against {partner.name} ({partner.key}): "
        f"{nu}. {titrant.key} pairs with {_partners_text(titrant)}"
    )


def _article(word: str) -> str:
    return f"an {word}" if word[:1] in "aeiou" else f"a {word}"


def _a(role: str) -> str:
    return f"an {role}" if role == ACID else f"a {role}"


def _positive(name: str, value: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise InvalidInput([FieldError(name, f"must be a number above zero (got {value!r})")])
    return float(value)


def suggested_standard_mass(
    titrant: Titrant,
    standard: PrimaryStandard,
    molarity_mol_l: float,
    titre_ml: float = 40.0,
    purity: float = 1.0,
) -> float:
    """Mass of primary standard that the nominal titrant would take titre_ml to titrate.

    titrant, standard: the pair. molarity_mol_l: nominal titrant concentration, mol/L. titre_ml: the
    wished titre, mL (30–45 mL suits a 50 mL burette). purity: mass fraction of the standard (0–1].
    Returns the mass in g. Raises IncompatiblePair or InvalidInput.
    """
    c = _positive("molarity_mol_l", molarity_mol_l)
    v = _positive("titre_ml", titre_ml)
    p = _positive("purity", purity)
    if p > 1.0:
        raise InvalidInput([FieldError("purity", f"is a mass fraction and cannot exceed 1 (got {purity!r})")])
    nu = stoichiometric_factor(titrant, standard)
    return c * v * standard.molar_mass.value / (1000.0 * p * nu)


# ---------------------------------------------------------------------------------------------------------
# Drying


def check_drying(standard: PrimaryStandard | str, dried_at_c: float | None) -> str | None:
    """Why a drying record breaks the standard's drying rule, or None when it keeps it.

    standard: a PrimaryStandard or its key/alias. dried_at_c: oven temperature recorded, °C, or None
    when the lot was not oven-dried (a missing record is not a break; see missing_drying_warning).
    Returns a sentence, or None.
    """
    std = _as_standard(standard)
    rule = std.drying
    if dried_at_c is None:
        return None
    if not isinstance(dried_at_c, (int, float)) or not math.isfinite(dried_at_c):
        return f"the drying temperature {dried_at_c!r} is not a number"
    t = float(dried_at_c)
    if not rule.oven_allowed:
        return f"{std.name} must not be oven-dried (recorded {t:g} °C). {rule.text}"
    if rule.min_c is not None and t < rule.min_c:
        return (
            f"{std.name} dried at {t:g} °C, below the {rule.min_c:g} °C the rule asks: water left in it "
            f"is weighed as standard, so the titrant's molarity would come out high. {rule.text}"
        )
    if rule.max_c is not None and t > rule.max_c:
        return f"{std.name} dried at {t:g} °C, above the {rule.max_c:g} °C the rule allows: it may have decomposed. {rule.text}"
    return None


def missing_drying_warning(standard: PrimaryStandard | str) -> str | None:
    """A warning for a lot of this standard that has no drying record, or None if none is needed.

    standard: a PrimaryStandard or its key/alias. Returns a sentence when the rule asks for oven
    drying before use; None for standards that are kept, not dried (borax, oxalic acid, ...).
    """
    std = _as_standard(standard)
    if not std.drying.drying_required:
        return None
    return f"no drying is recorded for this lot of {std.name}. {std.drying.text}"


# ---------------------------------------------------------------------------------------------------------
# The catalogue as data (GET /api/v1/catalogue)


def _titrant_entry(t: Titrant) -> dict[str, object]:
    m = t.expansion
    return {
        "key": t.key,
        "name": t.name,
        "formula": t.formula,
        "aliases": list(t.aliases),
        "class": t.reaction_class,
        "role": t.role,
        "solvent": t.solvent,
        "species": t.species or None,
        "electrons": t.electrons or None,
        "acid_base_equivalents": t.equivalents or None,
        "molar_mass_g_mol": round(t.molar_mass.value, 5),
        "weighed_as": t.weighed_as or None,
        "weighed_as_molar_mass_g_mol": round(molar_mass(t.weighed_as).value, 5) if t.weighed_as else None,
        "expansion_model": {
            "name": m.key,
            "kind": "fixed coefficient" if m.kind == "linear" else "density of water (and solute)",
            "coefficient_per_c": m.alpha_per_k if m.kind == "linear" else None,
            "source": m.source,
        },
        "endpoint": t.endpoint or None,
        "storage": t.storage or None,
        "standardized_against_titrant_only": t.secondary_only,
        "back_titrant": t.back_titrant,
        "max_molarity_mol_l": t.max_molarity if math.isfinite(t.max_molarity) else None,
    }


def _standard_entry(s: PrimaryStandard) -> dict[str, object]:
    return {
        "key": s.key,
        "name": s.name,
        "formula": s.formula,
        "aliases": list(s.aliases),
        "class": s.reaction_class,
        "role": s.role,
        "molar_mass_g_mol": round(s.molar_mass.value, 5),
        "u_molar_mass_g_mol": float(f"{s.molar_mass.u:.2g}"),
        "density_g_cm3": s.density_g_cm3,
        "density_source": s.density_source,
        "drying": {
            "oven_allowed": s.drying.oven_allowed,
            "min_c": s.drying.min_c,
            "max_c": s.drying.max_c,
            "rule": s.drying.text,
        },
        "endpoint": s.endpoint,
    }


def catalogue() -> dict[str, list[dict[str, object]]]:
    """The whole catalogue as plain data: titrants, standards and every pair that titrates.

    Returns {"titrants": [...], "standards": [...], "pairs": [...]}; each pair names titrant and partner
    by key, its class, the equations, the mole ratio (mol titrant per mol partner) and its rules.
    Acid-base pairs without a recorded equation give their ratio from the proton counts.
    """
    pairs: list[dict[str, object]] = []
    partners: tuple[Titrant | PrimaryStandard, ...] = (*STANDARDS, *TITRANTS)
    for t in TITRANTS:
        for partner in partners:
            if partner is t or not reacts(t, partner):
                continue
            found = pair_for(t, partner)
            pair = found[0] if found else None
            pairs.append(
                {
                    "titrant": t.key,
                    "partner": partner.key,
                    "partner_kind": "titrant" if isinstance(partner, Titrant) else "standard",
                    "class": t.reaction_class,
                    "equations": list(pair.steps) if pair else [],
                    "mol_titrant_per_mol_partner": stoichiometric_factor(t, partner),
                    "ratio_from": "balanced equations" if pair else "protons given and taken",
                    "conditions": (pair.conditions or None) if pair else None,
                    "rules": list(pair.rules) if pair else [],
                    "blank": (pair.blank or None) if pair else None,
                    "flask_temperature_min_c": pair.hot_min_c if pair else None,
                    "published_equivalence": (pair.equivalence or None) if pair else None,
                }
            )
    return {
        "titrants": [_titrant_entry(t) for t in TITRANTS],
        "standards": [_standard_entry(s) for s in STANDARDS],
        "pairs": pairs,
    }


_SUPERSCRIPT = str.maketrans("0123456789+-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻")


def equation_text(equation: str) -> str:
    """An equation as people read it: charges raised ("MnO4^-" -> "MnO4⁻") and "->" as an arrow."""
    return re.sub(r"\^([0-9]*[+-])", lambda m: m.group(1).translate(_SUPERSCRIPT), equation).replace("->", "→")


def pair_notes(titrant: Titrant) -> list[dict[str, object]]:
    """What a person standardizing titrant should know of each recorded pair, in words, for a page.

    Returns [{"partner": name (key), "equations": [text], "lines": [conditions, rules, blank, equivalence]}].
    """
    out: list[dict[str, object]] = []
    for p in pairs_of(titrant):
        other_key = p.partner if p.titrant == titrant.key else p.titrant
        other: Titrant | PrimaryStandard = (
            _lookup(TITRANTS, other_key, "titrant") if p.partner_is_titrant else _lookup(STANDARDS, other_key, "primary standard")
        )
        lines = [p.conditions, *p.rules, p.blank, p.equivalence]
        out.append(
            {
                "partner": f"{other.name} ({other.key})",
                "kind": "reference titrant" if p.partner_is_titrant else "primary standard",
                "equations": [equation_text(e) for e in p.steps],
                "lines": [line for line in dict.fromkeys(lines) if line],
            }
        )
    return out
