"""Glassware tolerances by kind, capacity and class (ISO 385 burettes, ISO 648 one-mark pipettes)."""

from __future__ import annotations

import math

import pytest

from stockroom import glassware
from stockroom.errors import InvalidInput


@pytest.mark.parametrize(
    ("kind", "capacity", "cls", "mpe"),
    [
        # ISO 385 as quoted by a glassware supplier's burette-accuracy guide: 50 mL ±0.05 (A), ±0.10 (B).
        ("burette", 50.0, "A", 0.05),
        ("burette", 50.0, "B", 0.10),
        # From memory of ISO 385:2005 Table 1 (also ASTM E287 Class A for 10 and 25 mL).
        ("burette", 10.0, "A", 0.02),
        ("burette", 25.0, "A", 0.03),
        # From memory of ISO 648:2008 Table 1, Class A.
        ("pipette", 10.0, "A", 0.02),
        ("pipette", 25.0, "A", 0.03),
        ("pipette", 5.0, "A", 0.015),
    ],
)
def test_tolerance_by_capacity_and_class(kind: str, capacity: float, cls: str, mpe: float) -> None:
    t = glassware.tolerance(kind, capacity, cls)
    assert t.mpe_ml == mpe
    # Triangular, u = a/√6, as EURACHEM/CITAC QUAM:2012 A2/A3 treat glassware tolerances.
    assert t.u_ml == pytest.approx(mpe / math.sqrt(6), rel=1e-12)
    assert glassware.standard_uncertainty(kind, capacity, cls) == t.u_ml
    assert ("from memory" in t.source) == ((kind, capacity) != ("burette", 50.0))


def test_class_b_is_never_tighter_than_class_a() -> None:
    # ISO 385 / ISO 648: Class B limits are about twice Class A (common practice; the exact factor varies).
    for kind in glassware.KINDS:
        for c in glassware.capacities(kind):
            a, b = glassware.tolerance(kind, c, "A").mpe_ml, glassware.tolerance(kind, c, "B").mpe_ml
            assert a < b <= 2.5 * a


def test_unlisted_capacity_and_bad_class_are_refused_by_field() -> None:
    assert glassware.lookup("burette", 37.0) is None
    with pytest.raises(InvalidInput) as err:
        glassware.tolerance("burette", 37.0)
    assert err.value.errors[0].field == "capacity_ml" and "10, 25, 50" in err.value.errors[0].message
    with pytest.raises(InvalidInput) as err:
        glassware.tolerance("burette", 50.0, "C")
    assert err.value.errors[0].field == "accuracy_class"


def test_burette_fills() -> None:
    # Common practice: a titre past the capacity is a second fill; more than two is refused.
    assert glassware.burette_fills(24.9, 25.0) == 1
    assert glassware.burette_fills(25.0, 25.0) == 1
    assert glassware.burette_fills(31.2, 25.0) == 2
    with pytest.raises(InvalidInput) as err:
        glassware.burette_fills(51.0, 25.0)
    assert err.value.errors[0].field == "titre_ml" and "more than 2 fills of the 25 mL burette" in err.value.errors[0].message
