"""The one typeface of every PDF stockroom makes: DejaVu Sans, embedded (subset) in each file.

The standard PDF fonts (Helvetica and the rest) know one code page: they drop the mean-volume symbol
V̄ (a combining bar), Greek beyond the Symbol font's set, and names such as Łukasiewicz or Erdős.
DejaVu Sans (regular, bold, oblique, and condensed for small labels; the Bitstream Vera licence, in fonts/LICENSE.txt) ships in
the package, so a wheel carries it, and is registered here once, when this module is imported:

    from stockroom.pdf.typeface import REGULAR, BOLD, printable
    canvas.setFont(REGULAR, 9)                      # a TrueType font name like any other
    Paragraph("<b>bold</b> and <i>oblique</i>", style_with_fontName_REGULAR)

printable(text) keeps every character the font can draw; another one loses its accent (NFKD) or
becomes '?' rather than a blank box.
"""

from __future__ import annotations

import functools
import unicodedata
from pathlib import Path
from typing import Any

from reportlab.graphics.shapes import Drawing
from reportlab.lib.fonts import addMapping
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.platypus import TableStyle

FONT_DIR = Path(__file__).resolve().parent / "fonts"
FAMILY = "DejaVuSans"  # the family name reportlab knows; <b> and <i> in paragraphs map to the faces below
REGULAR = "DejaVuSans"
BOLD = "DejaVuSans-Bold"
ITALIC = "DejaVuSans-Oblique"
# The same design, narrower, for small labels (as wide as Helvetica is, nearly).
CONDENSED = "DejaVuSansCondensed"
CONDENSED_BOLD = "DejaVuSansCondensed-Bold"
_FILES = {
    REGULAR: "DejaVuSans.ttf",
    BOLD: "DejaVuSans-Bold.ttf",
    ITALIC: "DejaVuSans-Oblique.ttf",
    CONDENSED: "DejaVuSansCondensed.ttf",
    CONDENSED_BOLD: "DejaVuSansCondensed-Bold.ttf",
}


def _register() -> None:
    registered = set(pdfmetrics.getRegisteredFontNames())
    for name, filename in _FILES.items():
        if name not in registered:
            pdfmetrics.registerFont(TTFont(name, str(FONT_DIR / filename)))
    # No bold-oblique face ships: bold wins, which keeps bold text bold.
    addMapping(FAMILY, 0, 0, REGULAR)
    addMapping(FAMILY, 1, 0, BOLD)
    addMapping(FAMILY, 0, 1, ITALIC)
    addMapping(FAMILY, 1, 1, BOLD)
    addMapping(CONDENSED, 0, 0, CONDENSED)
    addMapping(CONDENSED, 1, 0, CONDENSED_BOLD)
    addMapping(CONDENSED, 0, 1, CONDENSED)
    addMapping(CONDENSED, 1, 1, CONDENSED_BOLD)


_register()


@functools.lru_cache(maxsize=1)
def _covered() -> frozenset[int]:
    """Code points every face of the family can draw."""
    maps = [pdfmetrics.getFont(name).face.charToGlyph for name in _FILES]
    return frozenset(set(maps[0]).intersection(*maps[1:]))


def has_glyph(ch: str) -> bool:
    """Whether every face of the typeface draws the character `ch`."""
    return ord(ch) in _covered()


@functools.lru_cache(maxsize=8192)
def printable(text: str) -> str:
    """`text` with every character the typeface cannot draw replaced: by its letter without the accent
    when that exists (NFKD), else by '?'. Newlines and no-break spaces are kept."""
    if all(ch in "\n\u00a0" or has_glyph(ch) for ch in text):
        return text
    out = []
    for ch in text:
        if ch in "\n\u00a0" or has_glyph(ch):
            out.append(ch)
            continue
        base = "".join(c for c in unicodedata.normalize("NFKD", ch) if not unicodedata.combining(c))
        out.append(base if base and all(has_glyph(c) for c in base) else "?")
    return "".join(out)


def table_style(commands: list[tuple[Any, ...]]) -> TableStyle:
    """A TableStyle whose cells default to the typeface (reportlab's own default is Helvetica, which an
    empty or plain-text cell would otherwise pull into the file)."""
    return TableStyle([("FONT", (0, 0), (-1, -1), REGULAR), *commands])


def fitting_size(text: str, font: str, size: float, width_pt: float, smallest: float) -> float:
    """The largest size, from `size` down to `smallest` pt in quarter points, at which `text` is at most
    `width_pt` wide on one line (`smallest` when even that is too wide): for IDs that must not break."""
    s = size
    while s > smallest and pdfmetrics.stringWidth(text, font, s) > width_pt:
        s -= 0.25
    return max(s, smallest)


def drawing(width: float, height: float) -> Drawing:
    """A reportlab Drawing whose initial font is the typeface (the renderer's default would put
    Helvetica into the PDF even when every string names another font)."""
    d = Drawing(width, height)
    d.initialFontName = REGULAR
    return d
