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

    @property
    def molar_mass(self) -> MolarMass:
        """Molar mass of the reagent, g/mol."""
        return molar_mass(self.formula)


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

    @property
    def molar_mass(self) -> MolarMass:
        """Molar mass of the standard as weighed (hydrate water included), g/mol."""
        return molar_mass(self.formula)


TITRANTS: tuple[Titrant, ...] = (
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
    # Aqueous perchloric acid only. Perchloric acid in glacial acetic acid (non-aqueous titrimetry) is
    # standardized against KHP acting as a base in that solvent; that pairing is outside this catalogue,
    # and would bring its own ExpansionModel(kind="linear", alpha_per_k=...) for the acetic-acid medium.
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

# Drying temperatures and end points are common practice in prep rooms and volumetric-analysis texts;
# none is from a single standard. Temperatures marked "from memory" should be checked against the
# supplier's certificate of the lot in use, which overrides this table.
STANDARDS: tuple[PrimaryStandard, ...] = (
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
    return tuple(s for s in STANDARDS if s.role != for_titrant.role)


# ---------------------------------------------------------------------------------------------------------
# Stoichiometry and masses


def stoichiometric_factor(titrant: Titrant, partner: Titrant | PrimaryStandard) -> float:
    """Moles of titrant per mole of partner, ν = partner.equivalents / titrant.equivalents.

    titrant: the solution being standardized. partner: the primary standard, or the reference titrant
    of a secondary standardization. Returns ν (dimensionless) such that
    c = 1000·m·P·ν/(M·V) (primary) and c_x = c_ref·V_ref·ν/V_x (secondary).
    Raises IncompatiblePair when both are acids or both bases.
    """
    if partner.role == titrant.role:
        opposite = BASE if titrant.role == ACID else ACID
        if isinstance(partner, Titrant):
            what = "reference titrant"
            suggestions = ", ".join(t.key for t in TITRANTS if t.role == opposite)
        else:
            what = "primary standard"
            suggestions = ", ".join(s.key for s in STANDARDS if s.role == opposite)
        raise IncompatiblePair(
            f"{titrant.key} is {_a(titrant.role)} titrant and {partner.name} ({partner.key}) is "
            f"{_a(partner.role)} {what}: {_a(titrant.role)} titrant is standardized against "
            f"{'a basic' if opposite == BASE else 'an acidic'} {what} (e.g. {suggestions})"
        )
    return partner.equivalents / titrant.equivalents


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
