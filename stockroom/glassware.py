"""Volumetric glassware: maximum permissible errors by kind, nominal capacity and class, and their standard uncertainty.

Pure module: numbers and frozen dataclasses in and out; no web or database import.

Burettes follow ISO 385:2005 and one-mark (transfer) pipettes ISO 648:2008, each in Class A and Class B.
The standards themselves were not open to us. Two figures are confirmed by secondary sources that quote
ISO 385: the 50 mL burette's ±0.05 mL (Class A) and ±0.10 mL (Class B). Every other figure is from memory of
the standards' tables and of glassware makers' catalogues, which repeat them, and is marked so in SOURCES;
check the certificate or the marking of the item in use, which overrides this table.

Distribution: triangular, u = a/√6, as EURACHEM/CITAC QUAM:2012 does for burette and pipette tolerances in
Examples A2 and A3. A tolerance is a bound the maker guarantees; an item passed against it usually sits well
inside it, so values near the nominal are more likely than values at the bound. Only a plain bound with no
such knowledge calls for the rectangular a/√3, which would be 1.41 times larger.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from stockroom.errors import FieldError, InvalidInput

KINDS = ("burette", "pipette")
CLASSES = ("A", "B")

# ± mL by nominal capacity (mL): (Class A, Class B).
_BURETTE_MPE_ML: dict[float, tuple[float, float]] = {
    1.0: (0.006, 0.01),
    2.0: (0.01, 0.02),
    5.0: (0.01, 0.02),
    10.0: (0.02, 0.05),
    25.0: (0.03, 0.05),
    50.0: (0.05, 0.10),
    100.0: (0.10, 0.20),
}
_PIPETTE_MPE_ML: dict[float, tuple[float, float]] = {
    0.5: (0.005, 0.010),
    1.0: (0.008, 0.015),
    2.0: (0.010, 0.020),
    5.0: (0.015, 0.030),
    10.0: (0.020, 0.040),
    20.0: (0.030, 0.060),
    25.0: (0.030, 0.060),
    50.0: (0.050, 0.100),
    100.0: (0.080, 0.160),
    200.0: (0.100, 0.200),
}
_TABLES = {"burette": _BURETTE_MPE_ML, "pipette": _PIPETTE_MPE_ML}
_STANDARD = {"burette": "ISO 385:2005", "pipette": "ISO 648:2008"}
# Figures confirmed outside memory: (kind, capacity) -> where.
_CONFIRMED = {
    ("burette", 50.0): "ISO 385 as quoted by a glassware supplier's guide to burette accuracy (±0.05 / ±0.10 mL)",
}


@dataclass(frozen=True)
class Tolerance:
    """The maximum permissible error of one size and class of glassware.

    kind: "burette" or "pipette"; capacity_ml: nominal capacity, mL; accuracy_class: "A" or "B";
    mpe_ml: the ± bound, mL; u_ml: its standard uncertainty, triangular a/√6, mL; source: where the
    figure comes from ("from memory" where it was not looked up).
    """

    kind: str
    capacity_ml: float
    accuracy_class: str
    mpe_ml: float
    u_ml: float
    source: str


def capacities(kind: str) -> tuple[float, ...]:
    """The nominal capacities listed for a kind of glassware, mL, smallest first."""
    return tuple(sorted(_TABLES[_kind(kind)]))


def _kind(kind: str) -> str:
    k = str(kind).strip().lower()
    if k not in _TABLES:
        raise InvalidInput([FieldError("kind", f"must be one of {', '.join(KINDS)} (got {kind!r})")])
    return k


def _class(accuracy_class: str) -> str:
    c = str(accuracy_class).strip().upper()
    if c not in CLASSES:
        raise InvalidInput([FieldError("accuracy_class", f"must be A or B (got {accuracy_class!r})")])
    return c


def lookup(kind: str, capacity_ml: float, accuracy_class: str = "A") -> Tolerance | None:
    """The Tolerance of a listed size and class, or None when the capacity is not listed.

    kind: "burette" or "pipette"; capacity_ml: nominal capacity, mL; accuracy_class: "A" or "B".
    Raises InvalidInput for an unknown kind or class.
    """
    k, c = _kind(kind), _class(accuracy_class)
    if isinstance(capacity_ml, bool) or not isinstance(capacity_ml, int | float) or not math.isfinite(capacity_ml):
        raise InvalidInput([FieldError("capacity_ml", f"must be a number of mL (got {capacity_ml!r})")])
    row = _TABLES[k].get(float(capacity_ml))
    if row is None:
        return None
    mpe = row[CLASSES.index(c)]
    confirmed = _CONFIRMED.get((k, float(capacity_ml)))
    source = f"{_STANDARD[k]} Class {c}, " + (confirmed if confirmed else "from memory")
    return Tolerance(k, float(capacity_ml), c, mpe, mpe / math.sqrt(6.0), source)


def tolerance(kind: str, capacity_ml: float, accuracy_class: str = "A") -> Tolerance:
    """The Tolerance of a listed size and class; InvalidInput naming the listed sizes otherwise.

    kind: "burette" or "pipette"; capacity_ml: mL; accuracy_class: "A" or "B".
    """
    t = lookup(kind, capacity_ml, accuracy_class)
    if t is None:
        listed = ", ".join(f"{c:g}" for c in capacities(kind))
        raise InvalidInput(
            [FieldError("capacity_ml", f"no {kind} of {capacity_ml:g} mL is listed; listed capacities are {listed} mL")]
        )
    return t


def standard_uncertainty(kind: str, capacity_ml: float, accuracy_class: str = "A") -> float:
    """Standard uncertainty of one delivery from glassware of this size and class, mL (triangular, a/√6)."""
    return tolerance(kind, capacity_ml, accuracy_class).u_ml


# A titre may take a second fill of the burette: both deliveries then carry their own calibration and
# reading terms. Three or more fills is not a titration that deserves a certificate (common practice:
# take a larger burette or less standard), so it is refused.
MAX_FILLS = 2


def burette_fills(titre_ml: float, capacity_ml: float) -> int:
    """How many fills of a burette a titre took: 1, or 2 when it exceeds the capacity.

    titre_ml: volume delivered, mL (> 0); capacity_ml: the burette's nominal capacity, mL (> 0).
    Raises InvalidInput (field "titre_ml") for a titre of more than two full burettes.
    """
    for name, v in (("titre_ml", titre_ml), ("capacity_ml", capacity_ml)):
        if isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v) or v <= 0:
            raise InvalidInput([FieldError(name, f"must be a volume above 0 mL (got {v!r})")])
    fills = math.ceil(titre_ml / capacity_ml - 1e-9)
    if fills > MAX_FILLS:
        raise InvalidInput(
            [
                FieldError(
                    "titre_ml",
                    f"{titre_ml:g} mL is more than {MAX_FILLS} fills of the {capacity_ml:g} mL burette: "
                    f"use a larger burette or take less standard",
                )
            ]
        )
    return max(1, fills)
