"""Preparation and adjustment calculators for titrant batches: how much concentrate to take, what to add.

Pure module: plain values and frozen dataclasses in and out; no web or database import.

Molarities are in mol/L of the reagent's formula unit (H2SO4: mol of H2SO4 per litre, not equivalents),
the same convention as a batch's nominal molarity. Volume contraction on mixing is neglected throughout:
the plans are for making up to the mark and then standardizing, which measures what was really made.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from stockroom import chemistry
from stockroom.chemistry import ACID, BASE, Titrant
from stockroom.errors import FieldError, InvalidInput
from stockroom.formatting import percent
from stockroom.formatting import significant as sig

LIQUID = "liquid"
SOLID = "solid"
FORMS: tuple[str, ...] = (LIQUID, SOLID)

# ---------------------------------------------------------------------------------------------------------
# Concentrate catalogue
#
# Typical commercial concentrates, 20 °C. Every assay and density here is from memory — verify against the
# supplier's certificate. They are defaults for a form to offer; the plans always take the assay and
# density of the lot actually in use, which the batch record keeps.

VERIFY = "from memory — verify against the supplier's certificate"


@dataclass(frozen=True)
class Concentrate:
    """A typical commercial concentrate: typical assay (mass fraction) and density at 20 °C (g/mL)."""

    key: str
    reagent: str  # titrant key in chemistry.TITRANTS
    name: str
    form: str  # "liquid" | "solid"
    assay_w_w: float  # mass fraction, typical
    assay_range_w_w: tuple[float, float]  # mass fraction, usual commercial spread
    density_g_ml: float | None  # g/mL at 20 °C; None for a solid
    density_range_g_ml: tuple[float, float] | None  # g/mL at 20 °C
    source: str = VERIFY

    @property
    def molarity_mol_l(self) -> float | None:
        """Molarity at the typical assay and density, mol/L; None for a solid."""
        if self.density_g_ml is None:
            return None
        return concentrate_molarity(self.reagent, self.assay_w_w, self.density_g_ml)


ACID_BASE_CONCENTRATES: tuple[Concentrate, ...] = (
    Concentrate("HCl-37", "HCl", "hydrochloric acid 37 %", LIQUID, 0.37, (0.36, 0.38), 1.19, (1.18, 1.19)),
    Concentrate("HCl-32", "HCl", "hydrochloric acid 32 %", LIQUID, 0.32, (0.31, 0.33), 1.16, (1.15, 1.17)),
    Concentrate("H2SO4-96", "H2SO4", "sulfuric acid 95–98 %", LIQUID, 0.96, (0.95, 0.98), 1.84, (1.83, 1.84)),
    Concentrate("HNO3-65", "HNO3", "nitric acid 65 %", LIQUID, 0.65, (0.64, 0.66), 1.39, (1.39, 1.40)),
    Concentrate("HNO3-70", "HNO3", "nitric acid 70 %", LIQUID, 0.70, (0.69, 0.71), 1.41, (1.40, 1.42)),
    Concentrate("HClO4-70", "HClO4", "perchloric acid 70 %", LIQUID, 0.70, (0.69, 0.72), 1.67, (1.66, 1.68)),
    Concentrate("NaOH-50", "NaOH", "sodium hydroxide 50 %", LIQUID, 0.50, (0.49, 0.51), 1.52, (1.51, 1.53)),
    Concentrate("KOH-45", "KOH", "potassium hydroxide 45 %", LIQUID, 0.45, (0.44, 0.46), 1.456, (1.45, 1.46)),
    Concentrate("NaOH-pellets", "NaOH", "sodium hydroxide pellets", SOLID, 0.98, (0.97, 0.99), None, None),
    # KOH pellets carry water and some K2CO3; about 85 % KOH is the usual reagent-grade minimum.
    Concentrate("KOH-pellets", "KOH", "potassium hydroxide pellets", SOLID, 0.85, (0.85, 0.90), None, None),
)

# Titrants beyond acids and bases are weighed as solids; a solid's assay is of the form weighed
# (Titrant.weighed_as: the pentahydrate of thiosulfate, the dihydrate of edetate...). Perchloric acid in
# acetic acid is made from the 70 % aqueous acid diluted in anhydrous acetic acid.
OTHER_CONCENTRATES: tuple[Concentrate, ...] = (
    Concentrate("KMnO4-solid", "KMnO4", "potassium permanganate crystals", SOLID, 0.99, (0.99, 1.0), None, None),
    Concentrate("Na2S2O3-5H2O", "Na2S2O3", "sodium thiosulfate pentahydrate", SOLID, 0.995, (0.99, 1.0), None, None),
    Concentrate("I2-solid", "I2", "iodine, resublimed", SOLID, 0.998, (0.995, 1.0), None, None),
    Concentrate("Ce(SO4)2-4H2O", "Ce(SO4)2", "cerium(IV) sulfate tetrahydrate", SOLID, 0.98, (0.95, 0.99), None, None),
    Concentrate("FAS-6H2O", "FAS", "ammonium iron(II) sulfate hexahydrate", SOLID, 0.99, (0.985, 1.0), None, None),
    Concentrate("K2Cr2O7-solid", "K2Cr2O7", "potassium dichromate", SOLID, 0.999, (0.998, 1.0), None, None),
    Concentrate("AgNO3-solid", "AgNO3", "silver nitrate", SOLID, 0.998, (0.995, 1.0), None, None),
    Concentrate("NH4SCN-solid", "NH4SCN", "ammonium thiocyanate", SOLID, 0.98, (0.97, 0.99), None, None),
    Concentrate("EDTA-2H2O", "EDTA", "disodium edetate dihydrate", SOLID, 0.99, (0.99, 1.0), None, None),
    Concentrate("ZnSO4-7H2O", "ZnSO4", "zinc sulfate heptahydrate", SOLID, 0.99, (0.99, 1.0), None, None),
    Concentrate(
        "HClO4-70-AcOH",
        "HClO4-AcOH",
        "perchloric acid 70 % (for the acetic acid medium)",
        LIQUID,
        0.70,
        (0.69, 0.72),
        1.67,
        (1.66, 1.68),
    ),
)
CONCENTRATES: tuple[Concentrate, ...] = ACID_BASE_CONCENTRATES + OTHER_CONCENTRATES


def solid_allowed(reagent: str | Titrant) -> bool:
    """Whether a titrant may be made by weighing a solid (bases, and every titrant beyond acids and bases)."""
    t = _titrant(reagent, [])
    return t.role == BASE or (t.reaction_class != chemistry.ACID_BASE)


def weighed_molar_mass(t: Titrant, form: str) -> float:
    """Molar mass of what is weighed or measured for titrant t in a form, g/mol (the hydrate for solids)."""
    if form == SOLID and t.weighed_as:
        return chemistry.molar_mass(t.weighed_as).value
    return t.molar_mass.value


def concentrate(key: str) -> Concentrate:
    """The catalogue concentrate for a key such as "HCl-37" or "NaOH-pellets" (case-insensitive).

    key: catalogue key. Returns a Concentrate. Raises InvalidInput on field "concentrate".
    """
    wanted = key.strip().casefold() if isinstance(key, str) else ""
    for entry in CONCENTRATES:
        if entry.key.casefold() == wanted:
            return entry
    known = ", ".join(c.key for c in CONCENTRATES)
    raise InvalidInput([FieldError("concentrate", f"unknown concentrate {key!r}; known: {known}")])


def concentrates_for(reagent: str | Titrant) -> tuple[Concentrate, ...]:
    """Catalogue concentrates of one reagent, in catalogue order (for a form's choices).

    reagent: titrant key, name or Titrant. Returns a tuple of Concentrate (empty when none is held).
    """
    key = _titrant(reagent, []).key
    return tuple(c for c in CONCENTRATES if c.reagent == key)


# ---------------------------------------------------------------------------------------------------------
# Cautions

# Chosen by reagent and form: an acid concentrate, an oxidizing acid (nitric, perchloric), base pellets
# or a base concentrate. A calculator that tells someone to handle these shows the usual cautions and
# always ends by deferring to the documents that govern the lab (project rule; every line common practice).
DEFER = (
    "These are the usual cautions only: the reagent's safety data sheet, local regulations and the "
    "institution's chemical hygiene plan take precedence."
)

ACID_CONCENTRATE = "acid concentrate"
OXIDIZING_ACID = "oxidizing acid"
BASE_PELLETS = "base pellets"
BASE_CONCENTRATE = "base concentrate"
OXIDIZING_SOLID = "oxidizing solid"
SALT_SOLID = "salt"
ACETIC_PERCHLORIC = "perchloric acid in acetic acid"
OXIDIZING_ACIDS = ("HNO3", "HClO4")

_ACID_TO_WATER = (
    "Add acid to water, never the reverse: water poured onto a concentrated acid can boil and spatter; diluting "
    "it is exothermic, so let the solution cool to room temperature before making up to volume (common practice)."
)
_ACID_HOOD = "Open, measure and dilute the concentrate in a fume hood: it gives off corrosive fumes (common practice)."
_ACID_WEAR = (
    "Wear chemical splash goggles and a face shield, acid-resistant gloves and a lab coat; know where the "
    "eyewash and safety shower are (common practice)."
)
_OXIDIZER_WEAR = (
    "Wear chemical splash goggles and a face shield, gloves of the material the safety data sheet names for "
    "this acid (not every glove resists an oxidizing acid) and a lab coat; know where the eyewash and safety "
    "shower are (common practice)."
)
_OXIDIZER = (
    "It is a strong oxidizer: keep it away from organic matter, solvents, paper and wood, and take up spills "
    "with water or an acid spill kit, never with paper towels or sawdust (common practice)."
)
_BASE_WEAR = (
    "Wear chemical splash goggles and a face shield, alkali-resistant gloves (the safety data sheet names the "
    "material) and a lab coat: strong bases harm the eyes within seconds and feel slippery rather than painful "
    "on skin at first, so rinse any splash at once with plenty of water for at least 15 minutes and know where "
    "the eyewash and safety shower are (common practice; from memory)."
)
_BASE_STORE = "Keep strong bases in polyethylene: they attack glass, and glass stoppers seize in the neck (common practice)."
_PELLETS_DISSOLVE = (
    "Add the pellets (or crystals) to the water a few at a time with stirring, never water onto the pellets: dissolving them "
    "is strongly exothermic and the solution can boil and spatter. Stand the vessel in cold water and let it "
    "cool to room temperature before making up to volume (common practice)."
)
_PELLETS_HANDLE = (
    "Take pellets with a scoop or spatula, never by hand, and close the stock bottle at once: they take up water "
    "and CO2 from the air and burn damp skin (common practice)."
)
_PELLETS_VESSEL = (
    "Dissolve them in a heat-resistant (borosilicate) beaker or a polyethylene vessel in a fume hood or a "
    "well-ventilated place, not in a volumetric flask or measuring cylinder: the heat can crack thick glass "
    "and raise a caustic mist (common practice)."
)
_BASE_DILUTE = (
    "Add the concentrate slowly to the water with stirring, never water onto the concentrate: diluting it is "
    "strongly exothermic; let it cool to room temperature before making up to volume (common practice)."
)
_BASE_MEASURE = (
    "The concentrate is dense and viscous: measure it with a pipette and a pipette filler (never by mouth) or by "
    "weighing, behind a splash screen or in a fume hood, and wipe drips at once (common practice)."
)

_SOLID_WEIGH = (
    "Weigh the solid on a weighing boat or paper with a spatula, never by hand, without raising dust; close "
    "the stock bottle at once and wipe up spilt crystals (common practice)."
)
_SOLID_WEAR = (
    "Wear safety glasses or goggles, nitrile gloves and a lab coat (common practice; the safety data sheet names the glove)."
)
_OXIDIZING_SOLID = (
    "It is an oxidizer: keep the solid away from organic matter, reducing agents, paper and wood; do not "
    "return spilt or surplus solid to the stock bottle (common practice)."
)
_AQUATIC = (
    "Toxic to aquatic life: collect the solution's waste and rinsings for disposal as the institution's "
    "waste rules say; do not pour them down the drain (common practice)."
)
_ACETIC_FLAMMABLE = (
    "Glacial acetic acid is flammable (flash point about 39 °C) and corrosive, with a choking vapour: work in the "
    "fume hood, away from flames and hot plates, with goggles, a face shield and gloves the safety data sheet "
    "names (common practice; from memory)."
)
_ACETIC_PERCHLORIC = (
    "Add the 70 % perchloric acid to most of the acetic acid first, and only then the acetic anhydride, slowly, "
    "with cooling: perchloric acid must never meet acetic anhydride undiluted (the mixture can form explosive "
    "acetyl perchlorate), and the anhydride reacts with the acid's water with heat (common practice)."
)
_ACETIC_ANHYDRIDE = (
    "Acetic anhydride is corrosive, flammable and reacts violently with water: measure it in the hood with a "
    "dry cylinder (common practice)."
)

_KIND_CAUTIONS: dict[str, tuple[str, ...]] = {
    OXIDIZING_SOLID: (_SOLID_WEIGH, _OXIDIZING_SOLID, _SOLID_WEAR),
    SALT_SOLID: (_SOLID_WEIGH, _SOLID_WEAR),
    ACETIC_PERCHLORIC: (_ACETIC_FLAMMABLE, _ACETIC_PERCHLORIC, _ACETIC_ANHYDRIDE, _OXIDIZER),
    ACID_CONCENTRATE: (_ACID_TO_WATER, _ACID_HOOD, _ACID_WEAR),
    OXIDIZING_ACID: (_ACID_TO_WATER, _ACID_HOOD, _OXIDIZER, _OXIDIZER_WEAR),
    BASE_PELLETS: (_PELLETS_DISSOLVE, _PELLETS_HANDLE, _PELLETS_VESSEL, _BASE_WEAR, _BASE_STORE),
    BASE_CONCENTRATE: (_BASE_DILUTE, _BASE_MEASURE, _BASE_WEAR, _BASE_STORE),
}

# Shown before a reagent is chosen: both families, each line saying which it concerns.
CAUTIONS: tuple[str, ...] = (
    "Acids: " + _ACID_TO_WATER[:1].lower() + _ACID_TO_WATER[1:],
    "Bases (NaOH, KOH): add pellets or concentrate to the water in portions, never water onto them: dissolving "
    "or diluting them is strongly exothermic; let the solution cool before making up to volume (common practice).",
    "Work in a fume hood when opening, measuring or diluting concentrates (common practice).",
    "Wear chemical splash goggles and a face shield, gloves resistant to the reagent (the safety data sheet "
    "names the material) and a lab coat; know where the eyewash and safety shower are (common practice).",
    DEFER,
)

_EXTRA_CAUTIONS: dict[str, tuple[str, ...]] = {
    "H2SO4": (
        "Diluting concentrated sulfuric acid releases much heat: add it slowly, in portions, stirring, and "
        "let it cool between portions (common practice).",
    ),
    "HNO3": (
        "Nitric acid gives off nitrogen oxides, more so in light and warmth: measure it only in the fume hood and "
        "keep it in the dark (common practice).",
    ),
    "HClO4": (
        "Perchloric acid: never let it evaporate to dryness, keep it from dehydrating agents such as "
        "concentrated sulfuric acid, and heat it only in a hood built for perchloric acid (common practice; from "
        "memory — check the safety data sheet).",
    ),
    "HCl": ("Concentrated hydrochloric acid fumes: open and measure it only in the fume hood (common practice).",),
    "KMnO4": (
        "Permanganate stains skin and cloth brown and can ignite glycerol, ethylene glycol and other organic "
        "liquids on contact: keep them apart (common practice).",
        _AQUATIC,
    ),
    "K2Cr2O7": (
        "Potassium dichromate is a chromium(VI) compound: it may cause cancer and genetic defects and damage "
        "fertility, and sensitizes skin and lungs. Weigh it in a fume hood or ventilated enclosure, wear nitrile "
        "gloves, and collect every residue as chromium(VI) waste (common practice; check the safety data sheet).",
        _AQUATIC,
    ),
    "AgNO3": (
        "Silver nitrate burns the eyes and stains skin black (the stain appears hours later): goggles and "
        "gloves throughout; keep the solid and the solution in amber glass, out of light (common practice).",
        _AQUATIC,
    ),
    "I2": (
        "Iodine gives off a corrosive vapour and stains: weigh it quickly in a closed weighing bottle, in the "
        "hood, and dissolve it in the concentrated potassium iodide solution before diluting (common practice).",
    ),
    "Ce(SO4)2": (
        "It is made up in dilute sulfuric acid: add the acid to the water (never the reverse), let it cool, "
        "then dissolve the salt (common practice).",
    ),
    "FAS": (
        "It is made up in dilute sulfuric acid: add the acid to the water, never the reverse, and let it cool (common practice).",
    ),
    "ZnSO4": (_AQUATIC,),
    "Ba(OH)2": (
        "Barium compounds are harmful if swallowed: weigh barium hydroxide without raising dust and wash hands "
        "after (common practice; from memory — check the safety data sheet).",
    ),
}


# Silver nitrate is an oxidizing solid though its titrating role is the precipitant.
_OXIDIZING_SALTS = ("AgNO3",)


def caution_kind(reagent: str | Titrant, form: str | None) -> str:
    """Which family of cautions a reagent in a form needs: acid concentrate, oxidizing acid, base pellets or
    base concentrate; for the other classes an oxidizing solid or a salt; perchloric acid in acetic acid.
    form: "liquid", "solid", or None (a base then counts as pellets only when solid)."""
    t = _titrant(reagent, [])
    if t.solvent != "water":
        return ACETIC_PERCHLORIC
    if t.reaction_class != chemistry.ACID_BASE:
        return OXIDIZING_SOLID if t.role == chemistry.OXIDANT or t.key in _OXIDIZING_SALTS else SALT_SOLID
    if t.role == ACID:
        return OXIDIZING_ACID if t.key in OXIDIZING_ACIDS else ACID_CONCENTRATE
    return BASE_PELLETS if form == SOLID else BASE_CONCENTRATE


def cautions_for(reagent: str | Titrant, form: str | None = None) -> tuple[str, ...]:
    """The cautions shown with a plan for this reagent in this form, ending with the deferral to the rules.

    reagent: titrant key, name or Titrant; form: "liquid" (a concentrate), "solid" (pellets or crystals),
    or None when not yet known (a base then gets both its pellet and concentrate lines). Returns a
    tuple of sentences: the family's, then the reagent's own, then DEFER.
    """
    t = _titrant(reagent, [])
    if form is None and t.role == BASE:
        lines = _KIND_CAUTIONS[BASE_PELLETS] + tuple(
            c for c in _KIND_CAUTIONS[BASE_CONCENTRATE] if c not in _KIND_CAUTIONS[BASE_PELLETS]
        )
    else:
        lines = _KIND_CAUTIONS[caution_kind(t, form)]
    return lines + _EXTRA_CAUTIONS.get(t.key, ()) + (DEFER,)


# ---------------------------------------------------------------------------------------------------------
# Input checks (collecting every broken rule, so a form can show each beside its field)


def _number(errors: list[FieldError], field: str, value: object) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        errors.append(FieldError(field, f"must be a number (got {value!r})"))
        return None
    if not math.isfinite(value):
        errors.append(FieldError(field, f"must be a finite number (got {value!r})"))
        return None
    return float(value)


def _positive(errors: list[FieldError], field: str, value: object, unit: str) -> float | None:
    x = _number(errors, field, value)
    if x is not None and x <= 0:
        errors.append(FieldError(field, f"must be above zero, in {unit} (got {x:g})"))
        return None
    return x


def _fraction(errors: list[FieldError], field: str, value: object) -> float | None:
    x = _number(errors, field, value)
    if x is None:
        return None
    if x <= 0 or x > 1:
        hint = f"; {x:g} looks like a percentage: give {x / 100:g}" if 1 < x <= 100 else ""
        errors.append(FieldError(field, f"is a mass fraction and must be above 0 and at most 1{hint}"))
        return None
    return x


# Aqueous concentrates of these reagents lie between water (1.0) and about 1.9 g/mL (sulfuric acid);
# the wide bounds only catch a wrong unit (kg/m3, kg/L typed as g/L) — not a table check.
_DENSITY_BOUNDS_G_ML = (0.8, 2.5)


def _density(errors: list[FieldError], field: str, value: object) -> float | None:
    x = _positive(errors, field, value, "g/mL")
    if x is None:
        return None
    lo, hi = _DENSITY_BOUNDS_G_ML
    if not lo <= x <= hi:
        hint = f"; that looks like kg/m³: give {x / 1000:g}" if 800 <= x <= 2500 else ""
        errors.append(
            FieldError(field, f"must be in g/mL at 20 °C, between {lo:g} and {hi:g} for an aqueous concentrate (got {x:g}{hint})")
        )
        return None
    return x


def _titrant(reagent: object, errors: list[FieldError]) -> Titrant:
    """The catalogue titrant; an unknown one raises at once, since every later check depends on it."""
    if isinstance(reagent, Titrant):
        return reagent
    try:
        return chemistry.titrant(reagent)  # type: ignore[arg-type]
    except chemistry.UnknownSubstance as exc:
        raise InvalidInput(errors + [FieldError("reagent", exc.message)]) from None


def _raise(errors: list[FieldError]) -> None:
    if errors:
        raise InvalidInput(errors)


# ---------------------------------------------------------------------------------------------------------
# Concentrate molarity


def concentrate_molarity(reagent: str | Titrant, assay_w_w: float, density_g_ml: float) -> float:
    """Molarity of a liquid concentrate, c = 1000·ρ·w/M.

    reagent: titrant key, name or Titrant. assay_w_w: mass fraction of the reagent (0–1].
    density_g_ml: density of the concentrate at 20 °C, g/mL. Returns mol/L of the formula unit.
    Raises InvalidInput naming the field.
    """
    errors: list[FieldError] = []
    t = _titrant(reagent, errors)
    w = _fraction(errors, "assay_w_w", assay_w_w)
    rho = _density(errors, "density_g_ml", density_g_ml)
    _raise(errors)
    assert w is not None and rho is not None
    return 1000.0 * rho * w / t.molar_mass.value


# ---------------------------------------------------------------------------------------------------------
# Preparation


@dataclass(frozen=True)
class PreparationPlan:
    """What to take and how to make a batch of nominal titrant from a concentrate or a solid."""

    reagent: str  # titrant key
    form: str  # "liquid" | "solid"
    target_molarity_mol_l: float  # nominal, mol/L
    planned_molarity_mol_l: float  # nominal × (1 + overshoot_rel), mol/L
    overshoot_rel: float  # dimensionless
    final_volume_l: float  # L
    assay_w_w: float  # mass fraction of the concentrate or solid
    density_g_ml: float | None  # g/mL at 20 °C; None for a solid
    molar_mass_g_mol: float  # g/mol of the reagent
    reagent_mass_g: float  # g of pure reagent the batch holds
    concentrate_mass_g: float  # g of concentrate (or solid) to take
    concentrate_volume_ml: float | None  # mL of liquid concentrate to take; None for a solid
    concentrate_molarity_mol_l: float | None  # mol/L of the liquid concentrate; None for a solid
    water_approx_l: float  # L of water to bring to volume, roughly (make up to the mark, not this)
    instructions: tuple[str, ...]
    cautions: tuple[str, ...]
    notes: tuple[str, ...]


def _typical_mismatch(t: Titrant, form: str, w: float, rho: float | None) -> str | None:
    """A note when the lot's density is unlike a catalogue concentrate of about the same assay."""
    if rho is None:
        return None
    for c in CONCENTRATES:
        if c.reagent != t.key or c.form != form or c.density_range_g_ml is None:
            continue
        lo_w, hi_w = c.assay_range_w_w
        lo, hi = c.density_range_g_ml
        if lo_w <= w <= hi_w and not (lo - 0.02 <= rho <= hi + 0.02):
            return (
                f"A {percent(w, None)} {t.name} concentrate usually has a density of {lo:g}–{hi:g} g/mL at 20 °C "
                f"({VERIFY}); {rho:g} g/mL was given: check the lot's certificate and the unit."
            )
    return None


def _base_water(t: Titrant) -> str:
    return "boiled, CO2-free water" if t.role == BASE else "water"


def _acid_liquid_steps(t: Titrant, v_ml: float, m_g: float, w: float, rho: float, vol_l: float) -> list[str]:
    first_l = 0.75 * vol_l
    steps = [
        f"Put about {sig(first_l, 3)} L of water (about three quarters of the final {sig(vol_l, 3)} L) into "
        f"the clean, labelled container first.",
        f"In the fume hood, measure {sig(v_ml)} mL of the {percent(w, None)} {t.name} (density {rho:g} g/mL) in a "
        f"dry measuring cylinder, or weigh {sig(m_g)} g of it.",
        "Add the acid slowly to the water, stirring or swirling as you go: acid to water, never the reverse.",
        "Rinse the cylinder two or three times with a little water and add the rinsings to the container.",
        f"Let the solution come to room temperature, make up to {sig(vol_l, 3)} L with water and mix "
        f"thoroughly (stir, or close and invert many times) so the batch is uniform.",
    ]
    if t.key == "H2SO4":
        steps.insert(
            2, "Sulfuric acid heats the water strongly: add it in small portions and let the solution cool between them."
        )
    return steps


def _base_liquid_steps(t: Titrant, v_ml: float, m_g: float, w: float, rho: float, vol_l: float) -> list[str]:
    steps = [
        f"Boil about {sig(vol_l * 1.1, 3)} L of purified water for a few minutes and let it cool with the "
        f"air kept out (a soda-lime guard tube on the vessel): CO2-free water (AOAC Official Methods, "
        f"Appendix A).",
    ]
    if t.key == "NaOH" and w >= 0.45:
        steps.append(
            f"Use the clear liquid of the {percent(w, None)} NaOH: sodium carbonate is nearly insoluble in it and "
            f"settles out, so draw or decant from the top without stirring up the sediment (AOAC Official "
            f"Methods, Appendix A; common practice)."
        )
    elif t.key == "NaOH":
        steps.append(
            "Carbonate settles out of NaOH only near 50 %: a weaker concentrate passes its carbonate on to the "
            "batch; where carbonate matters, start from the clear liquid of 50 % NaOH (AOAC Official Methods, "
            "Appendix A; common practice)."
        )
    elif t.key == "KOH":
        steps.append(
            "Carbonate does not settle out of concentrated KOH as it does from 50 % NaOH, so this batch will "
            "carry the concentrate's carbonate; where carbonate matters, prefer NaOH (common practice)."
        )
    steps += [
        f"Put about {sig(0.75 * vol_l, 3)} L of the CO2-free water into a polyethylene container.",
        f"In the fume hood, measure {sig(v_ml)} mL of the concentrate (density {rho:g} g/mL) in a plastic "
        f"measuring cylinder, or weigh {sig(m_g)} g of it, and add it slowly to the water with stirring.",
        "Rinse the cylinder with a little CO2-free water into the container.",
        f"Let the solution cool to room temperature, make up to {sig(vol_l, 3)} L with CO2-free water and mix thoroughly.",
        "Store in polyethylene with a soda-lime guard tube on the air inlet, so CO2 from the air cannot get "
        "in (AOAC Official Methods, Appendix A).",
    ]
    return steps


def _solid_steps(t: Titrant, m_g: float, w: float, vol_l: float) -> list[str]:
    steps = [
        f"Boil about {sig(vol_l * 1.1, 3)} L of purified water for a few minutes and let it cool with the "
        f"air kept out (a soda-lime guard tube on the vessel): CO2-free water (AOAC Official Methods, "
        f"Appendix A).",
        f"Weigh {sig(m_g)} g of {t.name} ({percent(w, None)} assay) quickly into a plastic beaker on a top-pan "
        f"balance: the solid takes up water and CO2 from the air (common practice).",
    ]
    if t.key == "NaOH":
        steps.append(
            "Pellets carry a surface film of sodium carbonate; where carbonate matters, prepare from the clear "
            "liquid of 50 % NaOH instead (AOAC Official Methods, Appendix A; common practice)."
        )
    steps += [
        f"Dissolve it in portions in about {sig(max(0.1 * vol_l, 0.25), 2)} L of the CO2-free water, stirring: "
        f"dissolution is strongly exothermic. Let it cool.",
        f"Pour it into a polyethylene container holding about {sig(0.6 * vol_l, 3)} L of the CO2-free water, "
        f"rinse the beaker into it, make up to {sig(vol_l, 3)} L with CO2-free water and mix thoroughly.",
        "Store in polyethylene with a soda-lime guard tube on the air inlet (AOAC Official Methods, Appendix A).",
    ]
    return steps


# Per titrant: what the solid is dissolved in, and any step of its own (common practice; quantities from
# memory, as the pharmacopoeias' volumetric-solution texts give them — verify).
_MEDIUM: dict[str, str] = {
    "Na2S2O3": "freshly boiled and cooled purified water with about 0.1 g of anhydrous sodium carbonate per litre",
    "Ce(SO4)2": "water to which about 28 mL of concentrated sulfuric acid per litre has been added (acid to water)",
    "FAS": "water to which about 30 mL of concentrated sulfuric acid per litre has been added (acid to water)",
}


def _salt_steps(t: Titrant, m_g: float, w: float, vol_l: float) -> list[str]:
    medium = _MEDIUM.get(t.key, "purified water")
    steps = [f"Weigh {sig(m_g)} g of {t.weighed_as or t.formula} ({percent(w, None)} assay) on a top-pan balance."]
    if t.key == "I2":
        ki = 2.8 * m_g  # USP/BP iodine VS: about 36 g KI for 12.7 g iodine per litre (from memory)
        steps.append(
            f"Dissolve {sig(ki, 2)} g of potassium iodide in as little water as will take it (about "
            f"{sig(max(ki * 0.6, 5), 2)} mL), add the iodine and swirl until it has all dissolved: iodine dissolves "
            "only as triiodide, in concentrated iodide (common practice)."
        )
    else:
        steps.append(f"Dissolve it in about {sig(0.5 * vol_l, 2)} L of {medium} in a clean beaker or flask.")
    if t.key == "KMnO4":
        steps.append(
            "Heat to boiling for about an hour (or let stand a week in the dark), then filter through a sintered-glass "
            "funnel, not paper, to remove manganese dioxide, which would catalyse its decomposition (common practice)."
        )
    steps.append(f"Make up to {sig(vol_l, 3)} L with the same water and mix thoroughly.")
    steps.append(t.storage)
    return steps


def _stock_liquid_steps(t: Titrant, v_ml: float, m_g: float, w: float, rho: float, vol_l: float) -> list[str]:
    medium = _MEDIUM.get(t.key, "purified water")
    return [
        f"Put about {sig(0.75 * vol_l, 3)} L of {medium} into the clean, labelled container.",
        f"Measure {sig(v_ml)} mL of the {percent(w, None)} stock solution (density {rho:g} g/mL), or weigh "
        f"{sig(m_g)} g of it, and add it with stirring; rinse the measure into the container.",
        f"Make up to {sig(vol_l, 3)} L with the same water and mix thoroughly.",
        t.storage,
    ]


# Acetic anhydride: (CH3CO)2O + H2O -> 2 CH3COOH; 102.09 g/mol, 1.08 g/mL at 20 °C (from memory).
_ANHYDRIDE_G_MOL = 102.09
_ANHYDRIDE_G_ML = 1.08


def _acetic_liquid_steps(t: Titrant, v_ml: float, m_g: float, w: float, rho: float, vol_l: float) -> list[str]:
    water_mol = m_g * (1.0 - w) / chemistry.molar_mass("H2O").value
    anhydride_ml = water_mol * _ANHYDRIDE_G_MOL / _ANHYDRIDE_G_ML
    return [
        f"In the fume hood put about {sig(0.9 * vol_l, 3)} L of glacial (anhydrous) acetic acid into a dry glass bottle.",
        f"Measure {sig(v_ml)} mL of the {percent(w, None)} perchloric acid (density {rho:g} g/mL) in a dry cylinder, or "
        f"weigh {sig(m_g)} g of it, and add it to the acetic acid with swirling.",
        f"Then add slowly, with cooling, about {sig(anhydride_ml, 2)} mL of acetic anhydride: the amount that takes "
        f"up the {sig(water_mol * 18.015, 2)} g of water the perchloric acid brings (the BP adds 30 mL per litre of 0.1 "
        "mol/L and then adjusts the water content to 0.1–0.2 % by Karl Fischer titration; BP 2012 Appendix I B).",
        f"Make up to {sig(vol_l, 3)} L with anhydrous acetic acid, mix, and let stand 24 hours before "
        "standardizing, so the anhydride has reacted.",
        t.storage,
    ]


def preparation_plan(
    reagent: str | Titrant,
    target_molarity_mol_l: float,
    final_volume_l: float,
    assay_w_w: float,
    density_g_ml: float | None = None,
    form: str = LIQUID,
    overshoot_rel: float = 0.0,
    container_capacity_l: float | None = None,
) -> PreparationPlan:
    """Concentrate (or solid) to take for a batch of the target molarity and volume.

    reagent: titrant key, name or Titrant. target_molarity_mol_l: nominal, mol/L. final_volume_l: L.
    assay_w_w: mass fraction of the reagent in the concentrate or solid (the lot's certificate), (0–1].
    density_g_ml: concentrate density at 20 °C, g/mL; needed for form "liquid", ignored for "solid".
    form: "liquid" (a concentrate to dilute) or "solid" (pellets to dissolve; bases only).
    overshoot_rel: aim this fraction above nominal, dimensionless, 0 ≤ x < 0.1 (default 0: nominal).
    container_capacity_l: the container's capacity, L, or None to skip that check.
    Returns a PreparationPlan (mL, g, L and mol/L as its field names say). Raises InvalidInput.
    """
    errors: list[FieldError] = []
    t = _titrant(reagent, errors)
    c = _positive(errors, "target_molarity_mol_l", target_molarity_mol_l, "mol/L")
    vol = _positive(errors, "final_volume_l", final_volume_l, "L")
    w = _fraction(errors, "assay_w_w", assay_w_w)
    over = _number(errors, "overshoot_rel", overshoot_rel)
    if over is not None and not 0.0 <= over < 0.1:
        errors.append(
            FieldError(
                "overshoot_rel",
                "must be from 0 up to (not including) 0.1: a batch 10 % or "
                "more above nominal fails acceptance (Ph. Eur. volumetric solutions)",
            )
        )
        over = None
    cap = None
    if container_capacity_l is not None:
        cap = _positive(errors, "container_capacity_l", container_capacity_l, "L")
    rho: float | None = None
    if form not in FORMS:
        errors.append(FieldError("form", f"must be one of {', '.join(FORMS)} (got {form!r})"))
    elif form == LIQUID:
        if density_g_ml is None:
            errors.append(FieldError("density_g_ml", "is needed for a liquid concentrate, in g/mL at 20 °C"))
        else:
            rho = _density(errors, "density_g_ml", density_g_ml)
    elif not solid_allowed(t):
        errors.append(FieldError("form", f"{t.name} is not prepared from a solid here: choose liquid"))
    if vol is not None and cap is not None and vol > cap:
        errors.append(FieldError("final_volume_l", f"{vol:g} L does not fit the {cap:g} L container"))
    _raise(errors)
    assert c is not None and vol is not None and w is not None and over is not None

    m_r = weighed_molar_mass(t, form) if form in FORMS else t.molar_mass.value
    planned = c * (1.0 + over)
    reagent_g = planned * vol * m_r
    notes: list[str] = [
        "Volume contraction on mixing is neglected: make up to the mark; the water figure is approximate.",
        "The batch's real strength comes from its standardization, not from this plan.",
    ]
    if over > 0:
        notes.append(f"Aimed {sig(over * 100, 2)} % above nominal, at {sig(planned)} mol/L.")

    if form == LIQUID:
        assert rho is not None
        c_conc = 1000.0 * rho * w / m_r
        if planned >= c_conc:
            raise InvalidInput(
                [
                    FieldError(
                        "target_molarity_mol_l",
                        f"{sig(planned)} mol/L is not below the concentrate's own strength ({sig(c_conc)} mol/L from "
                        f"{percent(w, None)} and {rho:g} g/mL): a dilution cannot reach it",
                    )
                ]
            )
        v_ml = 1000.0 * planned * vol / c_conc
        m_g = v_ml * rho
        water_l = vol - v_ml / 1000.0
        mismatch = _typical_mismatch(t, form, w, rho)
        if mismatch:
            notes.append(mismatch)
        if t.solvent != "water":
            steps = _acetic_liquid_steps(t, v_ml, m_g, w, rho, vol)
        elif t.reaction_class != chemistry.ACID_BASE:
            steps = _stock_liquid_steps(t, v_ml, m_g, w, rho, vol)
        else:
            steps = (_acid_liquid_steps if t.role == ACID else _base_liquid_steps)(t, v_ml, m_g, w, rho, vol)
        conc_ml: float | None = v_ml
        conc_mol_l: float | None = c_conc
    else:
        m_g = reagent_g / w
        # The dissolved solid's own volume is neglected, as is contraction: make up to the mark.
        water_l = vol
        if t.reaction_class != chemistry.ACID_BASE:
            steps = _salt_steps(t, m_g, w, vol)
            if t.weighed_as:
                notes.append(f"Weighed as {t.weighed_as} ({sig(m_r)} g/mol); the assay is of that form.")
        else:
            steps = _solid_steps(t, m_g, w, vol)
            notes.append(
                "Solids take up water and CO2 once the container is opened, so the real assay drifts below the "
                "certificate's; standardization measures the result (common practice)."
            )
        conc_ml = None
        conc_mol_l = None
    steps.append("Label the container with the batch details; it awaits standardization before any use.")

    return PreparationPlan(
        reagent=t.key,
        form=form,
        target_molarity_mol_l=c,
        planned_molarity_mol_l=planned,
        overshoot_rel=over,
        final_volume_l=vol,
        assay_w_w=w,
        density_g_ml=rho,
        molar_mass_g_mol=m_r,
        reagent_mass_g=reagent_g,
        concentrate_mass_g=m_g,
        concentrate_volume_ml=conc_ml,
        concentrate_molarity_mol_l=conc_mol_l,
        water_approx_l=water_l,
        instructions=tuple(steps),
        cautions=cautions_for(t, form),
        notes=tuple(notes),
    )


# ---------------------------------------------------------------------------------------------------------
# Adjustment of a standardized batch

NO_ADJUSTMENT = "none"
ADD_WATER = "add_water"
ADD_CONCENTRATE = "add_concentrate"


@dataclass(frozen=True)
class AdjustmentPlan:
    """What to add to a standardized batch to bring it to nominal, or that nothing is needed."""

    reagent: str  # titrant key
    action: str  # "none" | "add_water" | "add_concentrate"
    measured_molarity_mol_l: float  # mol/L, from the standardization
    target_molarity_mol_l: float  # mol/L, nominal
    deviation_rel: float  # measured/target − 1, dimensionless
    tolerance_rel: float  # dimensionless
    current_volume_l: float  # L in the container now
    water_to_add_l: float  # L (0 unless action is add_water)
    concentrate_to_add_ml: float  # mL (0 unless action is add_concentrate)
    concentrate_molarity_mol_l: float | None  # mol/L of the concentrate used, when one was given
    final_volume_l: float  # L after the addition
    expected_molarity_mol_l: float  # mol/L after the addition (contraction neglected)
    restandardize: bool  # True whenever something is added
    instructions: tuple[str, ...]
    cautions: tuple[str, ...]
    notes: tuple[str, ...]


def adjustment_plan(
    reagent: str | Titrant,
    measured_molarity_mol_l: float,
    target_molarity_mol_l: float,
    current_volume_l: float,
    tolerance_rel: float = 0.005,
    concentrate_molarity_mol_l: float | None = None,
    concentrate_assay_w_w: float | None = None,
    concentrate_density_g_ml: float | None = None,
    container_capacity_l: float | None = None,
) -> AdjustmentPlan:
    """Water or concentrate to add so a standardized batch comes to the target molarity.

    reagent: titrant key, name or Titrant. measured_molarity_mol_l: the standardized value, mol/L.
    target_molarity_mol_l: nominal, mol/L. current_volume_l: volume in the container now, L.
    tolerance_rel: relative deviation accepted without adjustment, dimensionless, 0 ≤ x < 0.1.
    concentrate_molarity_mol_l: concentrate to raise the strength with, mol/L; or give instead
    concentrate_assay_w_w (mass fraction) and concentrate_density_g_ml (g/mL at 20 °C). Needed only
    when the batch is weak. container_capacity_l: L, or None to skip the overflow check.
    Water: w = V·(c/c_target − 1). Concentrate: c·V + c_conc·v = c_target·(V + v), so
    v = V·(c_target − c)/(c_conc − c_target). Returns an AdjustmentPlan. Raises InvalidInput.
    """
    errors: list[FieldError] = []
    t = _titrant(reagent, errors)
    c = _positive(errors, "measured_molarity_mol_l", measured_molarity_mol_l, "mol/L")
    ct = _positive(errors, "target_molarity_mol_l", target_molarity_mol_l, "mol/L")
    vol = _positive(errors, "current_volume_l", current_volume_l, "L")
    tol = _number(errors, "tolerance_rel", tolerance_rel)
    if tol is not None and not 0.0 <= tol < 0.1:
        errors.append(
            FieldError("tolerance_rel", "must be from 0 up to (not including) 0.1, a fraction of nominal (0.005 is 0.5 %)")
        )
        tol = None
    cap = None
    if container_capacity_l is not None:
        cap = _positive(errors, "container_capacity_l", container_capacity_l, "L")
        if cap is not None and vol is not None and vol > cap:
            errors.append(FieldError("current_volume_l", f"{vol:g} L is more than the {cap:g} L container holds"))
    _raise(errors)
    assert c is not None and ct is not None and vol is not None and tol is not None

    deviation = c / ct - 1.0
    cautions = cautions_for(t, LIQUID)  # a dilute batch, and any concentrate added to it
    water = _base_water(t)
    notes: list[str] = []
    if abs(deviation) > 0.1:
        notes.append(
            f"The batch is {sig(abs(deviation) * 100, 2)} % from nominal: check the standardization (standard, "
            f"units, dilution) before adjusting, since so large a miss often means a mistake there (common "
            f"practice)."
        )

    if abs(deviation) <= tol:
        return AdjustmentPlan(
            reagent=t.key,
            action=NO_ADJUSTMENT,
            measured_molarity_mol_l=c,
            target_molarity_mol_l=ct,
            deviation_rel=deviation,
            tolerance_rel=tol,
            current_volume_l=vol,
            water_to_add_l=0.0,
            concentrate_to_add_ml=0.0,
            concentrate_molarity_mol_l=None,
            final_volume_l=vol,
            expected_molarity_mol_l=c,
            restandardize=False,
            instructions=(
                f"No adjustment is needed: {sig(c)} mol/L is within {sig(tol * 100, 2)} % of the nominal "
                f"{sig(ct)} mol/L (off by {sig(deviation * 100, 2)} %).",
            ),
            cautions=cautions,
            notes=tuple(notes),
        )

    notes += [
        "Volume contraction on mixing is neglected.",
        "The adjusted batch must be re-standardized: the earlier result no longer describes it, and the new "
        "value is a new measurement.",
        "The figure aims at nominal from the measured value, so that value's uncertainty carries over.",
    ]
    after = [
        *(
            [
                "Open the container as briefly as possible and keep the soda-lime guard tube in place: the batch "
                "takes up CO2 each time it is opened (common practice)."
            ]
            if t.role == BASE
            else []
        ),
        "Close the container and mix thoroughly (stir, or invert many times) until uniform.",
        "Record the addition on the batch, then re-standardize it before any use.",
    ]

    if deviation > 0:
        w_l = vol * (c / ct - 1.0)
        final = vol + w_l
        if cap is not None and final > cap:
            raise InvalidInput(
                [
                    FieldError(
                        "current_volume_l",
                        f"adding {sig(w_l)} L of water brings the batch to {sig(final)} L, more than the {cap:g} L "
                        f"container holds: move it to a larger container or split it",
                    )
                ]
            )
        steps = [
            f"The batch is {sig(deviation * 100, 2)} % strong. Add {sig(w_l)} L ({sig(w_l * 1000)} mL) of "
            f"{water} to the {sig(vol)} L in the container.",
            *after,
        ]
        return AdjustmentPlan(
            reagent=t.key,
            action=ADD_WATER,
            measured_molarity_mol_l=c,
            target_molarity_mol_l=ct,
            deviation_rel=deviation,
            tolerance_rel=tol,
            current_volume_l=vol,
            water_to_add_l=w_l,
            concentrate_to_add_ml=0.0,
            concentrate_molarity_mol_l=None,
            final_volume_l=final,
            expected_molarity_mol_l=c * vol / final,
            restandardize=True,
            instructions=tuple(steps),
            cautions=cautions,
            notes=tuple(notes),
        )

    # Weak batch: concentrate needed.
    by_composition = concentrate_assay_w_w is not None or concentrate_density_g_ml is not None
    if concentrate_molarity_mol_l is not None and by_composition:
        raise InvalidInput(
            [
                FieldError(
                    "concentrate_molarity_mol_l",
                    "give either the concentrate's molarity or its assay and density, not both",
                )
            ]
        )
    if concentrate_molarity_mol_l is not None:
        c_conc = _positive(errors, "concentrate_molarity_mol_l", concentrate_molarity_mol_l, "mol/L")
        _raise(errors)
    elif by_composition:
        if concentrate_assay_w_w is None:
            errors.append(FieldError("concentrate_assay_w_w", "is needed with the density, as a mass fraction"))
        if concentrate_density_g_ml is None:
            errors.append(FieldError("concentrate_density_g_ml", "is needed with the assay, in g/mL at 20 °C"))
        w = rho = None
        if concentrate_assay_w_w is not None:
            w = _fraction(errors, "concentrate_assay_w_w", concentrate_assay_w_w)
        if concentrate_density_g_ml is not None:
            rho = _density(errors, "concentrate_density_g_ml", concentrate_density_g_ml)
        _raise(errors)
        assert w is not None and rho is not None
        c_conc = 1000.0 * rho * w / t.molar_mass.value
    else:
        raise InvalidInput(
            [
                FieldError(
                    "concentrate_molarity_mol_l",
                    f"the batch is {sig(-deviation * 100, 2)} % weak: raising it needs a concentrate; give its "
                    f"molarity, or its assay and density",
                )
            ]
        )
    assert c_conc is not None
    if c_conc <= ct:
        raise InvalidInput(
            [
                FieldError(
                    "concentrate_molarity_mol_l",
                    f"the concentrate ({sig(c_conc)} mol/L) is not stronger than the target ({sig(ct)} mol/L): "
                    f"adding it cannot raise the batch to the target",
                )
            ]
        )
    v_ml = 1000.0 * vol * (ct - c) / (c_conc - ct)
    final = vol + v_ml / 1000.0
    if cap is not None and final > cap:
        raise InvalidInput(
            [
                FieldError(
                    "current_volume_l",
                    f"adding {sig(v_ml)} mL of concentrate brings the batch to {sig(final)} L, more than the "
                    f"{cap:g} L container holds",
                )
            ]
        )
    if v_ml < 1.0:
        notes.append(
            f"{sig(v_ml)} mL is hard to measure well; a graduated pipette is needed, or a weaker intermediate "
            f"solution (common practice)."
        )
    clear = (
        (" For NaOH use the clear liquid of 50 % NaOH, from which carbonate has settled (AOAC Official Methods, Appendix A).")
        if t.key == "NaOH"
        else ""
    )
    steps = [
        f"The batch is {sig(-deviation * 100, 2)} % weak. In the fume hood, measure {sig(v_ml)} mL of the "
        f"concentrate ({sig(c_conc)} mol/L) with a pipette and a pipette filler (never by mouth).{clear}",
        "Add it slowly to the batch with stirring: concentrate into the dilute solution, as with acid to water.",
        *after,
    ]
    return AdjustmentPlan(
        reagent=t.key,
        action=ADD_CONCENTRATE,
        measured_molarity_mol_l=c,
        target_molarity_mol_l=ct,
        deviation_rel=deviation,
        tolerance_rel=tol,
        current_volume_l=vol,
        water_to_add_l=0.0,
        concentrate_to_add_ml=v_ml,
        concentrate_molarity_mol_l=c_conc,
        final_volume_l=final,
        expected_molarity_mol_l=(c * vol + c_conc * v_ml / 1000.0) / final,
        restandardize=True,
        instructions=tuple(steps),
        cautions=cautions,
        notes=tuple(notes),
    )
