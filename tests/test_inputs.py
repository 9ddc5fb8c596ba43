"""Strict parsing of raw request values: what is refused and what each refusal says."""

from __future__ import annotations

import json
import math

import pytest

from stockroom.errors import InvalidInput
from stockroom.parsing import MISSING, Parser, field_path, number_problem, range_rule


@pytest.mark.parametrize(
    ("raw", "value"),
    [
        (1, 1.0),
        (0.25, 0.25),
        ("0.25", 0.25),
        (" 40.02 ", 40.02),
        ("-3", -3.0),
        (".5", 0.5),
        ("5.", 5.0),
        # JSON's own grammar allows exponents (RFC 8259 §6), so a JSON number 1e-4 is a number.
        (json.loads("1e-4"), 1e-4),
    ],
)
def test_numbers_accepted(raw, value):
    assert number_problem(raw) == (value, None)


@pytest.mark.parametrize(
    ("raw", "words"),
    [
        (True, "not true"),
        (False, "not false"),
        (math.nan, "NaN"),
        (json.loads("NaN"), "NaN"),  # Python's json reads the non-standard NaN literal
        (math.inf, "infinity"),
        (-math.inf, "infinity"),
        ("0,25", "use a point, not a comma, for the decimal sign: write 0.25"),
        (",5", "write 0.5"),
        ("1,234.5", "without commas"),
        ("nan", "finite"),
        ("Infinity", "finite"),
        ("1e-3", "plain decimal number"),
        ("abc", "plain decimal number"),
        ("0x10", "plain decimal number"),
        ([1], "not a list"),
        ({"a": 1}, "not an object"),
        (10**400, "too large"),
        ("9" * 400, "too large"),
    ],
)
def test_numbers_refused_with_a_reason(raw, words):
    value, problem = number_problem(raw)
    assert value is None
    assert words in problem


def test_range_rules_name_the_bound_and_unit():
    assert range_rule(gt=0, unit="g") == "must be greater than 0 g"
    assert range_rule(ge=5, le=40, unit="°C") == "must be between 5 and 40 °C"
    assert range_rule(gt=0, le=1) == "must be greater than 0 and at most 1"
    assert range_rule(ge=0, unit="mL") == "must be at least 0 mL"
    assert range_rule(lt=1) == "must be less than 1"
    assert range_rule() is None


def test_field_paths():
    assert field_path("replicates", 2, "mass_g") == "replicates[2].mass_g"
    assert field_path("reference", "u") == "reference.u"
    assert field_path("exclusions", 0) == "exclusions[0]"


def test_parser_collects_every_error_with_its_path():
    p = Parser()
    data = {"purity": "1,0", "replicates": [{"mass_g": 0, "volume_ml": ""}, {"mass_g": "0.8", "volume_ml": 40}]}
    assert p.number(data["purity"], "purity", gt=0, le=1) is None
    for i, rep in enumerate(data["replicates"]):
        p.number(rep.get("mass_g", MISSING), field_path("replicates", i, "mass_g"), gt=0, unit="g")
        p.number(rep.get("volume_ml", MISSING), field_path("replicates", i, "volume_ml"), gt=0, unit="mL")
    p.number(data.get("nominal_molarity", MISSING), "nominal_molarity", required=False, gt=0)
    assert not p.ok
    with pytest.raises(InvalidInput) as exc:
        p.raise_if_errors()
    assert exc.value.status == 422
    assert exc.value.fields == {
        "purity": "use a point, not a comma, for the decimal sign: write 1.0",
        "replicates[0].mass_g": "must be greater than 0 g",
        "replicates[0].volume_ml": "is required",
    }
    assert p.has_error("replicates[0]") and not p.has_error("replicates[1]")


def test_parser_containers_and_keys():
    p = Parser()
    assert p.array([1, 2], "replicates", min_items=1, max_items=50) == [1, 2]
    assert p.array(list(range(51)), "replicates", max_items=50) is None
    assert p.array([], "replicates", min_items=1) is None
    assert p.array({"a": 1}, "replicates") is None
    assert p.mapping([], "reference") is None
    p.known_keys({"titrant": "HCl", "nominal_molarty": 0.1}, {"titrant", "nominal_molarity"})
    p.known_keys({"mass": 1}, {"mass_g"}, "replicates[3]")
    fields = {e.field: e.message for e in p.errors}
    assert fields["replicates"].startswith("must be a list")  # the last error for that path
    assert fields["reference"] == "must be an object, not a list"
    assert fields["nominal_molarty"] == "is not a field of this request"
    assert "replicates[3].mass" in fields
    assert any(e.message == "must have at most 50 entries (got 51)" for e in p.errors)


def test_parser_scalars():
    p = Parser()
    assert p.integer(3, "n") == 3
    assert p.integer("12", "n") == 12
    assert p.integer(2.0, "n") == 2
    assert p.integer(2.5, "n") is None
    assert p.integer(True, "n") is None
    assert p.integer(0, "n", ge=1) is None
    assert p.boolean(MISSING, "buoyancy", default=True) is True
    assert p.boolean("off", "buoyancy", default=True) is False
    assert p.boolean(1, "buoyancy", default=True) is None
    assert p.text("  KHP ", "standard") == "KHP"
    assert p.text(12, "standard") is None
    assert p.text("", "standard") is None
    assert p.choice("new", "aliquot_of", ("new", "reference")) == "new"
    assert p.choice("old", "aliquot_of", ("new", "reference")) is None
    messages = [e.message for e in p.errors]
    assert "must be a whole number" in messages
    assert "must be at least 1" in messages
    assert "must be true or false" in messages
    assert "must be text, not int" in messages
    assert "is required" in messages
    assert "must be one of 'new', 'reference'" in messages
