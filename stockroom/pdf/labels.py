"""Batch labels as PDF: N copies of a batch's label on a layout, from a start position on a partly used sheet.

    content = label_content(db, config, batch, on)            # what the label says (from the records)
    pdf = build_labels(content, layout, copies=30, start=4, first_serial=101)
    fit_report(content, layout, serial=101)                   # every field's text width against its box

A label shows the certified value in force on the day of printing, or, when there is none, no value
and NOT FOR USE with the reason. Text that would overflow its box is set smaller (down to the field's
minimum size), then wrapped; it is never clipped. When the text cannot fit even so, LabelOverflow
names the field, and nothing prints: a label must not lose a hazard statement to a small box. The
precautionary statements alone fall back to their codes (with a pointer to the safety data sheet)
before that happens.

The second half gathers what a label says from the records (the hazard classifications come from
records.hazard_data) and prints it, taking its serials from the print register (records.label_prints).
"""

from __future__ import annotations

import datetime as dt
import functools
import io
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from dataclasses import field as dc_field
from typing import Any
from urllib.parse import quote

import sqlite_utils
from reportlab.graphics import renderPDF
from reportlab.graphics.barcode.qr import QrCodeWidget
from reportlab.graphics.shapes import Drawing
from reportlab.lib import colors
from reportlab.lib.units import mm
from reportlab.pdfbase.pdfmetrics import getAscentDescent, stringWidth
from reportlab.pdfgen.canvas import Canvas

from stockroom import chemistry, formatting, hazards, readmodel, records
from stockroom import db as dbmod
from stockroom.errors import Conflict, FieldError, InvalidInput, StockroomError
from stockroom.hazards import LabelElements
from stockroom.pdf import ghs, typeface
from stockroom.pdf.layouts import Field, Layout
from stockroom.policy import Status, release_in_force, status_on

NBSP = "\u00a0"
DASH = "—"
QR_LEVEL = "M"  # error correction M (about 15 % of the code may be damaged and still read)
MAX_COPIES = 200
REGULATIONS = (
    "Follow the safety data sheet, local regulations and your institution's chemical hygiene plan; "
    "they take precedence over this label."
)
REGULATIONS_SHORT = "Follow the SDS, local regulations and your chemical hygiene plan."
NOT_FOR_USE = "NOT FOR USE"
_NOT_FOR_USE_WHY = {
    Status.AWAITING: "awaiting standardization",
    Status.EXPIRED: "expired",
    Status.WITHDRAWN: "withdrawn",
}
_SIZE_STEP = 0.25  # pt
_SHRINK_BEFORE_WRAP = 0.8  # a line is first set down to 80 % of its size; below that, wrapping reads better
_FRAME_PAD_MM = 0.9
_OUTLINE_GREY = colors.Color(0.6, 0.6, 0.6)
_EPS = 1e-6


class LabelOverflow(StockroomError):
    """A field's text cannot fit its box even at the field's minimum size, wrapped."""

    status = 422

    def __init__(self, layout: str, field: str, size_pt: float):
        self.layout = layout
        self.field = field
        super().__init__(
            f"the {field.replace('_', ' ')} text does not fit its box on layout {layout!r} even at "
            f"{size_pt:g} pt; choose a larger layout"
        )


# ---------------------------------------------------------------- what a label says


@dataclass(frozen=True)
class LabelContent:
    """Everything one batch's labels print; the same on every copy except the serial. Dates ISO."""

    batch_id: str
    reagent: str
    formula: str
    nominal: str
    certified: str
    released: bool
    standardized_on: str
    released_on: str
    expires_on: str
    prepared_on: str
    prepared_by: str
    elements: LabelElements
    url: str
    printed_on: str
    release_id: int | None = None
    regulations: str = REGULATIONS
    institution: str = ""  # setting INSTITUTION_NAME; empty prints nothing
    # A container's own values (container_code, filled_on, destination...) on a container label; empty on a batch's.
    extra: Mapping[str, str] = dc_field(default_factory=dict)


def value_text(molarity: float, U: float, k: float, reference_temperature_c: float) -> str:
    """The certified value as labels print it: '0.10214 ± 0.00020 mol/L (k = 2) at 20 °C' (mol/L, °C)."""
    return f"{formatting.molarity(molarity, U, k)} at {formatting.reference_temperature(reference_temperature_c)}"


def not_for_use_text(status: Status) -> str:
    """'NOT FOR USE — awaiting standardization' (or expired, withdrawn) for a batch with no value in force."""
    return f"{NOT_FOR_USE} {DASH} {_NOT_FOR_USE_WHY.get(status, 'no certified value in force')}"


# Where QR codes point when neither BASE_URL nor a request says (printing from the command line).
FALLBACK_BASE_URL = "http://127.0.0.1:8000"


def qr_base_url(configured: str | None, request_root: str | None = None) -> str:
    """The address a label's QR code starts with: BASE_URL when set, else the address the person
    printing reached (the request's scheme, host and port), else FALLBACK_BASE_URL."""
    for candidate in (configured, request_root):
        if candidate and str(candidate).strip():
            return str(candidate).strip()
    return FALLBACK_BASE_URL


def batch_url(base_url: str, code: str) -> str:
    """The batch page's address, as the QR code carries it."""
    return f"{base_url.rstrip('/')}/batches/{quote(code, safe='')}"


def placeholder_values(content: LabelContent, serial: int, codes_only: bool = False) -> dict[str, str]:
    """The text of every placeholder for one label; statements joined by newlines (see _statement_text)."""
    el = content.elements
    p_codes = " ".join(code for code, _ in el.precautionary_statements)
    return {
        "batch_id": content.batch_id,
        "reagent": content.reagent,
        "formula": content.formula,
        "nominal": content.nominal,
        "certified": _unbreakable_figures(content.certified),
        "certified_caption": "Certified molarity" if content.released else "",
        "standardized_on": content.standardized_on,
        "released_on": content.released_on,
        "expires_on": content.expires_on,
        "prepared_on": content.prepared_on,
        "prepared_by": content.prepared_by,
        "signal_word": el.signal_word.upper(),
        # A no-break space keeps each code on the line of its text's first word.
        "hazard_statements": "\n".join(f"{code}{NBSP}{text}" for code, text in el.hazard_statements),
        "precautionary_statements": (
            f"{p_codes} (see SDS)"
            if codes_only and p_codes
            else "\n".join(f"{code}{NBSP}{text}" for code, text in el.precautionary_statements)
        ),
        "regulations": content.regulations,
        "regulations_short": REGULATIONS_SHORT,
        "serial": format_serial(serial),
        "printed_on": content.printed_on,
        "institution": content.institution,
        **{k: _unbreakable_figures(v) if k == "container_volume" else v for k, v in content.extra.items()},
    }


def _unbreakable_figures(text: str) -> str:
    """The value text with no-break spaces where a line must not break: inside '20 °C', 'mol/L', '(k = 2)',
    'at 20 °C' and before '±'; it may break after '±', before '(k' and before 'at'."""
    text = re.sub(r"(\d) (?=mol/L|°C|%)", "\\1" + NBSP, text)
    text = re.sub(r"\(k = ", f"(k{NBSP}={NBSP}", text)
    text = re.sub(r" at (?=\d)", f" at{NBSP}", text)
    return text.replace(" ± ", f"{NBSP}± ")


def format_serial(serial: int) -> str:
    """A print serial as printed: six digits at least, e.g. 000123."""
    return f"{serial:06d}"


# ---------------------------------------------------------------- text that fits


def printable(text: str) -> str:
    """Text the label's typeface can show (stockroom.pdf.typeface.printable): accents beyond one code page,
    Greek and combining marks are kept; a character the font lacks loses its accent or becomes '?'."""
    return typeface.printable(text)


@functools.lru_cache(maxsize=16384)
def _width(text: str, font: str, size: float) -> float:
    return stringWidth(text.replace(NBSP, " "), font, size)


@dataclass(frozen=True)
class FieldFit:
    """How one field's text sits in its box: size, lines and their widths, all in pt."""

    field: str
    font: str
    size_pt: float
    leading_pt: float
    lines: tuple[str, ...]
    line_widths_pt: tuple[float, ...]
    box_width_pt: float
    box_height_pt: float

    @property
    def text_height_pt(self) -> float:
        return len(self.lines) * self.leading_pt

    @property
    def widest_pt(self) -> float:
        return max(self.line_widths_pt, default=0.0)

    @property
    def fits(self) -> bool:
        """Whether every line is at most the box width and the lines together at most its height."""
        return self.widest_pt <= self.box_width_pt + _EPS and self.text_height_pt <= self.box_height_pt + _EPS


def _break_word(word: str, font: str, size: float, width: float) -> list[str]:
    """Split a word wider than the box, after a / + or - where possible, else between letters."""
    pieces: list[str] = []
    current = ""
    for ch in word:
        if current and _width(current + ch, font, size) > width:
            cut = max(current.rfind("/"), current.rfind("+"), current.rfind("-"), current.rfind(NBSP))
            if 0 < cut < len(current) - 1:
                pieces.append(current[: cut + 1])
                current = current[cut + 1 :]
            else:
                pieces.append(current)
                current = ""
        current += ch
    pieces.append(current)
    return pieces


def wrap(text: str, font: str, size: float, width: float, *, break_words: bool = True) -> list[str] | None:
    """Lines of `text` no wider than `width` pt at `size` pt: breaks at spaces (never at a no-break space),
    at newlines, and inside a word only when the word alone is too wide (None then, with break_words=False)."""
    lines: list[str] = []
    for paragraph in text.split("\n"):
        current = ""
        for word in paragraph.split(" "):
            if not word:
                continue
            candidate = f"{current} {word}" if current else word
            if _width(candidate, font, size) <= width:
                current = candidate
                continue
            if current:
                lines.append(current)
            if _width(word, font, size) <= width:
                current = word
            elif not break_words:
                return None
            else:
                *full, current = _break_word(word, font, size, width)
                lines.extend(full)
        lines.append(current)
    return lines


def _sizes(top: float, bottom: float) -> list[float]:
    n = int(math.floor((top - bottom) / _SIZE_STEP + _EPS))
    sizes = [round(top - i * _SIZE_STEP, 4) for i in range(n + 1)]
    if sizes[-1] > bottom + _EPS:
        sizes.append(bottom)
    return sizes


def fit_text(
    name: str, text: str, font: str, size: float, min_size: float, width: float, height: float, leading: float
) -> FieldFit | None:
    """The largest setting of `text` in a width x height pt box, or None when nothing fits.

    Prefers the text unwrapped, set down to 80 % of `size`; then wrapped at spaces, from `size` down to
    `min_size`; then wrapped with words broken too (sizes in pt; leading as a multiple of the size).
    """
    paragraphs = text.split("\n")

    def attempt(s: float, lines: list[str]) -> FieldFit:
        return FieldFit(
            name,
            font,
            s,
            s * leading,
            tuple(ln.replace(NBSP, " ") for ln in lines),
            tuple(_width(ln, font, s) for ln in lines),
            width,
            height,
        )

    for s in _sizes(size, max(min_size, size * _SHRINK_BEFORE_WRAP)):
        fit = attempt(s, paragraphs)
        if fit.fits:
            return fit
    # Wrapped at spaces only, smaller and smaller: a value keeps "20 °C" and "mol/L" with their figures.
    for s in _sizes(size, min_size):
        lines = wrap(text, font, s, width, break_words=False)
        if lines is not None and (fit := attempt(s, lines)).fits:
            return fit
    # Only then inside a word too wide for the box at the smallest size (a long name, say).
    for s in _sizes(size, min_size):
        fit = attempt(s, wrap(text, font, s, width) or [])
        if fit.fits:
            return fit
    return None


def _pad_mm(field: Field, framed: bool) -> float:
    """Space between a frame and its text: less in a small box, so a one-line box keeps its line."""
    return min(_FRAME_PAD_MM, 0.12 * field.height) if framed else 0.0


def _inner_box(field: Field, framed: bool) -> tuple[float, float]:
    pad = _pad_mm(field, framed)
    return (field.width - 2 * pad) * mm, (field.height - 2 * pad) * mm


def _is_alert(field: Field, content: LabelContent) -> bool:
    return not content.released and "certified" in field.placeholders


# A figure and its unit are never parted by a line break: '0.1 mol/L', '20 °C', '2.5 %', '25 mL'.
_FIGURE_UNIT = re.compile(r"(\d) (?=(?:mol/L|mmol/L|mL|L|g|mg|°C|K|%)(?![\w/]))")


def _fill(field: Field, values: Mapping[str, str]) -> str:
    text = field.text.format_map(values)
    if not field.one_per_line:
        text = " ".join(part for part in text.split("\n"))
    return printable(_FIGURE_UNIT.sub("\\1" + NBSP, text.strip()))


def fit_field(field: Field, layout: Layout, content: LabelContent, serial: int) -> FieldFit:
    """The setting of one text field; LabelOverflow when it cannot fit. P statements first fall back to
    their codes, then the field's shorter template (if it has one) is tried."""
    framed = field.frame or _is_alert(field, content)
    width, height = _inner_box(field, framed)
    font = layout.font_bold if field.bold or _is_alert(field, content) else layout.font_regular
    tries = [False, True] if "precautionary_statements" in field.placeholders else [False]
    for template in field.templates():
        shaped = replace(field, text=template)
        for codes_only in tries:
            text = _fill(shaped, placeholder_values(content, serial, codes_only=codes_only))
            fit = fit_text(field.name, text, font, field.size_pt, field.min_size_pt, width, height, field.leading)
            if fit is not None:
                return fit
    raise LabelOverflow(layout.name, field.name, field.min_size_pt)


def fit_report(content: LabelContent, layout: Layout, serial: int = 999999) -> list[FieldFit]:
    """For every text field of the layout: the lines drawn, each line's stringWidth and the box's width (pt).

    serial: the serial to set (the widest one printed so far by default). Raises LabelOverflow when a
    field cannot fit at all.
    """
    return [fit_field(f, layout, content, serial) for f in layout.fields if f.kind == "text"]


# ---------------------------------------------------------------- drawing


def _qr_drawing(url: str, size: float) -> Drawing:
    widget = QrCodeWidget(url, barLevel=QR_LEVEL, barBorder=4, barWidth=size, barHeight=size)
    d = typeface.drawing(size, size)
    d.add(widget)
    return d


def _pictogram_grid(n: int, width: float, height: float, gap: float) -> tuple[int, int, float]:
    """Rows, columns and the side (pt) that show n pictograms largest in a width x height pt box."""
    best = (1, n, 0.0)
    for rows in range(1, n + 1):
        cols = math.ceil(n / rows)
        side = min((width - gap * (cols - 1)) / cols, (height - gap * (rows - 1)) / rows)
        if side > best[2]:
            best = (rows, cols, side)
    return best


class _Painter:
    """Draws labels onto one canvas; the QR code and pictograms are drawn once each as PDF forms."""

    def __init__(self, canvas: Canvas, layout: Layout, content: LabelContent):
        self.c = canvas
        self.layout = layout
        self.content = content
        self.forms: set[str] = set()
        self.fixed: dict[str, FieldFit] = {}
        for f in layout.fields:
            if f.kind == "text" and "serial" not in f.placeholders:
                self.fixed[f.name] = fit_field(f, layout, content, 0)

    def _form(self, key: str, drawing: Drawing) -> str:
        if key not in self.forms:
            self.c.beginForm(key, 0, 0, drawing.width, drawing.height)
            renderPDF.draw(drawing, self.c, 0, 0)
            self.c.endForm()
            self.forms.add(key)
        return key

    def label(self, position: int, serial: int) -> None:
        ox, oy = self.layout.origin_mm(position)
        _, page_h = self.layout.page_size_pt
        left, top = ox * mm, page_h - oy * mm
        c = self.c
        if self.layout.outline:
            c.saveState()
            c.setStrokeColor(_OUTLINE_GREY)
            c.setLineWidth(0.4)
            c.roundRect(
                left,
                top - self.layout.label_height * mm,
                self.layout.label_width * mm,
                self.layout.label_height * mm,
                self.layout.corner_radius * mm,
                stroke=1,
                fill=0,
            )
            c.restoreState()
        for f in self.layout.fields:
            bx, by_top = left + f.x * mm, top - f.y * mm
            if f.kind == "qr":
                self._qr(f, bx, by_top)
            elif f.kind == "pictograms":
                self._pictograms(f, bx, by_top)
            else:
                fit = self.fixed.get(f.name) or fit_field(f, self.layout, self.content, serial)
                self._text(f, fit, bx, by_top)

    def _qr(self, f: Field, bx: float, by_top: float) -> None:
        x, y, side = qr_place(f)
        key = self._form(f"qr{int(side * 100)}", _qr_drawing(self.content.url, side))
        c = self.c
        c.saveState()
        c.translate(bx + x, by_top - y - side)
        c.doForm(key)
        c.restoreState()

    def _pictograms(self, f: Field, bx: float, by_top: float) -> None:
        codes = self.content.elements.pictograms
        c = self.c
        for code, (x, y, side) in zip(codes, pictogram_places(f, len(codes)), strict=True):
            key = self._form(f"ghs{code}", ghs.pictogram(code, 100.0))
            c.saveState()
            c.translate(bx + x, by_top - y - side)
            c.scale(side / 100.0, side / 100.0)
            c.doForm(key)
            c.restoreState()

    def _text(self, f: Field, fit: FieldFit, bx: float, by_top: float) -> None:
        c = self.c
        alert = _is_alert(f, self.content)
        if f.frame or alert:
            c.saveState()
            if alert:
                c.setFillColor(ghs.GHS_RED)
                c.rect(bx, by_top - f.height * mm, f.width * mm, f.height * mm, stroke=0, fill=1)
            else:
                c.setLineWidth(0.6)
                c.rect(bx, by_top - f.height * mm, f.width * mm, f.height * mm, stroke=1, fill=0)
            c.restoreState()
        c.saveState()
        c.setFillColor(colors.white if alert else colors.black)
        c.setFont(fit.font, fit.size_pt)
        for line, (x, baseline, _) in zip(fit.lines, text_places(f, fit, alert), strict=True):
            c.drawString(bx + x, by_top - baseline, line)
        c.restoreState()


# ---------------------------------------------------------------- where things go (shared by drawing and checks)
# Offsets in pt from the field's top-left corner, x to the right and y downwards.


def qr_place(f: Field) -> tuple[float, float, float]:
    """The QR code's square in its box: (x, y, side) in pt, centred."""
    side = min(f.width, f.height) * mm
    return (f.width * mm - side) / 2, (f.height * mm - side) / 2, side


def pictogram_places(f: Field, n: int) -> list[tuple[float, float, float]]:
    """Each of n pictograms' squares in the box, (x, y, side) in pt: as large as they fit, the group
    placed by the field's align and valign (so a layout can sit them against the signal word)."""
    if n == 0:
        return []
    w, h, gap = f.width * mm, f.height * mm, 1.0 * mm
    rows, cols, side = _pictogram_grid(n, w, h, gap)
    used_w = cols * side + (cols - 1) * gap
    used_h = rows * side + (rows - 1) * gap
    x0 = {"left": 0.0, "right": w - used_w}.get(f.align, (w - used_w) / 2)
    y0 = {"top": 0.0, "bottom": h - used_h}.get(f.valign, (h - used_h) / 2)
    out = []
    for i in range(n):
        row, col = divmod(i, cols)
        out.append((x0 + col * (side + gap), y0 + row * (side + gap), side))
    return out


def text_places(f: Field, fit: FieldFit, alert: bool = False) -> list[tuple[float, float, float]]:
    """Each line's (x, baseline, width) in pt from the field's top-left: aligned and spaced as drawn."""
    pad = _pad_mm(f, f.frame or alert) * mm
    inner_w, inner_h = fit.box_width_pt, fit.box_height_pt
    top = pad
    if f.valign == "middle" or alert:
        top += (inner_h - fit.text_height_pt) / 2
    elif f.valign == "bottom":
        top += inner_h - fit.text_height_pt
    ascent, descent = getAscentDescent(fit.font, fit.size_pt)
    out = []
    for i, width in enumerate(fit.line_widths_pt):
        slot_top = top + i * fit.leading_pt
        baseline = slot_top + (fit.leading_pt - (ascent - descent)) / 2 + ascent
        if f.align == "right":
            x = pad + inner_w - width
        elif f.align == "centre" or alert:
            x = pad + (inner_w - width) / 2
        else:
            x = pad
        out.append((x, baseline, width))
    return out


@dataclass(frozen=True)
class DrawnBox:
    """Something one field puts on a label, in mm from the label's top-left corner.

    kind: "text" (the ink of one line: its width, from the font's ascent to its descent), "frame" (a
    rule or a filled box), "qr" or "pictogram" (one square each).
    """

    field: str
    kind: str
    x: float
    y: float
    width: float
    height: float

    @property
    def right(self) -> float:
        return self.x + self.width

    @property
    def bottom(self) -> float:
        return self.y + self.height

    def gap_to(self, other: DrawnBox) -> float:
        """The shortest distance between the two boxes (0 when they touch or overlap), mm."""
        dx = max(other.x - self.right, self.x - other.right, 0.0)
        dy = max(other.y - self.bottom, self.y - other.bottom, 0.0)
        return math.hypot(dx, dy)


def drawn_boxes(content: LabelContent, layout: Layout, serial: int = 999999) -> list[DrawnBox]:
    """Every box the layout engine draws on one label of `content`, as the painter places it.

    Raises LabelOverflow as printing would. Empty text (e.g. no signal word) draws no line.
    """
    out: list[DrawnBox] = []
    to_mm = 1 / mm
    for f in layout.fields:
        if f.kind == "qr":
            x, y, side = qr_place(f)
            out.append(DrawnBox(f.name, "qr", f.x + x * to_mm, f.y + y * to_mm, side * to_mm, side * to_mm))
        elif f.kind == "pictograms":
            for x, y, side in pictogram_places(f, len(content.elements.pictograms)):
                out.append(DrawnBox(f.name, "pictogram", f.x + x * to_mm, f.y + y * to_mm, side * to_mm, side * to_mm))
        else:
            fit = fit_field(f, layout, content, serial)
            alert = _is_alert(f, content)
            if f.frame or alert:
                out.append(DrawnBox(f.name, "frame", f.x, f.y, f.width, f.height))
            ascent, descent = getAscentDescent(fit.font, fit.size_pt)
            for line, (x, baseline, width) in zip(fit.lines, text_places(f, fit, alert), strict=True):
                if line.strip():
                    top = baseline - ascent
                    out.append(
                        DrawnBox(f.name, "text", f.x + x * to_mm, f.y + top * to_mm, width * to_mm, (ascent - descent) * to_mm)
                    )
    return out


def build_labels(
    content: LabelContent, layout: Layout, copies: int, start: int = 1, first_serial: int = 1, title: str | None = None
) -> bytes:
    """A PDF of `copies` labels on `layout`, the first at sheet position `start` (1-based, row by row).

    Serials run from first_serial, one per label. Further copies continue on new sheets from position 1.
    title: the PDF's title (default: the batch ID and the serials).
    Raises LabelOverflow when a field cannot fit, ValueError for copies or start out of range.
    """
    if not 1 <= copies <= MAX_COPIES:
        raise ValueError(f"copies must be between 1 and {MAX_COPIES}")
    if not 1 <= start <= layout.per_page:
        raise ValueError(f"start must be between 1 and {layout.per_page}")
    buf = io.BytesIO()
    c = Canvas(buf, pagesize=layout.page_size_pt, invariant=1, pageCompression=1, initialFontName=typeface.REGULAR)
    last = first_serial + copies - 1
    c.setTitle(printable(title or f"Labels {content.batch_id}, serials {format_serial(first_serial)}-{format_serial(last)}"))
    c.setAuthor("stockroom")
    c.setCreator("stockroom")
    c.setSubject(printable(f"{content.reagent} {content.nominal}: {content.certified}"))
    painter = _Painter(c, layout, content)
    slot = start - 1
    for i in range(copies):
        if slot == layout.per_page:
            c.showPage()
            slot = 0
        painter.label(slot + 1, first_serial + i)
        slot += 1
    c.showPage()
    c.save()
    return buf.getvalue()


# ---------------------------------------------------------------- the records behind a label


def hazard_for(db: sqlite_utils.Database, reagent: str, molarity: float, on: dt.date) -> LabelElements:
    """The label elements of `reagent` at `molarity` (mol/L) on `on`; Conflict when none is recorded."""
    found = hazards.pick(records.classifications(db), reagent, molarity, on)
    if found is None:
        raise Conflict(
            f"no hazard classification is recorded for {reagent} at {molarity:g} mol/L, so no label "
            "prints (a label must not hide a hazard). An administrator adds one under Hazard data "
            "(/admin/hazards) from the supplier's safety data sheet."
        )
    return hazards.label_elements(found)


def label_content(db: sqlite_utils.Database, config: Mapping[str, Any], batch: Mapping[str, Any], on: dt.date) -> LabelContent:
    """What the labels of `batch` (a batches row) say when printed on `on` (the lab's date)."""
    facts = readmodel.batch_facts(db, batch["id"])
    report = status_on(facts, on)
    fact = release_in_force(facts, on)
    titrant = chemistry.titrant(batch["reagent"])
    nominal = float(batch["nominal_molarity"])
    release = None
    standardized_on = DASH
    if fact is not None:
        release = dbmod.query(db, "SELECT * FROM releases WHERE id = ?", [fact.id])[0]
        run = dbmod.query(db, "SELECT performed_on FROM runs WHERE id = ?", [release["run_id"]])
        standardized_on = run[0]["performed_on"] if run else DASH
    # Classified at the larger of nominal and certified strength, so a value a hair over a band limit
    # never prints the weaker band's elements.
    strength = max(nominal, fact.molarity) if fact is not None else nominal
    elements = hazard_for(db, titrant.key, strength, on)
    name = titrant.name[:1].upper() + titrant.name[1:]
    return LabelContent(
        batch_id=batch["code"],
        reagent=name,
        formula=titrant.formula,
        nominal=f"{nominal:g} mol/L",
        certified=(
            value_text(release["molarity"], release["expanded_u"], release["k"], release["reference_temperature_c"])
            if release
            else not_for_use_text(report.status)
        ),
        released=release is not None,
        standardized_on=standardized_on,
        released_on=release["released_on"] if release else DASH,
        expires_on=release["expires_on"] if release else DASH,
        prepared_on=batch["prepared_on"],
        prepared_by=batch["prepared_by"],
        elements=elements,
        url=batch_url(qr_base_url(config.get("BASE_URL"), config.get("REQUEST_ROOT")), batch["code"]),
        printed_on=on.isoformat(),
        release_id=release["id"] if release else None,
        institution=str(config.get("INSTITUTION_NAME") or "").strip(),
    )


@dataclass(frozen=True)
class PrintJob:
    """A recorded print and its PDF."""

    pdf: bytes
    record: dict[str, Any]
    content: LabelContent


def print_labels(
    db: sqlite_utils.Database,
    config: Mapping[str, Any],
    batch: Mapping[str, Any],
    layout: Layout,
    copies: int,
    start: int,
    actor: str,
    on: dt.date,
) -> PrintJob:
    """Record a print of `copies` labels of `batch` on `layout` from position `start` and build its PDF.

    The record and the PDF are made in one write: if the PDF cannot be built (LabelOverflow), nothing
    is recorded and no serial is used.
    """
    problems = []
    if not 1 <= copies <= MAX_COPIES:
        problems.append(FieldError("copies", f"must be between 1 and {MAX_COPIES}"))
    if not 1 <= start <= layout.per_page:
        problems.append(FieldError("start", f"must be between 1 and {layout.per_page} (positions on this sheet)"))
    if problems:
        raise InvalidInput(problems)
    content = label_content(db, config, batch, on)
    with dbmod.write(db):
        row = records.record_print(db, batch["id"], content.release_id, layout.name, copies, content.certified, actor)
        pdf = build_labels(content, layout, copies, start, row["serial_first"])
    return PrintJob(pdf, row, content)


def current_value_text(history: Mapping[str, Any], in_force: Any, status: Status) -> str:
    """The value a label printed now would show, from a batch's history and its release in force (or None)."""
    if in_force is None:
        return not_for_use_text(status)
    row = next((r for r in history["releases"] if r["id"] == in_force.id), None)
    temperature = row["reference_temperature_c"] if row else 20.0
    return value_text(in_force.molarity, in_force.U, in_force.k, temperature)


def stale_prints(prints: Sequence[Mapping[str, Any]], current: str) -> list[Mapping[str, Any]]:
    """Prints whose labels show something else than `current` (a value, or NOT FOR USE), oldest first.

    Two NOT FOR USE texts (e.g. awaiting, later withdrawn) are not stale against each other: both say
    the same thing to the bench.
    """
    out = []
    for p in prints:
        shown = p["value_printed"]
        if shown == current or (shown.startswith(NOT_FOR_USE) and current.startswith(NOT_FOR_USE)):
            continue
        out.append(p)
    return out


def with_content(content: LabelContent, **changes: Any) -> LabelContent:
    """A copy of the content with some fields changed (tests and previews)."""
    return replace(content, **changes)
