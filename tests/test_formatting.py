"""The pure formatter: value ± U, U to two significant figures and the value to the same decimal place.

The convention is JCGM 100:2008 (GUM), 7.2.6: "It usually suffices to quote uc(y) and U ... to at most
two significant digits"; "output and input estimates should be rounded to be consistent with their
uncertainties; for example, if y = 10,057 62 Ω with uc(y) = 27 mΩ, y should be rounded to 10,058 Ω".
We round U to the nearest digit (GUM 7.2.6 allows rounding up; printing the nearest is common practice
in certificates). Every expected string below is worked by hand in the comment beside it.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stockroom import formatting as fmt

# value, U, unit, k -> the text. Hand-worked: U rounded to two significant figures, the value to the same place.
VALUE_U_CASES = [
    # GUM 7.2.6's own example: y = 10.05762 Ω, uc = 27 mΩ -> 10.058 Ω.
    (10.05762, 0.027, "Ω", None, "10.058 ± 0.027 Ω"),
    # U = 0.000196 -> 0.00020 (5 decimals); 0.102137 -> 0.10214.
    (0.102137, 0.000196, "mol/L", 2, "0.10214 ± 0.00020 mol/L (k = 2)"),
    # A round value keeps its trailing zeros to U's place.
    (0.1, 0.0002, "mol/L", 2, "0.10000 ± 0.00020 mol/L (k = 2)"),
    # U = 0.000996 rounds to 0.0010 (a decade up): two figures are 1.0e-3, so 4 decimals, not 5.
    (0.10214, 0.000996, "mol/L", 2, "0.1021 ± 0.0010 mol/L (k = 2)"),
    # U = 0.00994 -> 0.0099 (4 decimals).
    (0.10214, 0.00994, "mol/L", 2, "0.1021 ± 0.0099 mol/L (k = 2)"),
    # U = 0.012 g -> 3 decimals; 1.23456 -> 1.235.
    (1.23456, 0.012, "g", None, "1.235 ± 0.012 g"),
    # U = 25.4 hPa -> 25 (0 decimals); 1013.26 -> 1013.
    (1013.26, 25.4, "hPa", None, "1013 ± 25 hPa"),
    # Large U: 1234 -> 1200 (to hundreds); 123456.7 -> 123500.
    (123456.7, 1234.0, "g", None, "123500 ± 1200 g"),
    # Very small U: 3.3e-9 -> 10 decimals; 0.000123456 -> 0.0001234560.
    (0.000123456, 3.3e-9, "mol/L", None, "0.0001234560 ± 0.0000000033 mol/L"),
    # Negative values keep their sign; one that rounds to zero reads as zero, not "-0.00000".
    (-0.00345, 0.00012, "mol/L", None, "-0.00345 ± 0.00012 mol/L"),
    (-0.000001, 0.0002, "mol/L", 2, "0.00000 ± 0.00020 mol/L (k = 2)"),
    # Non-integer coverage factors (a t-quantile, e.g. t(0.975, 4) = 2.776) to three significant figures.
    (0.10214, 0.00020, "mol/L", 2.7764, "0.10214 ± 0.00020 mol/L (k = 2.78)"),
    (0.10214, 0.00020, "mol/L", 1.96, "0.10214 ± 0.00020 mol/L (k = 1.96)"),
    (0.10214, 0.00020, "mol/L", 2.0, "0.10214 ± 0.00020 mol/L (k = 2)"),
    # No U: the value alone at the default 5 decimals; U = 0: '± 0'; U not a number: no ± at all.
    (0.102137, None, "mol/L", 2, "0.10214 mol/L"),
    (0.102137, 0.0, "mol/L", 2, "0.10214 ± 0 mol/L (k = 2)"),
    (0.102137, float("nan"), "mol/L", 2, "0.10214 mol/L"),
    (0.102137, -0.0002, "mol/L", 2, "0.10214 mol/L"),
    # No value: a dash.
    (None, 0.0002, "mol/L", 2, "—"),
    (float("nan"), 0.0002, "mol/L", 2, "—"),
    (float("inf"), 0.0002, "mol/L", 2, "—"),
]


@pytest.mark.parametrize("value,U,unit,k,expected", VALUE_U_CASES)
def test_value_u(value, U, unit, k, expected):
    assert fmt.value_u(value, U, unit, k) == expected


@pytest.mark.parametrize(
    "U,places",
    [
        (0.000196, 5),  # 2.0e-4
        (0.000996, 4),  # rounds to 1.0e-3
        (0.027, 3),  # 2.7e-2
        (9.96, 0),  # rounds to 10: "10", no decimal
        (99.6, -1),  # rounds to 1.0e2: to tens
        (1234.0, -2),  # 1.2e3: to hundreds
        (None, 4),
        (0.0, 4),
        (float("nan"), 4),
    ],
)
def test_decimals_for(U, places):
    assert fmt.decimals_for(U) == places


def test_the_molarity_the_labels_and_the_recall_text_agree():
    # One function behind every door: the label's value, the recall detail and the page filter.
    from stockroom.pdf.labels import value_text
    from stockroom.recall import molarity_text

    assert fmt.molarity(0.102137, 0.000196, 2) == "0.10214 ± 0.00020 mol/L (k = 2)"
    assert molarity_text(0.102137, 0.000196, 2) == fmt.molarity(0.102137, 0.000196, 2)
    assert value_text(0.102137, 0.000196, 2, 20.0) == "0.10214 ± 0.00020 mol/L (k = 2) at 20 °C"


@pytest.mark.parametrize(
    "call,expected",
    [
        # An assay 0.9998 with U 0.0004 (fractions): 99.98 % ± 0.040 % -> 3 decimals.
        (lambda: fmt.percent_u(0.9998, 0.0004, 2), "99.980 ± 0.040 % (k = 2)"),
        (lambda: fmt.percent_u(0.9998, None), "99.980 %"),
        # 0.0002 / 0.10214 = 0.1958 % -> 0.20 %.
        (lambda: fmt.relative(0.0002, 0.10214), "0.20 %"),
        (lambda: fmt.relative(0.0002, 0.10214, 2), "0.20 % (k = 2)"),
        (lambda: fmt.relative(0.0002, 0.0), "—"),
        # 1.23e-4 -> 0.0123 % -> 0.012 %.
        (lambda: fmt.relative_percent(1.23e-4), "0.012 %"),
        (lambda: fmt.relative_percent(0.0), "0 %"),
        # GUM 7.2.6: u(xi) = 28.05 kHz reads 28 kHz.
        (lambda: fmt.uncertainty(28.05, "kHz"), "28 kHz"),
        # GUM 7.2.6: uc = 10.47 mΩ; to the nearest digit that is 10 mΩ (the GUM allows rounding up to 11).
        (lambda: fmt.uncertainty(10.47, "mΩ"), "10 mΩ"),
        (lambda: fmt.uncertainty(0.0000837, "mol/L"), "0.000084 mol/L"),
        # Half-width 0.00009 -> 9.0e-5 -> 6 decimals.
        (lambda: fmt.interval(0.10205, 0.10223, "mol/L"), "0.102050 to 0.102230 mol/L"),
        (lambda: fmt.interval(None, 0.10223, "mol/L"), "—"),
        # A 25 mL pipette, U = 0.030 mL (k = 2): 3 decimals.
        (lambda: fmt.volume_u(25.0, 0.03, 2), "25.000 ± 0.030 mL (k = 2)"),
        (lambda: fmt.volume_u(25.0, None), "25.00 mL"),
        (lambda: fmt.temperature(20), "20.0 °C"),
        (lambda: fmt.temperature(None), "—"),
        (lambda: fmt.reference_temperature(20.0), "20 °C"),
        (lambda: fmt.reference_temperature(27.5), "27.5 °C"),
        # Bench figures to 4 significant figures: 1234.56 -> 1235; 0.0123456 (3) -> 0.0123.
        (lambda: fmt.significant(1234.56), "1235"),
        (lambda: fmt.significant(0.0123456, 3), "0.0123"),
        (lambda: fmt.significant(-0.0123456, 3), "-0.0123"),
        (lambda: fmt.significant(0.0), "0"),
        (lambda: fmt.percent(0.37, None), "37 %"),
        (lambda: fmt.percent(0.365, None), "36.5 %"),
        (lambda: fmt.percent(0.005), "0.50 %"),
        (lambda: fmt.signed_percent(0.0012, 3), "+0.120 %"),
        (lambda: fmt.signed_percent(-0.0036, 3), "-0.360 %"),
        (lambda: fmt.signed_percent(-0.000001, 3), "+0.000 %"),
        (lambda: fmt.p_value(0.01234), "p = 0.012"),
        (lambda: fmt.p_value(3e-6), "p < 0.0001"),
        # A value read to the place another U sets: U = 0.00020 -> 5 decimals.
        (lambda: fmt.value_at(0.1020534, 0.0002, "mol/L"), "0.10205 mol/L"),
        (lambda: fmt.value_at(0.0000123, 0.0000021, "mol/L", signed=True), "+0.0000123 mol/L"),
        (lambda: fmt.value_at(-0.0000123, 0.0000021, "mol/L", signed=True), "-0.0000123 mol/L"),
        (lambda: fmt.coverage(2.5706), "k = 2.57"),
    ],
)
def test_the_other_forms(call, expected):
    assert call() == expected


# ---------------------------------------------------------------------------------- properties

_PARTS = re.compile(r"^(-?\d+(?:\.(\d+))?) ± (\d+(?:\.(\d+))?) u$")


def _significant_figures(u_text: str, places: int) -> int:
    """Significant figures of a shown U; when rounded to tens or hundreds the trailing zeros only hold places."""
    digits = u_text.replace(".", "").lstrip("0")
    return len(digits) - max(0, -places)


@settings(max_examples=400, deadline=None)
@given(
    value=st.floats(min_value=-1e4, max_value=1e4, allow_nan=False),
    U=st.floats(min_value=1e-9, max_value=1e4, allow_nan=False, allow_infinity=False),
)
def test_shown_u_has_two_figures_and_the_value_its_decimals(value, U):
    text = fmt.value_u(value, U, "u")
    m = _PARTS.match(text)
    assert m, text
    value_text, value_decimals, u_text, u_decimals = m.groups()
    places = fmt.decimals_for(U)
    # U to two significant figures (GUM 7.2.6).
    assert _significant_figures(u_text, places) == 2, text
    # The value and U share their decimal places.
    assert len(value_decimals or "") == len(u_decimals or "") == max(0, places), text
    # Reading the text back gives each within half a unit of its last digit (plus float noise).
    half = 0.5 * 10.0 ** (-places)
    assert abs(float(value_text) - value) <= half * (1 + 1e-9) + 1e-12 * abs(value), text
    assert abs(float(u_text) - U) <= half * (1 + 1e-9) + 1e-12 * U, text


# ---------------------------------------------------------------------------------- the layer rule


def test_the_formatter_imports_only_the_standard_library():
    source = Path(fmt.__file__).read_text(encoding="utf-8")
    imported = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            imported |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            imported.add(node.module.split(".")[0])
    assert imported <= {"__future__", "datetime", "math", "typing"}, imported


def test_the_render_layer_never_imports_the_web_layer():
    pdf = Path(fmt.__file__).parent / "pdf"
    for path in pdf.glob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
            assert not any(n == "stockroom.web" or n.startswith("stockroom.web.") for n in names), (path.name, names)


def test_traceability_draws_nothing():
    from stockroom import traceability

    source = Path(traceability.__file__).read_text(encoding="utf-8")
    assert "<svg" not in source and "xml" not in source and not hasattr(traceability, "chain_svg")
