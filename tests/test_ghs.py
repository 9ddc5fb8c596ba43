"""The GHS pictograms drawn in vector form: rendered to pixels and checked against what the GHS requires.

UN GHS (Rev. 9, 1.4.10.5.2, from memory): a pictogram is a black symbol on a white background inside a
red square frame set on a point, the frame wide enough to be clearly visible.
"""

from __future__ import annotations

import io
import shutil
import subprocess
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from PIL import Image
from reportlab.graphics import renderPDF
from reportlab.lib.units import mm
from reportlab.pdfgen.canvas import Canvas

from stockroom.pdf import ghs

SIDE_MM = 40.0
DPI = 100


def _render(code: str) -> Image.Image:
    if shutil.which("pdftoppm") is None:
        pytest.skip("pdftoppm (poppler-utils) is not installed")
    buf = io.BytesIO()
    c = Canvas(buf, pagesize=(SIDE_MM * mm, SIDE_MM * mm))
    renderPDF.draw(ghs.pictogram(code, SIDE_MM * mm), c, 0, 0)
    c.showPage()
    c.save()
    with tempfile.TemporaryDirectory() as tmp:
        pdf = Path(tmp) / "p.pdf"
        pdf.write_bytes(buf.getvalue())
        subprocess.run(
            ["pdftoppm", "-r", str(DPI), "-png", "-singlefile", str(pdf), str(Path(tmp) / "p")],
            capture_output=True,
            check=True,
            timeout=60,
        )
        return Image.open(Path(tmp) / "p.png").convert("RGB")


def _kind(rgb: tuple[int, int, int]) -> str:
    r, g, b = rgb
    if r > 170 and g < 80 and b < 80:
        return "red"
    if r < 70 and g < 70 and b < 70:
        return "black"
    if r > 200 and g > 200 and b > 200:
        return "white"
    return "other"


@pytest.mark.parametrize("code", ghs.available())
def test_each_pictogram_is_a_black_symbol_on_white_in_a_red_diamond(code):
    im = _render(code)
    w, h = im.size
    px = im.load()
    # Outside the diamond (the corners of its square) the page stays white.
    for x, y in ((2, 2), (w - 3, 2), (2, h - 3), (w - 3, h - 3)):
        assert _kind(px[x, y]) == "white", (code, x, y)
    # Just inside each of the four points of the diamond: the red frame.
    inset = max(2, int(w * 0.03))
    for x, y in ((w // 2, inset), (w // 2, h - 1 - inset), (inset, h // 2), (w - 1 - inset, h // 2)):
        assert _kind(px[x, y]) == "red", (code, x, y, px[x, y])
    kinds = {"red": 0, "black": 0, "white": 0, "other": 0}
    centre = {"black": 0, "white": 0}
    for y in range(h):
        for x in range(w):
            k = _kind(px[x, y])
            kinds[k] += 1
            if abs(x - w / 2) + abs(y - h / 2) < 0.3 * w and k in centre:
                centre[k] += 1
    total = w * h
    # Frame 6 % of the diagonal: red covers 1 - (1 - 0.06 * 2 ** 0.5 * 2) ** 2 of the diamond, half the
    # square: about 15 % of the picture; a clearly visible frame, not a hairline.
    assert 0.12 < kinds["red"] / total < 0.19, (code, kinds)
    # The symbol is black and sits on white inside the frame.
    assert centre["black"] > 0.05 * sum(centre.values()), (code, centre)
    assert centre["white"] > 0.3 * sum(centre.values()), (code, centre)


def test_the_symbols_differ_from_each_other():
    pictures = {code: _render(code).convert("1") for code in ghs.available()}
    codes = list(pictures)
    for i, a in enumerate(codes):
        for b in codes[i + 1 :]:
            pa, pb = pictures[a].load(), pictures[b].load()
            w, h = pictures[a].size
            differ = sum(1 for y in range(h) for x in range(w) if pa[x, y] != pb[x, y])
            assert differ > 0.03 * w * h, (a, b)


def test_the_corrosion_and_exclamation_pictograms_are_drawn():
    # The two a titrant label needs (GHS05 for corrosive and metal-corrosive solutions, GHS07 for irritants).
    assert {"GHS05", "GHS07"} <= set(ghs.available())
    assert ghs.name("GHS05") == "corrosion"
    with pytest.raises(KeyError):
        ghs.group("GHS06")


def test_svg_is_a_square_svg_document():
    text = ghs.svg("GHS05", 64)
    root = ET.fromstring(text)
    assert root.tag.endswith("svg")
    assert float(root.get("width", "0").rstrip("px")) == 64
    assert float(root.get("height", "0").rstrip("px")) == 64
