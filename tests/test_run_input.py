"""stockroom.run_input: the one reading of a run that every door uses (form, CSV, JSON API, preview).

The limits are the prep room's rules (common practice, see the comments on run_input.Limits); the
tests pin each one at its edge, both sides, and the names the errors carry.
"""

from __future__ import annotations

import copy
import datetime as dt

import pytest

from stockroom import run_input
from stockroom.errors import InvalidInput
from stockroom.run_input import LIMITS, ReplicateInput

TODAY = dt.date(2026, 3, 10)
PREPARED = dt.date(2026, 3, 1)


def primary(**top):
    data = {
        "method": "primary",
        "purpose": "certify",
        "performed_on": "2026-03-09",
        "analyst": "A. Person",
        "burette_capacity_ml": 50,
        "standard_lot_id": 3,
        "replicates": [
            {"gross_g": 12.4581, "tare_g": 11.6402, "initial_ml": 0.12, "final_ml": 40.21},
            {"mass_g": "0.8226", "initial_ml": "0.40", "final_ml": "40.73", "blank_ml": 0.03, "temperature_c": 21.5},
            {"gross_g": 11.9012, "tare_g": 11.0759, "initial_ml": 0.05, "final_ml": 40.50, "exclude_reason": "overshot"},
        ],
    }
    data.update(top)
    return data


def secondary(**top):
    data = {
        "method": "secondary",
        "purpose": "certify",
        "performed_on": "2026-03-09",
        "analyst": "A. Person",
        "burette_capacity_ml": "25.0",
        "reference_batch": "NAOH-0001",
        "pipette_id": 7,
        "replicates": [{"aliquot_ml": 20, "initial_ml": 0.1, "final_ml": 20.05}],
    }
    data.update(top)
    return data


def errors_of(data):
    with pytest.raises(InvalidInput) as info:
        run_input.parse_run(data, today=TODAY, prepared_on=PREPARED)
    return {e.field: e.message for e in info.value.errors}


def with_rep(data, i, **changes):
    data = copy.deepcopy(data)
    for k, v in changes.items():
        if v is KeyError:
            data["replicates"][i].pop(k, None)
        else:
            data["replicates"][i][k] = v
    return data


def test_a_good_primary_run_reads_whole():
    run = run_input.parse_run(primary(temperature_c="20.5", balance_id=4), today=TODAY, prepared_on=PREPARED)
    assert run.method == "primary" and run.purpose == "certify" and run.performed_on == dt.date(2026, 3, 9)
    assert run.burette_capacity_ml == 50.0 and run.standard_lot_id == 3 and run.reference_batch is None
    assert run.instruments == {"balance": 4}
    assert dict(run.exclusions) == {3: "overshot"}
    first, second, _ = run.replicates
    assert first == ReplicateInput(
        volume_ml=40.09, initial_ml=0.12, final_ml=40.21, temperature_c=20.5, gross_g=12.4581, tare_g=11.6402
    )
    # A replicate's own temperature wins over the run's; text numbers read like JSON numbers.
    assert second.mass_g == 0.8226 and second.blank_ml == 0.03 and second.temperature_c == 21.5
    assert first.stored() == {
        "mass_gross_g": 12.4581,
        "mass_tare_g": 11.6402,
        "initial_ml": 0.12,
        "final_ml": 40.21,
        "volume_ml": 40.09,
        "blank_ml": 0.0,
        "temperature_c": 20.5,
    }
    with pytest.raises(AttributeError):
        run.analyst = "someone else"  # type: ignore[misc]  (frozen)


def test_a_good_secondary_run_reads_whole():
    run = run_input.parse_run(secondary(), today=TODAY, prepared_on=PREPARED)
    assert run.reference_batch == "NAOH-0001" and run.standard_lot_id is None
    assert run.instruments == {"pipette": 7}
    assert run.replicates[0].aliquot_ml == 20.0 and run.replicates[0].volume_ml == pytest.approx(19.95)


# (change to replicate 0, field, words): each limit of the table at its edge. Common practice.
REPLICATE_LIMITS = [
    ({"mass_g": LIMITS.min_mass_g, "gross_g": KeyError, "tare_g": KeyError}, None, None),
    ({"mass_g": 0.00099, "gross_g": KeyError, "tare_g": KeyError}, "mass_g", "must be between 0.001 and 50 g"),
    ({"mass_g": LIMITS.max_mass_g, "gross_g": KeyError, "tare_g": KeyError}, None, None),
    ({"mass_g": 50.001, "gross_g": KeyError, "tare_g": KeyError}, "mass_g", "must be between 0.001 and 50 g"),
    ({"gross_g": 1000.0, "tare_g": 999.5}, None, None),
    ({"gross_g": 1000.1, "tare_g": 999.5}, "gross_g", "must be greater than 0 g and at most 1000 g"),
    ({"tare_g": -0.1}, "tare_g", "must be between 0 and 1000 g"),
    ({"gross_g": 71.6402}, "gross_g", "outside 0.001–50 g: check the unit"),
    ({"gross_g": 11.6402}, "gross_g", "heavier than the tare"),
    ({"tare_g": KeyError}, "tare_g", "is required"),
    ({"mass_g": 0.8}, "mass_g", "not both"),
    ({"gross_g": KeyError, "tare_g": KeyError}, "mass_g", "is required"),
    ({"final_ml": 50.0}, None, None),
    ({"final_ml": 50.01}, "final_ml", "beyond the scale of the 50 mL burette"),
    ({"initial_ml": -0.01}, "initial_ml", "must be at least 0 mL"),
    ({"final_ml": 0.12}, "final_ml", "must be greater than the initial reading (0.12 mL)"),
    ({"final_ml": 0.1205}, "final_ml", "must be greater than the initial reading"),
    ({"final_ml": 0.121}, None, None),  # a titre of exactly min_volume_ml (0.001 mL) is read
    ({"blank_ml": LIMITS.max_blank_ml}, None, None),
    ({"blank_ml": 5.01}, "blank_ml", "must be between 0 and 5 mL"),
    ({"blank_ml": -0.01}, "blank_ml", "must be between 0 and 5 mL"),
    ({"final_ml": 4.12, "blank_ml": 4.0}, "blank_ml", "smaller than the titre (4 mL)"),
    ({"temperature_c": 5}, None, None),
    ({"temperature_c": 4.9}, "temperature_c", "must be between 5 and 40 °C"),
    ({"temperature_c": 40}, None, None),
    ({"temperature_c": 40.1}, "temperature_c", "must be between 5 and 40 °C"),
    ({"exclude_reason": ""}, "exclude_reason", "say why"),
    ({"exclude_reason": "x" * LIMITS.max_reason}, None, None),
    ({"exclude_reason": "x" * (LIMITS.max_reason + 1)}, "exclude_reason", "at most 500 characters"),
    ({"final_ml": "40,21"}, "final_ml", "not a comma"),
    ({"final_ml": True}, "final_ml", "not true"),
    ({"colour": "pink"}, "colour", "is not a field of this request"),
    ({"aliquot_ml": 25}, "aliquot_ml", "is not a field of a replicate of a run against a primary standard"),
    ({"volume_ml": 40}, "volume_ml", "is not a field"),  # only the preview takes a titre without readings
]


@pytest.mark.parametrize(("change", "field", "words"), REPLICATE_LIMITS, ids=[repr(c[0])[:50] for c in REPLICATE_LIMITS])
def test_each_replicate_limit(change, field, words):
    data = with_rep(primary(), 0, **change)
    if field is None:
        run_input.parse_run(data, today=TODAY, prepared_on=PREPARED)
        return
    errors = errors_of(data)
    assert list(errors) == [f"replicates[0].{field}"], errors
    assert words in errors[f"replicates[0].{field}"]


SECONDARY_LIMITS = [
    ({"aliquot_ml": LIMITS.max_aliquot_ml}, None, None),
    ({"aliquot_ml": 500.5}, "aliquot_ml", "must be between 0.001 and 500 mL"),
    ({"aliquot_ml": 0.0009}, "aliquot_ml", "must be between 0.001 and 500 mL"),
    ({"aliquot_ml": KeyError}, "aliquot_ml", "is required"),
    ({"final_ml": 25.5}, "final_ml", "beyond the scale of the 25 mL burette"),
    ({"mass_g": 0.8}, "mass_g", "is not a field of a replicate of a run against a certified titrant batch"),
]


@pytest.mark.parametrize(("change", "field", "words"), SECONDARY_LIMITS, ids=[repr(c[0]) for c in SECONDARY_LIMITS])
def test_each_secondary_replicate_limit(change, field, words):
    data = with_rep(secondary(), 0, **change)
    if field is None:
        run_input.parse_run(data, today=TODAY, prepared_on=PREPARED)
        return
    errors = errors_of(data)
    assert words in errors[f"replicates[0].{field}"], errors


TOP_LIMITS = [
    ({"burette_capacity_ml": 100}, None, None),
    ({"burette_capacity_ml": 30}, "burette_capacity_ml", "one of the burette sizes offered: 10, 25, 50, 100 mL"),
    ({"burette_capacity_ml": 250}, "burette_capacity_ml", "must be greater than 0 mL and at most 100 mL"),
    ({"temperature_c": 4.99}, "temperature_c", "must be between 5 and 40 °C"),
    ({"analyst": "x" * LIMITS.max_analyst}, None, None),
    ({"analyst": "x" * (LIMITS.max_analyst + 1)}, "analyst", "at most 120 characters"),
    ({"analyst": "  "}, "analyst", "is required"),
    ({"endpoint": "x" * (LIMITS.max_endpoint + 1)}, "endpoint", "at most 200 characters"),
    ({"notes": "x" * LIMITS.max_notes}, None, None),
    ({"notes": "x" * (LIMITS.max_notes + 1)}, "notes", "at most 2000 characters"),
    ({"purpose": "release"}, "purpose", "must be one of 'certify', 'recheck'"),
    ({"method": "tertiary"}, "method", "must be one of 'primary', 'secondary'"),
    ({"performed_on": "2026-03-10"}, None, None),
    ({"performed_on": "2026-03-11"}, "performed_on", "cannot be later than 2026-03-10"),
    ({"performed_on": "2026-03-01"}, None, None),
    ({"performed_on": "2026-02-28"}, "performed_on", "cannot be earlier than 2026-03-01, when the batch was prepared"),
    ({"performed_on": "9 March"}, "performed_on", "write it as YYYY-MM-DD"),
    ({"performed_on": "2026-02-30"}, "performed_on", "write it as YYYY-MM-DD"),
    ({"standard_lot_id": 0}, "standard_lot_id", "at least 1"),
    ({"standard_lot_id": "lot 3"}, "standard_lot_id", "whole number"),
    ({"balance_id": "x"}, "balance_id", "whole number"),
    ({"pipette_id": 2}, "pipette_id", "is not a field of a run against a primary standard"),
    ({"reference_batch": "NAOH-0001"}, "reference_batch", "is not a field of a run against a primary standard"),
    ({"colour": "pink"}, "colour", "is not a field of this request"),
    ({"replicates": []}, "replicates", "enter at least one replicate"),
    ({"replicates": {"mass_g": 1}}, "replicates", "must be a list"),
    ({"replicates": ["oops"]}, "replicates[0]", "must be an object"),
]


@pytest.mark.parametrize(("change", "field", "words"), TOP_LIMITS, ids=[repr(c[0])[:50] for c in TOP_LIMITS])
def test_each_run_limit(change, field, words):
    data = primary(**change)
    if field is None:
        run_input.parse_run(data, today=TODAY, prepared_on=PREPARED)
        return
    errors = errors_of(data)
    assert field in errors, errors
    assert words in errors[field]


def test_max_replicates():
    rep = primary()["replicates"][0]
    run_input.parse_run(primary(replicates=[rep] * LIMITS.max_replicates), today=TODAY, prepared_on=PREPARED)
    errors = errors_of(primary(replicates=[rep] * (LIMITS.max_replicates + 1)))
    assert errors == {"replicates": "must have at most 50 entries (got 51)"}


def test_a_reference_code_is_at_most_40_characters():
    assert "at most 40 characters" in errors_of(secondary(reference_batch="N" * 41))["reference_batch"]


def test_every_error_is_collected_and_raised_once():
    data = with_rep(primary(analyst="", colour=1), 1, final_ml="abc", blank_ml=9)
    data = with_rep(data, 2, temperature_c=99)
    assert set(errors_of(data)) == {
        "analyst",
        "colour",
        "replicates[1].final_ml",
        "replicates[1].blank_ml",
        "replicates[2].temperature_c",
    }


def test_the_body_must_be_an_object():
    with pytest.raises(InvalidInput) as info:
        run_input.parse_run(["not", "a", "run"], today=TODAY)
    assert info.value.errors[0].field == "_body"


# ---------------------------------------------------------------- paths <-> form fields

PATHS = [
    ("replicates[2].final_ml", "r3_final_ml"),
    ("replicates[0].gross_g", "r1_gross_g"),
    ("replicates[11].exclude_reason", "r12_exclude_reason"),
    ("analyst", "analyst"),
    ("burette_capacity_ml", "burette_capacity_ml"),
    ("standard_lot_id", "standard_lot_id"),
    ("burette_id", "burette_id"),
]


@pytest.mark.parametrize(("path", "name"), PATHS)
def test_path_and_form_name_map_both_ways(path, name):
    assert run_input.form_name(path) == name
    assert run_input.request_path(name) == path


def test_paths_the_form_has_no_field_for():
    # The science core's titre and a whole replicate land on the row's readings; "replicates" on row 1.
    assert run_input.form_name("replicates[1].volume_ml") == "r2_final_ml"
    assert run_input.form_name("replicates[1]") == "r2_initial_ml"
    assert run_input.form_name("replicates") == "r1_initial_ml"
    assert run_input.request_path("r2_exclude") == "replicates[1].exclude_reason"
    assert run_input.request_path("r0_final_ml") == "r0_final_ml"  # rows start at 1
    assert run_input.form_name("replicates[1].final_ml", rows=[1, 4]) == "r4_final_ml"


LABELLED = [
    ("replicates[2].final_ml", None, "Replicate 3, final reading"),
    ("replicates[0].gross_g", None, "Replicate 1, gross weighing"),
    ("replicates[1].blank_ml", [2, 5], "Replicate 5, blank"),
    ("replicates[3]", None, "Replicate 4"),
    ("performed_on", None, "Titrated on"),
    ("standard_lot_id", None, "Primary-standard lot"),
    ("burette_id", None, "Burette used"),
]


@pytest.mark.parametrize(("path", "rows", "text"), LABELLED)
def test_errors_are_named_as_the_form_labels_read(path, rows, text):
    assert run_input.label(path, rows) == text


def test_from_form_skips_blank_rows_and_keeps_the_typed_text():
    form = {
        "csrf_token": "t",
        "action": "record",
        "purpose": "certify",
        "analyst": "A. Person",
        "notes": "",
        "r1_gross_g": "12.4581",
        "r1_tare_g": "11.6402",
        "r1_initial_ml": "0.12",
        "r1_final_ml": "40.21",
        "r2_initial_ml": " ",
        "r2_exclude_reason": "ignored: the box is not ticked and the row is blank",
        "r3_mass_g": "0.8226",
        "r3_initial_ml": "0.40",
        "r3_final_ml": "40.73",
        "r3_exclude": "on",
        "r3_exclude_reason": "overshot",
    }
    data = run_input.from_form(form)
    assert data == {
        "purpose": "certify",
        "analyst": "A. Person",
        "replicates": [
            {"gross_g": "12.4581", "tare_g": "11.6402", "initial_ml": "0.12", "final_ml": "40.21"},
            {"mass_g": "0.8226", "initial_ml": "0.40", "final_ml": "40.73", "exclude_reason": "overshot"},
        ],
    }
    assert run_input.from_form_rows(form) == [1, 3]
    # And back: the JSON-shaped data fills the grid (replicate i in row i + 1).
    assert run_input.to_form(data) == {
        "purpose": "certify",
        "analyst": "A. Person",
        "r1_gross_g": "12.4581",
        "r1_tare_g": "11.6402",
        "r1_initial_ml": "0.12",
        "r1_final_ml": "40.21",
        "r2_mass_g": "0.8226",
        "r2_initial_ml": "0.40",
        "r2_final_ml": "40.73",
        "r2_exclude": "on",
        "r2_exclude_reason": "overshot",
    }


def test_form_errors_are_named_by_field_and_label():
    data = with_rep(primary(), 1, final_ml=0.2)
    with pytest.raises(InvalidInput) as info:
        run_input.parse_run(data, today=TODAY, prepared_on=PREPARED)
    assert run_input.form_errors(info.value.errors, rows=[1, 3, 4]) == [
        ("r3_final_ml", "Replicate 3, final reading", "the final reading must be greater than the initial reading (0.4 mL)")
    ]


def test_the_module_is_pure():
    # Its imports: the standard library, the error types, the request-value parser and the pure science
    # core's table of checks that may be overridden, and the pure end-point locator a curve is read by
    # (stockroom/parsing.py in turn imports only the error types).
    import ast
    import pathlib

    root = pathlib.Path(run_input.__file__).parent
    for name, allowed in (
        ("run_input", {"stockroom.errors", "stockroom.parsing", "stockroom.standardization", "stockroom.endpoints"}),
        ("parsing", {"stockroom.errors"}),
    ):
        tree = ast.parse((root / f"{name}.py").read_text())
        imported = {n.name for node in ast.walk(tree) if isinstance(node, ast.Import) for n in node.names}
        imported |= {node.module or "" for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)}
        ours = {m for m in imported if m.startswith("stockroom")}
        assert ours <= allowed, (name, ours)
        assert not {m for m in imported if m.split(".")[0] in ("flask", "sqlite_utils", "sqlite3", "werkzeug")}, name
