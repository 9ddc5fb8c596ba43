"""The container label's layout (labels/containers/), filled with worst-case content, keeps its boxes inside
the label with the margin and the signal word with its pictograms; a container layout must show what a
container's label must carry."""

from __future__ import annotations

import dataclasses

import pytest
from test_label_boxes import MAX_SIGNAL_GAP_MM, worst_case

from stockroom.pdf import labels, layouts
from stockroom.pdf.layouts import EDGE_MARGIN_MM, inside_label

FOLDER = layouts.container_layouts_folder()
CONTAINER_LAYOUTS, BROKEN = layouts.load_all(FOLDER)
EXTRA = {
    "container_code": "NA2EDTA-2612-104-C112",
    "container_kind": "burette reservoir",
    "filled_on": "2026-12-01",
    "container_volume": "2.5 L",
    "container_expires_on": "2026-12-29",
    # The longest destination the form takes: 40 characters each for course, section and room (invented).
    "destination": "CHM 110 Analytical Chemistry Laboratory I · section Tuesday afternoon group B2 · "
    "room Science Annex 2nd floor",
}


def _content(**changes):
    return worst_case(extra=EXTRA, url="http://127.0.0.1:8000/containers/NA2EDTA-2612-104-C112", **changes)


def test_the_container_layouts_load_and_are_for_containers():
    assert not BROKEN, [str(b) for b in BROKEN]
    assert set(CONTAINER_LAYOUTS) == {"bench-bottle"}
    assert {lay.purpose for lay in CONTAINER_LAYOUTS.values()} == {"container"}
    assert "bench-bottle" not in layouts.load_all()[0]  # the batch print page never offers it


@pytest.mark.parametrize("pictograms", [("GHS03", "GHS05", "GHS07"), ("GHS05",)])
def test_container_label_boxes_stay_inside_with_the_signal_word_by_its_pictograms(pictograms):
    layout = CONTAINER_LAYOUTS["bench-bottle"]
    content = _content()
    content = labels.with_content(content, elements=dataclasses.replace(content.elements, pictograms=pictograms))
    boxes = labels.drawn_boxes(content, layout)
    for b in boxes:
        corners = b.kind in ("text", "frame")
        assert inside_label(
            b.x, b.y, b.width, b.height, layout.label_width, layout.label_height, layout.corner_radius, corners=corners
        ), f"{b} comes within {EDGE_MARGIN_MM} mm of the label's edge"
    signal = [b for b in boxes if b.field == "signal" and b.kind == "text"]
    marks = [b for b in boxes if b.kind == "pictogram"]
    assert len(marks) == len(pictograms)
    assert min(s.gap_to(p) for s in signal for p in marks) <= MAX_SIGNAL_GAP_MM


def test_container_label_prints_its_own_facts_whole():
    fits = {f.field: f for f in labels.fit_report(_content(), CONTAINER_LAYOUTS["bench-bottle"])}
    assert " ".join(fits["certified"].lines) == "0.10214 ± 0.00020 mol/L (k = 2.57) at 20 °C"
    assert " ".join(fits["code"].lines) == "NA2EDTA-2612-104-C112"
    assert " ".join(fits["filled"].lines) == "Filled 2026-12-01 · 2.5 L · burette reservoir"
    assert " ".join(fits["expiry"].lines) == "Use by 2026-12-29"
    assert "section Tuesday afternoon group B2" in " ".join(fits["destination"].lines)


def test_a_container_layout_must_show_the_destination():
    text = (FOLDER / "bench-bottle.toml").read_text(encoding="utf-8")
    broken = text.replace('text = "For {destination}"', 'text = "For the bench"')
    assert broken != text
    with pytest.raises(layouts.LayoutError) as err:
        layouts.parse_layout("bench-bottle", broken)
    assert "{destination}" in str(err.value)
    wrong = text.replace('purpose = "container"', 'purpose = "bottle"')
    with pytest.raises(layouts.LayoutError) as err:
        layouts.parse_layout("bench-bottle", wrong)
    assert "purpose" in str(err.value)
