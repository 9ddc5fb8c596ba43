"""Every label layout in labels/, filled with worst-case content, keeps what it draws inside the label with
a margin, the signal word beside its pictograms, and each figure with its unit. The boxes come from the
layout engine (stockroom.pdf.labels.drawn_boxes: the same placement the painter uses)."""

from __future__ import annotations

import re

import pytest

from stockroom.hazards import LabelElements
from stockroom.pdf import labels, layouts
from stockroom.pdf.layouts import EDGE_MARGIN_MM, inside_label
from stockroom.policy import Status

LAYOUTS, BROKEN = layouts.load_all()
MAX_SIGNAL_GAP_MM = 3.0  # the signal word reads with its pictograms: next to them, not across the label

H_TWO = (("H290", "May be corrosive to metals."), ("H314", "Causes severe skin burns and eye damage."))
P_SIX = (
    ("P234", "Keep only in original packaging."),
    ("P260", "Do not breathe mist or vapours."),
    ("P280", "Wear protective gloves, protective clothing, eye protection and face protection."),
    ("P303+P361+P353", "IF ON SKIN (or hair): Take off immediately all contaminated clothing. Rinse skin with water."),
    (
        "P305+P351+P338",
        "IF IN EYES: Rinse cautiously with water for several minutes. Remove contact lenses, if present and easy "
        "to do. Continue rinsing.",
    ),
    ("P310", "Immediately call a POISON CENTER/doctor."),
)


def worst_case(pictograms: tuple[str, ...] = ("GHS03", "GHS05", "GHS07"), **changes) -> labels.LabelContent:
    """The longest content a label is meant to take (invented): a long batch ID and reagent name, an
    80-character accented name, a value with a three-figure k, three pictograms, six P statements."""
    content = labels.LabelContent(
        batch_id="NA2EDTA-2612-104",
        reagent="Ammonium cerium(IV) sulfate",
        formula="(NH4)4Ce(SO4)4",
        nominal="0.1 mol/L",
        certified=labels.value_text(0.102143, 0.000204, 2.57, 20.0),
        released=True,
        standardized_on="2026-12-01",
        released_on="2026-12-01",
        expires_on="2027-03-01",
        prepared_on="2026-11-28",
        prepared_by="Zoë Łukasiewicz-Nuñez Erdős-Müller van der Berg-Abernathy, senior technician"[:80],
        elements=LabelElements("Danger", pictograms, H_TWO, P_SIX, classification=None),  # type: ignore[arg-type]
        url="http://127.0.0.1:8000/batches/NA2EDTA-2612-104",
        printed_on="2026-12-02",
        institution="Département de Chimie, Łódź Prep Room (invented)",
    )
    return labels.with_content(content, **changes)


CASES = {
    "three pictograms": worst_case(),
    "one pictogram": worst_case(("GHS05",)),
    "not for use": worst_case(released=False, certified=labels.not_for_use_text(Status.AWAITING)),
}


def test_every_layout_loads():
    assert not BROKEN, [str(b) for b in BROKEN]
    assert len(LAYOUTS) >= 5


@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("name", sorted(LAYOUTS))
def test_everything_drawn_stays_inside_the_label_with_the_margin(name, case):
    layout = LAYOUTS[name]
    boxes = labels.drawn_boxes(CASES[case], layout)
    assert {b.kind for b in boxes} >= {"text", "qr", "pictogram"}
    for b in boxes:
        # Text ink and frames also keep clear of the rounded corners; QR codes and pictograms have blank
        # corners of their own (the quiet zone; the diamond's white corners).
        corners = b.kind in ("text", "frame")
        assert inside_label(
            b.x, b.y, b.width, b.height, layout.label_width, layout.label_height, layout.corner_radius, corners=corners
        ), f"{name}: {b} comes within {EDGE_MARGIN_MM} mm of the label's edge"


@pytest.mark.parametrize("case", sorted(CASES))
@pytest.mark.parametrize("name", sorted(LAYOUTS))
def test_the_signal_word_sits_with_its_pictograms(name, case):
    boxes = labels.drawn_boxes(CASES[case], LAYOUTS[name])
    signal = [b for b in boxes if "{signal_word}" in LAYOUTS[name].field(b.field).text and b.kind == "text"]
    pictograms = [b for b in boxes if b.kind == "pictogram"]
    assert signal and len(pictograms) == len(CASES[case].elements.pictograms)
    gap = min(s.gap_to(p) for s in signal for p in pictograms)
    assert gap <= MAX_SIGNAL_GAP_MM, f"{name}: the signal word is {gap:.1f} mm from the nearest pictogram"


@pytest.mark.parametrize("name", sorted(LAYOUTS))
def test_a_figure_never_loses_its_unit_to_a_line_break(name):
    fits = {f.field: f for f in labels.fit_report(CASES["three pictograms"], LAYOUTS[name])}
    lines = [ln for f in fits.values() for ln in f.lines]
    for line in lines:
        # A unit at the start of a line has been parted from its figure.
        assert not re.match(r"(°C|mol/L|mL|%|nominal)", line.strip()), f"{name}: {line!r}"
    value = " ".join(fits["certified"].lines)
    assert "0.10214 ± 0.00020 mol/L (k = 2.57) at 20 °C" == value
    for line in fits["certified"].lines:
        assert ("°C" not in line or re.search(r"\d °C", line)) and ("mol/L" not in line or re.search(r"\d mol/L", line))


def test_the_engine_prefers_a_smaller_size_to_breaking_a_figure_from_its_unit():
    # At 9 pt, 30 mm holds "0.10214 ± 0.00020" but not "0.00020 mol/L" after it: the line breaks at a
    # space, and "mol/L" stays with "0.00020" (a no-break space), never on a line of its own.
    text = labels._fill(
        layouts.Field("v", "text", 0, 0, 30, 10, text="{certified}"),
        labels.placeholder_values(worst_case(), 1),
    )
    fit = labels.fit_text("v", text, LAYOUTS["bottle"].font_bold, 9, 4.5, 30 * 2.8346, 10 * 2.8346, 1.15)
    assert fit is not None
    assert all(not ln.startswith(("mol/L", "°C")) for ln in fit.lines), fit.lines
    assert any(ln.endswith("mol/L") for ln in fit.lines), fit.lines


def test_a_box_closer_than_the_margin_to_the_edge_is_refused():
    text = (layouts.layouts_folder() / "bottle.toml").read_text(encoding="utf-8")
    moved = text.replace("box_mm = [3, 62.6, 70, 5]", "box_mm = [0.5, 62.6, 70, 5]")
    assert moved != text
    with pytest.raises(layouts.LayoutError) as err:
        layouts.parse_layout("bottle", moved)
    assert "[[field]] regulations: box_mm" in str(err.value) and "closer than 1 mm" in str(err.value)


def test_a_shorter_form_must_keep_what_a_label_must_show():
    text = (layouts.layouts_folder() / "sheet-letter-30.toml").read_text(encoding="utf-8")
    broken = text.replace('shorter = "{reagent}, {nominal}"', 'shorter = "{formula}"')
    assert broken != text
    with pytest.raises(layouts.LayoutError) as err:
        layouts.parse_layout("sheet-letter-30", broken)
    assert "{reagent}" in str(err.value) and "{nominal}" in str(err.value)


def test_a_long_reagent_name_falls_back_to_the_shorter_form_on_small_sheets():
    fits = {f.field: f for f in labels.fit_report(worst_case(), LAYOUTS["sheet-letter-30"])}
    assert fits["reagent"].lines == ("Ammonium cerium(IV) sulfate, 0.1 mol/L",)
    short = {
        f.field: f for f in labels.fit_report(worst_case(reagent="Sodium hydroxide", formula="NaOH"), LAYOUTS["sheet-letter-30"])
    }
    assert short["reagent"].lines == ("Sodium hydroxide NaOH, 0.1 mol/L",)
