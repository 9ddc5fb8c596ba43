"""GHS label elements of titrant solutions: statement texts, checks, and the classification for a concentration.

Pure: plain values and frozen dataclasses in and out, no database. The classifications themselves are
data an administrator edits (table hazard_classifications); this module holds the starting values, the
rules that keep an entry consistent, and `pick`, which chooses the entry that applies to a solution.

Bands are half-open, [min_molarity, max_molarity) in mol/L, max None meaning no upper limit. Where
entries overlap, the newest in force on the date wins, so a narrower band recorded later overrides an
older, wider one inside its range and the older one still applies outside it.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from stockroom.errors import FieldError

DANGER = "Danger"
WARNING = "Warning"
SIGNAL_WORDS = (DANGER, WARNING, "")

# Statement texts in the wording of the UN GHS (Annex 3) and the EU CLP Regulation (Annex III/IV),
# from memory — verify against the current revision before relying on a text. Only codes listed here
# can be recorded, so every code on a label prints with its words.
HAZARD_TEXT: dict[str, str] = {
    "H225": "Highly flammable liquid and vapour.",
    "H226": "Flammable liquid and vapour.",
    "H270": "May cause or intensify fire; oxidizer.",
    "H271": "May cause fire or explosion; strong oxidizer.",
    "H272": "May intensify fire; oxidizer.",
    "H290": "May be corrosive to metals.",
    "H300": "Fatal if swallowed.",
    "H301": "Toxic if swallowed.",
    "H302": "Harmful if swallowed.",
    "H304": "May be fatal if swallowed and enters airways.",
    "H310": "Fatal in contact with skin.",
    "H311": "Toxic in contact with skin.",
    "H312": "Harmful in contact with skin.",
    "H314": "Causes severe skin burns and eye damage.",
    "H315": "Causes skin irritation.",
    "H317": "May cause an allergic skin reaction.",
    "H318": "Causes serious eye damage.",
    "H319": "Causes serious eye irritation.",
    "H330": "Fatal if inhaled.",
    "H331": "Toxic if inhaled.",
    "H332": "Harmful if inhaled.",
    "H334": "May cause allergy or asthma symptoms or breathing difficulties if inhaled.",
    "H335": "May cause respiratory irritation.",
    "H336": "May cause drowsiness or dizziness.",
    "H340": "May cause genetic defects.",
    "H341": "Suspected of causing genetic defects.",
    "H350": "May cause cancer.",
    "H351": "Suspected of causing cancer.",
    "H360": "May damage fertility or the unborn child.",
    "H361": "Suspected of damaging fertility or the unborn child.",
    "H370": "Causes damage to organs.",
    "H371": "May cause damage to organs.",
    "H372": "Causes damage to organs through prolonged or repeated exposure.",
    "H373": "May cause damage to organs through prolonged or repeated exposure.",
    "H400": "Very toxic to aquatic life.",
    "H410": "Very toxic to aquatic life with long lasting effects.",
    "H411": "Toxic to aquatic life with long lasting effects.",
    "H412": "Harmful to aquatic life with long lasting effects.",
    "EUH071": "Corrosive to the respiratory tract.",
}

PRECAUTION_TEXT: dict[str, str] = {
    "P201": "Obtain special instructions before use.",
    "P210": "Keep away from heat, hot surfaces, sparks, open flames and other ignition sources. No smoking.",
    "P220": "Keep away from clothing and other combustible materials.",
    "P233": "Keep container tightly closed.",
    "P234": "Keep only in original packaging.",
    "P260": "Do not breathe mist/vapours/spray.",
    "P261": "Avoid breathing mist/vapours/spray.",
    "P264": "Wash hands thoroughly after handling.",
    "P270": "Do not eat, drink or smoke when using this product.",
    "P271": "Use only outdoors or in a well-ventilated area.",
    "P273": "Avoid release to the environment.",
    "P280": "Wear protective gloves/protective clothing/eye protection/face protection.",
    "P301+P310": "IF SWALLOWED: Immediately call a POISON CENTER/doctor.",
    "P301+P312": "IF SWALLOWED: Call a POISON CENTER/doctor if you feel unwell.",
    "P301+P330+P331": "IF SWALLOWED: Rinse mouth. Do NOT induce vomiting.",
    "P302+P352": "IF ON SKIN: Wash with plenty of water.",
    "P303+P361+P353": "IF ON SKIN (or hair): Take off immediately all contaminated clothing. Rinse skin with water [or shower].",
    "P304+P340": "IF INHALED: Remove person to fresh air and keep comfortable for breathing.",
    "P305+P351+P338": "IF IN EYES: Rinse cautiously with water for several minutes. Remove contact lenses, if "
    "present and easy to do. Continue rinsing.",
    "P310": "Immediately call a POISON CENTER/doctor.",
    "P312": "Call a POISON CENTER/doctor if you feel unwell.",
    "P332+P313": "If skin irritation occurs: Get medical advice/attention.",
    "P337+P313": "If eye irritation persists: Get medical advice/attention.",
    "P363": "Wash contaminated clothing before reuse.",
    "P390": "Absorb spillage to prevent material damage.",
    "P403+P233": "Store in a well-ventilated place. Keep container tightly closed.",
    "P405": "Store locked up.",
    "P406": "Store in a corrosion resistant container with a resistant inner liner.",
    "P501": "Dispose of contents/container in accordance with local regulations.",
}

# Pictogram code -> name. stockroom draws the ones in DRAWN (stockroom.pdf.ghs); a classification may
# only name those, so a label never promises a pictogram it cannot print.
PICTOGRAMS: dict[str, str] = {
    "GHS01": "exploding bomb",
    "GHS02": "flame",
    "GHS03": "flame over circle",
    "GHS04": "gas cylinder",
    "GHS05": "corrosion",
    "GHS06": "skull and crossbones",
    "GHS07": "exclamation mark",
    "GHS08": "health hazard",
    "GHS09": "environment",
}
DRAWN: tuple[str, ...] = ("GHS02", "GHS03", "GHS05", "GHS07", "GHS08", "GHS09")

# The pictogram and signal word each hazard statement carries (GHS Annex 1 allocation, from memory —
# verify). None: the statement carries no pictogram or no signal word of its own.
IMPLIED: dict[str, tuple[str | None, str | None]] = {
    "H225": ("GHS02", DANGER),
    "H226": ("GHS02", WARNING),
    "H270": ("GHS03", DANGER),
    "H271": ("GHS03", DANGER),
    "H272": ("GHS03", WARNING),
    "H290": ("GHS05", WARNING),
    "H314": ("GHS05", DANGER),
    "H318": ("GHS05", DANGER),
    "H300": ("GHS06", DANGER),
    "H301": ("GHS06", DANGER),
    "H310": ("GHS06", DANGER),
    "H311": ("GHS06", DANGER),
    "H330": ("GHS06", DANGER),
    "H331": ("GHS06", DANGER),
    "H302": ("GHS07", WARNING),
    "H312": ("GHS07", WARNING),
    "H332": ("GHS07", WARNING),
    "H315": ("GHS07", WARNING),
    "H317": ("GHS07", WARNING),
    "H319": ("GHS07", WARNING),
    "H335": ("GHS07", WARNING),
    "H336": ("GHS07", WARNING),
    "H304": ("GHS08", DANGER),
    "H334": ("GHS08", DANGER),
    "H340": ("GHS08", DANGER),
    "H350": ("GHS08", DANGER),
    "H360": ("GHS08", DANGER),
    "H370": ("GHS08", DANGER),
    "H372": ("GHS08", DANGER),
    "H341": ("GHS08", WARNING),
    "H351": ("GHS08", WARNING),
    "H361": ("GHS08", WARNING),
    "H371": ("GHS08", WARNING),
    "H373": ("GHS08", WARNING),
    "H400": ("GHS09", WARNING),
    "H410": ("GHS09", WARNING),
    "H411": ("GHS09", None),
    "H412": (None, None),
    "EUH071": (None, None),
}

# Statements for which the exclamation mark stands aside when a stronger pictogram applies (GHS
# precedence of pictograms, 1.4.10.5.3.1; CLP Article 26(1), from memory): under the corrosion
# pictogram, for skin and eye irritation; under the skull, for acute toxicity; under the health hazard
# pictogram for respiratory sensitisation, for skin sensitisation and skin and eye irritation.
_GHS07_YIELDS_TO: dict[str, frozenset[str]] = {
    "GHS05": frozenset({"H315", "H319"}),
    "GHS06": frozenset({"H302", "H312", "H332"}),
}
_GHS07_YIELDS_TO_RESPIRATORY = frozenset({"H315", "H317", "H319"})

_H_CODE = re.compile(r"(?:H\d{3}|EUH\d{3})")
_P_CODE = re.compile(r"P\d{3}(?:\+P\d{3})*")
MAX_MOLARITY = 30.0  # mol/L; above any aqueous solution of these reagents, so a typo (e.g. mmol/L) stands out


@dataclass(frozen=True)
class Classification:
    """The GHS label elements of one reagent's solutions in one concentration band.

    min_molarity (inclusive) and max_molarity (exclusive, None for no limit) in mol/L; pictograms as
    GHS codes; statements as codes (texts in HAZARD_TEXT and PRECAUTION_TEXT); effective_from a date.
    """

    reagent: str
    min_molarity: float
    max_molarity: float | None
    signal_word: str
    pictograms: tuple[str, ...]
    hazard_statements: tuple[str, ...]
    precautionary_statements: tuple[str, ...]
    source_note: str = ""
    effective_from: dt.date = dt.date(2000, 1, 1)
    id: int = 0

    def covers(self, molarity: float) -> bool:
        """Whether a concentration (mol/L) falls in this band."""
        return self.min_molarity <= molarity and (self.max_molarity is None or molarity < self.max_molarity)

    @property
    def band_text(self) -> str:
        """The band in words, e.g. '0.5 mol/L and above' or 'from 0.125 to under 0.5 mol/L'."""
        if self.max_molarity is None:
            return f"{self.min_molarity:g} mol/L and above"
        if self.min_molarity == 0:
            return f"under {self.max_molarity:g} mol/L"
        return f"from {self.min_molarity:g} to under {self.max_molarity:g} mol/L"


@dataclass(frozen=True)
class LabelElements:
    """What a label prints for a hazard: signal word, pictogram codes, (code, text) statement pairs."""

    signal_word: str
    pictograms: tuple[str, ...]
    hazard_statements: tuple[tuple[str, str], ...]
    precautionary_statements: tuple[tuple[str, str], ...]
    classification: Classification


def pick(rows: Iterable[Classification], reagent: str, molarity: float, on: dt.date) -> Classification | None:
    """The classification that applies to a solution of `reagent` at `molarity` (mol/L) on date `on`.

    Among the rows of the reagent in force on `on` (effective_from <= on) whose band covers the
    concentration, the newest (latest effective_from, then highest id) wins. None when no row covers it.
    """
    found = [r for r in rows if r.reagent == reagent and r.effective_from <= on and r.covers(molarity)]
    if not found:
        return None
    return max(found, key=lambda r: (r.effective_from, r.id))


def in_force(rows: Iterable[Classification], on: dt.date) -> list[Classification]:
    """The rows that decide some concentration on `on`: per reagent, those not wholly overridden.

    A row is left out when newer rows of the same reagent cover its whole band. Sorted by reagent, then
    band. Concentrations in mol/L.
    """
    current = [r for r in rows if r.effective_from <= on]
    out = []
    for r in current:
        newer = [o for o in current if o.reagent == r.reagent and (o.effective_from, o.id) > (r.effective_from, r.id)]
        if not _covered(r, newer):
            out.append(r)
    return sorted(out, key=lambda r: (r.reagent, r.min_molarity, r.max_molarity or float("inf")))


def _covered(row: Classification, others: Sequence[Classification]) -> bool:
    """Whether the union of the others' bands covers row's whole band."""
    point = row.min_molarity
    end = row.max_molarity if row.max_molarity is not None else float("inf")
    while point < end:
        reach = [o.max_molarity if o.max_molarity is not None else float("inf") for o in others if o.covers(point)]
        if not reach:
            return False
        point = max(reach)
    return True


def label_elements(c: Classification) -> LabelElements:
    """The elements a label prints for a classification, after the GHS precedence rules.

    H318 is left out beside H314 (serious eye damage is part of H314); the exclamation mark is left out
    where a stronger pictogram covers the only statements it would stand for.
    """
    h = tuple(code for code in statement_order(c.hazard_statements) if not (code == "H318" and "H314" in c.hazard_statements))
    pictograms = tuple(p for p in _order_pictograms(c.pictograms) if not (p == "GHS07" and _ghs07_redundant(c.pictograms, h)))
    return LabelElements(
        signal_word=c.signal_word,
        pictograms=pictograms,
        hazard_statements=tuple((code, HAZARD_TEXT.get(code, "")) for code in h),
        precautionary_statements=tuple(
            (code, PRECAUTION_TEXT.get(code, "")) for code in statement_order(c.precautionary_statements)
        ),
        classification=c,
    )


def statement_order(codes: Iterable[str]) -> tuple[str, ...]:
    """Codes in the order labels list them: by number (P2xx prevention before P3xx response...), EUH last."""

    def key(code: str) -> tuple[int, tuple[int, ...]]:
        return (1 if code.startswith("EUH") else 0, tuple(int(n) for n in re.findall(r"\d+", code)))

    return tuple(sorted(dict.fromkeys(codes), key=key))


def _order_pictograms(codes: Iterable[str]) -> tuple[str, ...]:
    return tuple(sorted(dict.fromkeys(codes)))


def _ghs07_reasons(h_codes: Iterable[str]) -> set[str]:
    return {code for code in h_codes if IMPLIED.get(code, (None, None))[0] == "GHS07"}


def _ghs07_redundant(pictograms: Iterable[str], h_codes: Iterable[str]) -> bool:
    """Whether every statement the exclamation mark would stand for is covered by a stronger pictogram."""
    reasons = _ghs07_reasons(h_codes)
    if not reasons:
        return False
    present = set(pictograms)
    covered: set[str] = set()
    for stronger, statements in _GHS07_YIELDS_TO.items():
        if stronger in present:
            covered |= statements
    if "GHS08" in present and "H334" in set(h_codes):
        covered |= _GHS07_YIELDS_TO_RESPIRATORY
    return reasons <= covered


def implied_elements(h_codes: Iterable[str]) -> tuple[str, tuple[str, ...]]:
    """The signal word and pictograms a set of hazard statements calls for, after precedence.

    h_codes: hazard statement codes. Returns (signal word, sorted pictogram codes); the signal word
    is Danger when any statement carries Danger, else Warning when any carries Warning, else "".
    """
    codes = tuple(h_codes)
    pictograms: set[str] = set()
    words: set[str] = set()
    for code in codes:
        pictogram, word = IMPLIED.get(code, (None, None))
        if pictogram:
            pictograms.add(pictogram)
        if word:
            words.add(word)
    if "GHS07" in pictograms and _ghs07_redundant(pictograms, codes):
        pictograms.discard("GHS07")
    word = DANGER if DANGER in words else WARNING if WARNING in words else ""
    return word, tuple(sorted(pictograms))


def split_codes(text: str) -> list[str]:
    """Codes typed in a field, split on spaces, commas or semicolons, upper-cased; '+' joins a combination."""
    cleaned = re.sub(r"\s*\+\s*", "+", text.strip().upper())
    return [part for part in re.split(r"[\s,;]+", cleaned) if part]


def check(
    reagent: str,
    min_molarity: float,
    max_molarity: float | None,
    signal_word: str,
    pictograms: Sequence[str],
    hazard_statements: Sequence[str],
    precautionary_statements: Sequence[str],
) -> list[FieldError]:
    """Every rule a proposed classification breaks, as FieldErrors named after the admin form's fields.

    Concentrations in mol/L; codes as typed (see split_codes). Empty list when the entry is consistent:
    known, well-formed codes; a band with min < max; H318 not beside H314; signal word and pictograms
    exactly those the hazard statements call for.
    """
    errors: list[FieldError] = []
    if not reagent:
        errors.append(FieldError("reagent", "is required"))
    if min_molarity < 0:
        errors.append(FieldError("min_molarity", "must be 0 mol/L or more"))
    if max_molarity is not None:
        if max_molarity <= min_molarity:
            errors.append(
                FieldError("max_molarity", f"must be above the lower limit ({min_molarity:g} mol/L), or blank for no upper limit")
            )
        elif max_molarity > MAX_MOLARITY:
            errors.append(FieldError("max_molarity", f"must be at most {MAX_MOLARITY:g} mol/L (or blank): check the unit"))
    if min_molarity > MAX_MOLARITY:
        errors.append(FieldError("min_molarity", f"must be at most {MAX_MOLARITY:g} mol/L: check the unit"))
    h_ok = _check_codes(
        errors, "hazard_statements", hazard_statements, _H_CODE, HAZARD_TEXT, "H followed by three digits, e.g. H290 (or EUH071)"
    )
    _check_codes(
        errors,
        "precautionary_statements",
        precautionary_statements,
        _P_CODE,
        PRECAUTION_TEXT,
        "P followed by three digits, combinations joined by +, e.g. P305+P351+P338",
    )
    bad_pictograms = [p for p in pictograms if p not in DRAWN]
    if bad_pictograms:
        known = ", ".join(f"{code} ({PICTOGRAMS[code]})" for code in DRAWN)
        errors.append(FieldError("pictograms", f"{', '.join(bad_pictograms)}: stockroom can print only {known}"))
    if signal_word not in SIGNAL_WORDS:
        errors.append(FieldError("signal_word", "must be Danger, Warning or none"))
    if "H318" in hazard_statements and "H314" in hazard_statements:
        errors.append(
            FieldError(
                "hazard_statements", "leave out H318: serious eye damage is part of H314, and H318 is not printed beside it"
            )
        )
    if not h_ok or bad_pictograms or signal_word not in SIGNAL_WORDS:
        return errors
    word, needed = implied_elements(hazard_statements)
    if signal_word != word:
        want = word or "none"
        errors.append(
            FieldError("signal_word", f"the hazard statements given call for {want!s}{'' if word else ' (no signal word)'}")
        )
    missing = [p for p in needed if p not in pictograms]
    extra = [p for p in pictograms if p not in needed]
    if missing:
        errors.append(
            FieldError("pictograms", "the hazard statements need " + ", ".join(f"{p} ({PICTOGRAMS[p]})" for p in missing))
        )
    elif extra:
        errors.append(
            FieldError(
                "pictograms",
                ", ".join(f"{p} ({PICTOGRAMS[p]})" for p in extra)
                + " is not called for by the hazard statements given (or yields to a stronger "
                "pictogram)",
            )
        )
    if hazard_statements and not precautionary_statements:
        errors.append(FieldError("precautionary_statements", "give the precautionary statements of the safety data sheet"))
    return errors


def _check_codes(
    errors: list[FieldError], field: str, codes: Sequence[str], pattern: re.Pattern[str], known: dict[str, str], shape: str
) -> bool:
    malformed = [c for c in codes if not pattern.fullmatch(c)]
    if malformed:
        errors.append(FieldError(field, f"{', '.join(malformed[:5])}: write each code as {shape}"))
        return False
    unknown = [c for c in codes if c not in known]
    if unknown:
        errors.append(
            FieldError(
                field,
                f"{', '.join(unknown[:5])}: well formed, but stockroom has no text for it; use a code from the list on this page",
            )
        )
        return False
    repeated = sorted({c for c in codes if list(codes).count(c) > 1})
    if repeated:
        errors.append(FieldError(field, f"{', '.join(repeated)} is given twice"))
        return False
    return True


# ---------------------------------------------------------------- starting classifications

_SDS_NOTE = (
    "Typical values from memory, not from one supplier: verify against the supplier's safety data "
    "sheet and CLP Annex VI before use. "
)
_H290_P = ("P234", "P390")
_IRRITANT_P = ("P234", "P280", "P302+P352", "P305+P351+P338", "P337+P313")
_CORROSIVE_P = ("P234", "P280", "P303+P361+P353", "P305+P351+P338", "P310")


def _row(reagent: str, lo: float, hi: float | None, h: tuple[str, ...], p: tuple[str, ...], note: str) -> Classification:
    word, pictograms = implied_elements(h)
    return Classification(reagent, lo, hi, word, pictograms, h, p, _SDS_NOTE + note)


# Band limits converted from the % w/w limits with solution densities near 1.0-1.1 g/mL (from memory),
# rounded down, so a solution at a limit always gets the stronger band.
# H290 (corrosive to metals) is suppliers' self-classification of dilute acids and bases, not Annex VI.
ACID_BASE_CLASSIFICATIONS: tuple[Classification, ...] = (
    _row("NaOH", 0.0, 0.125, ("H290",), _H290_P, "Below 0.5 % w/w (about 0.125 mol/L): many suppliers give H290 only."),
    _row(
        "NaOH",
        0.125,
        0.5,
        ("H290", "H315", "H319"),
        _IRRITANT_P,
        "CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 0.5 % to under 2 % w/w (about 0.125 to 0.5 mol/L).",
    ),
    _row(
        "NaOH",
        0.5,
        None,
        ("H290", "H314"),
        _CORROSIVE_P,
        "CLP Annex VI: Skin Corr. 1B from 2 % w/w (about 0.5 mol/L), 1A from 5 %.",
    ),
    _row("KOH", 0.0, 0.085, ("H290",), _H290_P, "Below 0.5 % w/w (about 0.09 mol/L): H290 only."),
    _row(
        "KOH",
        0.085,
        0.36,
        ("H290", "H315", "H319"),
        _IRRITANT_P,
        "CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 0.5 % to under 2 % w/w (about 0.09 to 0.36 mol/L).",
    ),
    _row(
        "KOH",
        0.36,
        3.0,
        ("H290", "H314"),
        _CORROSIVE_P,
        "CLP Annex VI: Skin Corr. 1B from 2 % w/w (about "
        "0.36 mol/L). Above about 3 mol/L acute oral toxicity (H302) may apply: not entered, so no label "
        "prints there until an administrator adds it.",
    ),
    _row(
        "HCl",
        0.0,
        2.85,
        ("H290",),
        _H290_P,
        "Below 10 % w/w (about 2.9 mol/L) no Annex VI health class; "
        "0.1-1 mol/L solutions usually H290 only, though some suppliers add H315/H319/H335 at 1 mol/L.",
    ),
    _row(
        "HCl",
        2.85,
        7.7,
        ("H290", "H315", "H319", "H335"),
        _IRRITANT_P + ("P261",),
        "CLP Annex VI: Skin Irrit. 2, Eye Irrit. 2, STOT SE 3 from 10 % to under 25 % w/w (about 2.9 to 7.7 mol/L).",
    ),
    _row(
        "HCl",
        7.7,
        None,
        ("H290", "H314", "H335"),
        _CORROSIVE_P + ("P261",),
        "CLP Annex VI: Skin Corr. 1B "
        "from 25 % w/w (about 7.7 mol/L); STOT SE 3 from 10 %. Concentrated acid about 37 % (12 mol/L).",
    ),
    _row("H2SO4", 0.0, 0.5, ("H290",), _H290_P, "Below 5 % w/w (about 0.5 mol/L) no Annex VI health class; H290 only."),
    _row(
        "H2SO4",
        0.5,
        1.65,
        ("H290", "H315", "H319"),
        _IRRITANT_P,
        "CLP Annex VI specific limits: Skin Irrit. 2 and Eye Irrit. 2 from 5 % to under 15 % w/w (about 0.5 to 1.7 mol/L).",
    ),
    _row("H2SO4", 1.65, None, ("H290", "H314"), _CORROSIVE_P, "CLP Annex VI: Skin Corr. 1A from 15 % w/w (about 1.7 mol/L)."),
    _row("HNO3", 0.0, 0.8, ("H290",), _H290_P, "Below 5 % w/w (about 0.8 mol/L): H290 only."),
    _row(
        "HNO3",
        0.8,
        10.0,
        ("H290", "H314"),
        _CORROSIVE_P,
        "CLP Annex VI: Skin Corr. 1B from 5 % w/w (about "
        "0.8 mol/L), 1A from 20 %. Stops at 10 mol/L: concentrated nitric acid is also an oxidiser (H272, "
        "flame over circle) and toxic by inhalation; enter that band from its SDS before labelling it.",
    ),
)

# Titrants beyond acids and bases, at their usual working strengths. Mixture classification by the CLP
# generic concentration limits (from memory): aquatic Chronic 1 ingredients (M = 1) give Chronic 3
# (H412) from 0.25 % w/w; STOT RE 1/2 ingredients give H373 from 1 %; carcinogens, mutagens (1B) from
# 0.1 % and reproductive toxicants (1B) from 0.3 %. A dilute titrant is no oxidizing liquid: H271/H272
# belong to the solid reagent's label (the preparation plan's cautions cover handling it).
_NOT_CLASSIFIED = "Not classified at this strength by the CLP generic limits (from memory)."
_ENV_P = ("P273", "P501")
OTHER_CLASSIFICATIONS: tuple[Classification, ...] = (
    _row("KMnO4", 0.0, 0.016, (), (), _NOT_CLASSIFIED + " Below 0.25 % w/w (about 0.016 mol/L)."),
    _row(
        "KMnO4",
        0.016,
        0.15,
        ("H412",),
        _ENV_P,
        "KMnO4 is Aquatic Chronic 1 (CLP Annex VI): Chronic 3 from 0.25 % w/w (about 0.016 mol/L) to 2.5 % "
        "(about 0.16 mol/L); the solid is also an oxidizer (H272).",
    ),
    _row("Na2S2O3", 0.0, 1.0, (), (), _NOT_CLASSIFIED),
    _row("I2", 0.0, 0.039, (), (), _NOT_CLASSIFIED + " Below 1 % w/w iodine (about 0.039 mol/L)."),
    _row(
        "I2",
        0.039,
        0.3,
        ("H373",),
        ("P260", "P501"),
        "Iodine is STOT RE 1 (thyroid): H373 from 1 % w/w (about 0.039 mol/L); iodine vapour irritates.",
    ),
    _row("Ce(SO4)2", 0.0, 0.2, ("H290", "H315", "H319"), _IRRITANT_P, "From the sulfuric acid medium (about 0.5 mol/L H2SO4)."),
    _row("FAS", 0.0, 0.5, ("H290",), _H290_P, "From the dilute sulfuric acid medium; the iron salt itself is not classified."),
    _row(
        "K2Cr2O7",
        0.0,
        0.1,
        ("H340", "H350", "H360", "H412"),
        ("P201", "P280", "P273", "P501"),
        "Potassium dichromate is Muta. 1B, Carc. 1B, Repr. 1B (CLP Annex VI): H340/H350 from 0.1 % w/w and "
        "H360 from 0.3 %, so even 0.0167 mol/L (0.49 %) carries them; also a skin and respiratory sensitizer "
        "at higher strengths. Dispose of as chromium(VI) waste.",
    ),
    _row(
        "AgNO3",
        0.0,
        0.059,
        ("H410",),
        _ENV_P,
        "Silver nitrate is Aquatic Acute 1 and Chronic 1 with high M-factors: even dilute solutions are H410.",
    ),
    _row(
        "AgNO3",
        0.059,
        0.3,
        ("H315", "H319", "H410"),
        ("P264", "P273", "P280", "P302+P352", "P305+P351+P338", "P501"),
        "Silver nitrate is also Skin Corr. 1B: Skin Irrit. 2 and Eye Irrit. 2 from 1 % w/w (about 0.059 mol/L); "
        "Aquatic Acute 1 and Chronic 1 with high M-factors (H410).",
    ),
    _row("NH4SCN", 0.0, 0.5, (), (), _NOT_CLASSIFIED),
    _row("EDTA", 0.0, 0.027, (), (), _NOT_CLASSIFIED + " Below 1 % w/w (about 0.027 mol/L)."),
    _row(
        "EDTA",
        0.027,
        0.3,
        ("H373",),
        ("P260", "P501"),
        "Disodium edetate is STOT RE 2 (CLP Annex VI): H373 from 1 % w/w (about 0.027 mol/L).",
    ),
    _row("ZnSO4", 0.0, 0.0155, (), (), _NOT_CLASSIFIED + " Below 0.25 % w/w (about 0.016 mol/L)."),
    _row(
        "ZnSO4",
        0.0155,
        0.062,
        ("H412",),
        _ENV_P,
        "Zinc sulfate is Aquatic Chronic 1: Chronic 3 from 0.25 % w/w; eye irritation (H319) from 1 % (about 0.062 mol/L).",
    ),
    _row(
        "ZnSO4",
        0.062,
        0.15,
        ("H319", "H412"),
        ("P264", "P273", "P280", "P305+P351+P338", "P337+P313", "P501"),
        "Zinc sulfate is Eye Dam. 1: Eye Irrit. 2 from 1 % w/w (about 0.062 mol/L); Aquatic Chronic 3.",
    ),
    _row(
        "HClO4-AcOH",
        0.0,
        0.25,
        ("H226", "H314"),
        ("P210", "P280", "P303+P361+P353", "P305+P351+P338", "P310"),
        "Glacial acetic acid is Flam. Liq. 3 (flash point about 39 °C) and Skin Corr. 1A from 90 %; perchloric "
        "acid at 0.1 mol/L adds little, but never let the solution evaporate to dryness.",
    ),
)
DEFAULT_CLASSIFICATIONS: tuple[Classification, ...] = ACID_BASE_CLASSIFICATIONS + OTHER_CLASSIFICATIONS
