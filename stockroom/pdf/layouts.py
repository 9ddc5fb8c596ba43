"""Label layouts as data: read and check the TOML files in labels/ (the format is in labels/README.md).

A layout names its page, a grid of labels on it, the label's size and corner radius, fonts, and the
fields: boxes in mm from the label's top-left corner, each holding a text template ({placeholders}
from PLACEHOLDERS), the QR code or the pictograms. A new file in labels/ is a new layout; nothing in
the code changes. Every problem of a file is reported at once, each naming the key it is about.
"""

from __future__ import annotations

import math
import re
import string
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from reportlab.lib.units import mm

from stockroom.errors import StockroomError
from stockroom.pdf import typeface
from stockroom.resources import resource_dir

# Page sizes in mm (ISO 216 and the North American sizes).
PAGE_SIZES: dict[str, tuple[float, float]] = {
    "A4": (210.0, 297.0),
    "A5": (148.0, 210.0),
    "A6": (105.0, 148.0),
    "letter": (215.9, 279.4),
    "half-letter": (139.7, 215.9),
    "legal": (215.9, 355.6),
}

# One typeface, embedded in every PDF (stockroom.pdf.typeface). The standard-font names layouts of
# earlier versions gave are read as it: those fonts lack characters labels print (Ł, ő, V̄).
DEFAULT_FAMILY = "DejaVu Sans"
FONT_FAMILIES: dict[str, tuple[str, str]] = {
    DEFAULT_FAMILY: (typeface.REGULAR, typeface.BOLD),
    "DejaVu Sans Condensed": (typeface.CONDENSED, typeface.CONDENSED_BOLD),
    "Helvetica": (typeface.REGULAR, typeface.BOLD),
    "Times": (typeface.REGULAR, typeface.BOLD),
    "Courier": (typeface.REGULAR, typeface.BOLD),
}

# What a text template may show. Every label must carry the REQUIRED ones somewhere.
PLACEHOLDERS: dict[str, str] = {
    "batch_id": "the batch ID, e.g. NAOH-2611-02",
    "reagent": "the reagent's name, e.g. Sodium hydroxide",
    "formula": "the reagent's formula, e.g. NaOH",
    "nominal": "the nominal molarity, e.g. 0.1 mol/L",
    "certified": "the certified molarity ± U (k) at the reference temperature, or NOT FOR USE and why",
    "certified_caption": "'Certified molarity' when a value is printed, empty otherwise",
    "standardized_on": "date of the standardization behind the value in force (— when none)",
    "released_on": "date of the release in force (— when none)",
    "expires_on": "expiry date of the release in force (— when none)",
    "prepared_on": "date the batch was prepared",
    "prepared_by": "who prepared the batch",
    "signal_word": "DANGER or WARNING (empty when the solution is not classified)",
    "hazard_statements": "the H statements with their text",
    "precautionary_statements": "the P statements with their text (codes only when the text cannot fit)",
    "regulations": "the line deferring to local regulations and the chemical hygiene plan",
    "regulations_short": "the same line, shorter, for small labels",
    "serial": "this label's print serial (unique in the database)",
    "printed_on": "the date of printing",
    "institution": "the institution's name (setting INSTITUTION_NAME; empty when it is not set)",
    # A container's label (purpose = "container"): one dispensing from a batch.
    "container_code": "the container's code, e.g. NAOH-2611-02-C03 (container labels)",
    "container_kind": "bench bottle, burette reservoir or carboy (container labels)",
    "filled_on": "the date the container was filled (container labels)",
    "container_volume": "the volume put in it, e.g. 1.5 L (container labels)",
    "container_expires_on": "the container's own expiry, never later than the batch's (container labels)",
    "destination": "where it went, e.g. CHM 110 · section B · room 214 (container labels)",
}
REQUIRED = (
    "batch_id",
    "reagent",
    "nominal",
    "certified",
    "standardized_on",
    "expires_on",
    "prepared_by",
    "signal_word",
    "hazard_statements",
    "precautionary_statements",
    "regulations",
    "serial",
)
# A container label (purpose = "container") carries its own code, fill date, expiry and destination with
# its parent's value and hazards; it is not a print of the batch register, so it has no serial.
REQUIRED_CONTAINER = (
    "container_code",
    "batch_id",
    "reagent",
    "nominal",
    "certified",
    "filled_on",
    "container_expires_on",
    "destination",
    "signal_word",
    "hazard_statements",
    "precautionary_statements",
    "regulations",
)
PURPOSES = ("batch", "container")
# A required item any one of whose forms will do.
ALTERNATIVES: dict[str, tuple[str, ...]] = {"regulations": ("regulations", "regulations_short")}
KINDS = ("text", "qr", "pictograms")
ALIGNS = ("left", "centre", "center", "right")
VALIGNS = ("top", "middle", "bottom")

ABSOLUTE_MIN_PT = 4.0  # below this a printed label is not reliably legible (common practice)
MIN_QR_MM = 12.0  # a QR code smaller than this scans poorly from a phone at arm's length (common practice)
MIN_PICTOGRAM_MM = 10.0  # CLP Annex I 1.2.1: each pictogram at least 1 cm2 (from memory)
_TOLERANCE_MM = 0.01
# Nothing is drawn closer than this to a label's edge: sheets and label printers place the print and the
# cut to within about a millimetre (common practice), and text at the edge reads as cut off.
EDGE_MARGIN_MM = 1.0
_NAME = re.compile(r"[a-z0-9][a-z0-9_-]{0,40}")


class LayoutError(StockroomError):
    """A layout file is missing, unreadable or breaks a rule; `problems` holds one sentence per broken rule."""

    status = 500

    def __init__(self, source: str, problems: list[str]):
        self.source = source
        self.problems = list(problems)
        super().__init__(f"label layout {source}: " + "; ".join(self.problems))


@dataclass(frozen=True)
class Field:
    """One box on the label. Lengths in mm from the label's top-left corner, font sizes in pt."""

    name: str
    kind: str
    x: float
    y: float
    width: float
    height: float
    text: str = ""
    size_pt: float = 8.0
    min_size_pt: float = 5.0
    bold: bool = False
    align: str = "left"
    valign: str = "top"
    leading: float = 1.15
    frame: bool = False
    one_per_line: bool = False
    shorter: str = ""  # a shorter template, set when `text` cannot fit even at min_size_pt

    def templates(self) -> tuple[str, ...]:
        """The text template, then the shorter one if any: the forms fit_field tries in turn."""
        return (self.text, self.shorter) if self.shorter else (self.text,)

    @property
    def placeholders(self) -> tuple[str, ...]:
        """The placeholder names the text template uses."""
        return tuple(name for _, name, _, _ in string.Formatter().parse(self.text) if name)


@dataclass(frozen=True)
class Layout:
    """A label layout: the page and grid (mm), the label (mm) and its fields."""

    name: str
    title: str
    description: str
    page_width: float
    page_height: float
    rows: int
    columns: int
    margin_top: float
    margin_left: float
    gutter_x: float
    gutter_y: float
    label_width: float
    label_height: float
    corner_radius: float
    outline: bool
    font_regular: str
    font_bold: str
    fields: tuple[Field, ...]
    source: str = ""
    purpose: str = "batch"  # or "container": a container's label (labels/containers/)

    @property
    def per_page(self) -> int:
        """Labels on one sheet."""
        return self.rows * self.columns

    @property
    def page_size_pt(self) -> tuple[float, float]:
        return self.page_width * mm, self.page_height * mm

    def origin_mm(self, position: int) -> tuple[float, float]:
        """Top-left corner (mm from the page's top-left) of the label at 1-based `position`, row by row."""
        index = position - 1
        row, column = divmod(index, self.columns)
        return (
            self.margin_left + column * (self.label_width + self.gutter_x),
            self.margin_top + row * (self.label_height + self.gutter_y),
        )

    def field(self, name: str) -> Field:
        """The field called `name`; KeyError if the layout has none."""
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)

    def summary(self) -> str:
        """'3 x 10 on letter, 66.7 x 25.4 mm' — for pick lists."""
        each = f"{self.label_width:g} x {self.label_height:g} mm"
        if self.per_page == 1:
            return f"one {each} label per {self.page_width:g} x {self.page_height:g} mm page"
        return (
            f"{self.per_page} labels ({self.columns} x {self.rows}) of {each} on a "
            f"{self.page_width:g} x {self.page_height:g} mm sheet"
        )


# ---------------------------------------------------------------- reading


class _Reader:
    """Reads typed values out of the TOML tables, recording a problem naming the key for each bad one."""

    def __init__(self) -> None:
        self.problems: list[str] = []

    def problem(self, key: str, message: str) -> None:
        self.problems.append(f"{key}: {message}")

    def table(self, data: Mapping[str, Any], key: str, required: bool = True) -> dict[str, Any]:
        value = data.get(key)
        if value is None:
            if required:
                self.problem(f"[{key}]", "the table is missing")
            return {}
        if not isinstance(value, dict):
            self.problem(key, "must be a table ([" + key + "])")
            return {}
        return value

    def known(self, data: Mapping[str, Any], where: str, allowed: tuple[str, ...]) -> None:
        for key in data:
            if key not in allowed:
                self.problem(f"{where}{key}", f"is not a key of this table (known: {', '.join(allowed)})")

    def number(
        self,
        data: Mapping[str, Any],
        key: str,
        where: str,
        default: float | None = None,
        *,
        minimum: float | None = 0.0,
        positive: bool = False,
    ) -> float:
        raw = data.get(key, default)
        name = f"{where}{key}"
        if raw is None:
            self.problem(name, "is required")
            return 0.0
        if isinstance(raw, bool) or not isinstance(raw, int | float):
            self.problem(name, f"must be a number, not {raw!r}")
            return 0.0
        value = float(raw)
        if positive and value <= 0:
            self.problem(name, f"must be greater than 0 (got {value:g})")
        elif minimum is not None and value < minimum:
            self.problem(name, f"must be at least {minimum:g} (got {value:g})")
        return value

    def integer(self, data: Mapping[str, Any], key: str, where: str, *, low: int, high: int) -> int:
        raw = data.get(key)
        name = f"{where}{key}"
        if raw is None:
            self.problem(name, "is required")
            return low
        if isinstance(raw, bool) or not isinstance(raw, int):
            self.problem(name, f"must be a whole number, not {raw!r}")
            return low
        if not low <= raw <= high:
            self.problem(name, f"must be between {low} and {high} (got {raw})")
            return low
        return raw

    def text(
        self, data: Mapping[str, Any], key: str, where: str, default: str | None = None, choices: tuple[str, ...] | None = None
    ) -> str:
        raw = data.get(key, default)
        name = f"{where}{key}"
        if raw is None:
            self.problem(name, "is required")
            return ""
        if not isinstance(raw, str):
            self.problem(name, f"must be text in quotes, not {raw!r}")
            return default or ""
        if choices is not None and raw not in choices:
            self.problem(name, f"must be one of {', '.join(choices)} (got {raw!r})")
            return default or choices[0]
        return raw

    def flag(self, data: Mapping[str, Any], key: str, where: str, default: bool) -> bool:
        raw = data.get(key, default)
        if not isinstance(raw, bool):
            self.problem(f"{where}{key}", f"must be true or false, not {raw!r}")
            return default
        return raw


_TOP_KEYS = ("title", "description", "purpose", "page", "grid", "label", "font", "field")
_PAGE_KEYS = ("size", "orientation", "width_mm", "height_mm")
_GRID_KEYS = ("rows", "columns", "margin_top_mm", "margin_left_mm", "gutter_x_mm", "gutter_y_mm")
_LABEL_KEYS = ("width_mm", "height_mm", "corner_radius_mm", "outline")
_FONT_KEYS = ("family", "size_pt", "min_size_pt", "leading")
_FIELD_KEYS = (
    "name",
    "kind",
    "box_mm",
    "text",
    "size_pt",
    "min_size_pt",
    "bold",
    "align",
    "valign",
    "leading",
    "frame",
    "one_per_line",
    "shorter",
)


def parse_layout(name: str, text: str, source: str = "") -> Layout:
    """A Layout from TOML text; LayoutError listing every problem (each naming its key) if it breaks a rule.

    name: the layout's name (the file name without .toml); source: shown in messages.
    """
    source = source or f"{name}.toml"
    if not _NAME.fullmatch(name):
        raise LayoutError(source, ["the file name must be lower-case letters, digits, - or _ (it is the layout's name)"])
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise LayoutError(source, [f"not valid TOML: {exc}"]) from None
    r = _Reader()
    r.known(data, "", _TOP_KEYS)
    title = r.text(data, "title", "")
    description = r.text(data, "description", "", default="")
    purpose = r.text(data, "purpose", "", default="batch", choices=PURPOSES)

    page = r.table(data, "page")
    r.known(page, "[page] ", _PAGE_KEYS)
    if "size" in page:
        paper = r.text(page, "size", "[page] ", choices=tuple(PAGE_SIZES))
        pw, ph = PAGE_SIZES.get(paper, (0.0, 0.0))
        if "width_mm" in page or "height_mm" in page:
            r.problem("[page] size", "give either size or width_mm and height_mm, not both")
    else:
        pw = r.number(page, "width_mm", "[page] ", positive=True)
        ph = r.number(page, "height_mm", "[page] ", positive=True)
    orientation = r.text(page, "orientation", "[page] ", default="portrait", choices=("portrait", "landscape"))
    if orientation == "landscape":
        pw, ph = max(pw, ph), min(pw, ph)

    grid = r.table(data, "grid")
    r.known(grid, "[grid] ", _GRID_KEYS)
    rows = r.integer(grid, "rows", "[grid] ", low=1, high=50)
    columns = r.integer(grid, "columns", "[grid] ", low=1, high=20)
    margin_top = r.number(grid, "margin_top_mm", "[grid] ", 0.0)
    margin_left = r.number(grid, "margin_left_mm", "[grid] ", 0.0)
    gutter_x = r.number(grid, "gutter_x_mm", "[grid] ", 0.0)
    gutter_y = r.number(grid, "gutter_y_mm", "[grid] ", 0.0)

    label = r.table(data, "label")
    r.known(label, "[label] ", _LABEL_KEYS)
    lw = r.number(label, "width_mm", "[label] ", positive=True)
    lh = r.number(label, "height_mm", "[label] ", positive=True)
    radius = r.number(label, "corner_radius_mm", "[label] ", 0.0)
    outline = r.flag(label, "outline", "[label] ", True)
    if radius > min(lw, lh) / 2:
        r.problem("[label] corner_radius_mm", f"must be at most half the label's shorter side ({min(lw, lh) / 2:g})")

    font = r.table(data, "font", required=False)
    r.known(font, "[font] ", _FONT_KEYS)
    family = r.text(font, "family", "[font] ", default=DEFAULT_FAMILY, choices=tuple(FONT_FAMILIES))
    base_size = r.number(font, "size_pt", "[font] ", 8.0, minimum=ABSOLUTE_MIN_PT)
    base_min = r.number(font, "min_size_pt", "[font] ", 5.0, minimum=ABSOLUTE_MIN_PT)
    base_leading = r.number(font, "leading", "[font] ", 1.15, minimum=1.0)

    if pw and ph and lw and lh:
        used_w = margin_left + columns * lw + (columns - 1) * gutter_x
        used_h = margin_top + rows * lh + (rows - 1) * gutter_y
        if used_w > pw + _TOLERANCE_MM:
            r.problem(
                "[grid] columns",
                f"{columns} labels of {lw:g} mm with these margins and gutters need {used_w:g} mm but the page is {pw:g} mm wide",
            )
        if used_h > ph + _TOLERANCE_MM:
            r.problem(
                "[grid] rows",
                f"{rows} labels of {lh:g} mm with these margins and gutters need {used_h:g} mm but the page is {ph:g} mm tall",
            )

    raw_fields = data.get("field")
    fields: list[Field] = []
    if not isinstance(raw_fields, list) or not raw_fields:
        r.problem("[[field]]", "the layout has no fields: add [[field]] tables")
        raw_fields = []
    seen: set[str] = set()
    for i, raw in enumerate(raw_fields):
        where = f"[[field]] #{i + 1} "
        if not isinstance(raw, dict):
            r.problem(where.strip(), "must be a table")
            continue
        fname = r.text(raw, "name", where)
        where = f"[[field]] {fname or '#' + str(i + 1)}: "
        r.known(raw, where, _FIELD_KEYS)
        if fname and not _NAME.fullmatch(fname):
            r.problem(f"{where}name", "must be lower-case letters, digits, - or _")
        if fname in seen:
            r.problem(f"{where}name", "is used by another field; names must be unique")
        seen.add(fname)
        kind = r.text(raw, "kind", where, default="text", choices=KINDS)
        box = raw.get("box_mm")
        if (
            not isinstance(box, list)
            or len(box) != 4
            or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in box)
        ):
            r.problem(f"{where}box_mm", "must be four numbers [x, y, width, height] in mm from the label's top-left corner")
            box = [0, 0, 1, 1]
        x, y, w, h = (float(v) for v in box)
        if w <= 0 or h <= 0:
            r.problem(f"{where}box_mm", "width and height must be greater than 0")
        if x < -_TOLERANCE_MM or y < -_TOLERANCE_MM or x + w > lw + _TOLERANCE_MM or y + h > lh + _TOLERANCE_MM:
            r.problem(f"{where}box_mm", f"[{x:g}, {y:g}, {w:g}, {h:g}] reaches outside the {lw:g} x {lh:g} mm label")
        elif not inside_label(x, y, w, h, lw, lh):
            r.problem(
                f"{where}box_mm",
                f"[{x:g}, {y:g}, {w:g}, {h:g}] comes closer than {EDGE_MARGIN_MM:g} mm to the label's edge: "
                "printing and cutting shift by about that much",
            )
        text = r.text(raw, "text", where, default="")
        size = r.number(raw, "size_pt", where, base_size, minimum=ABSOLUTE_MIN_PT)
        min_size = r.number(raw, "min_size_pt", where, min(base_min, size), minimum=ABSOLUTE_MIN_PT)
        leading = r.number(raw, "leading", where, base_leading, minimum=1.0)
        if min_size > size:
            r.problem(f"{where}min_size_pt", f"must not be larger than size_pt ({size:g})")
        field = Field(
            name=fname,
            kind=kind,
            x=x,
            y=y,
            width=w,
            height=h,
            text=text,
            size_pt=size,
            min_size_pt=min_size,
            bold=r.flag(raw, "bold", where, False),
            # Pictograms sit in the middle of their box unless the layout places them (e.g. against the signal word).
            align=r.text(raw, "align", where, default="centre" if kind == "pictograms" else "left", choices=ALIGNS).replace(
                "center", "centre"
            ),
            valign=r.text(raw, "valign", where, default="middle" if kind == "pictograms" else "top", choices=VALIGNS),
            leading=leading,
            frame=r.flag(raw, "frame", where, False),
            one_per_line=r.flag(raw, "one_per_line", where, False),
            shorter=r.text(raw, "shorter", where, default=""),
        )
        if kind == "text":
            if not text.strip():
                r.problem(f"{where}text", "a text field needs a text template")
            try:
                unknown = [p for p in field.placeholders if p not in PLACEHOLDERS]
            except ValueError as exc:
                r.problem(f"{where}text", f"braces do not match ({exc}); write {{{{ and }}}} for a literal brace")
                unknown = []
            if unknown:
                r.problem(f"{where}text", f"unknown placeholder {{{unknown[0]}}} (known: {', '.join(PLACEHOLDERS)})")
            if h * mm < min_size * leading * 0.95:
                r.problem(f"{where}box_mm", f"is {h:g} mm tall: too short for one line at {min_size:g} pt")
            if field.shorter:
                _check_shorter(r, where, field)
        elif kind == "qr" and min(w, h) < MIN_QR_MM:
            r.problem(f"{where}box_mm", f"a QR code needs at least {MIN_QR_MM:g} x {MIN_QR_MM:g} mm to scan reliably")
        elif kind == "pictograms" and min(w, h) < MIN_PICTOGRAM_MM:
            r.problem(f"{where}box_mm", f"pictograms need at least {MIN_PICTOGRAM_MM:g} mm each way")
        elif text or field.shorter:
            r.problem(f"{where}text", f"a {kind} field takes no text")
        fields.append(field)

    _check_overlaps(r, fields)
    used = {p for f in fields if f.kind == "text" for p in _safe_placeholders(f)}
    required = REQUIRED_CONTAINER if purpose == "container" else REQUIRED
    missing = [p for p in required if not any(a in used for a in ALTERNATIVES.get(p, (p,)))]
    if missing:
        r.problem("[[field]]", "every label must show " + ", ".join("{" + p + "}" for p in missing))
    for kind in ("qr", "pictograms"):
        if not any(f.kind == kind for f in fields):
            r.problem("[[field]]", f'the layout needs a field of kind = "{kind}"')
    if r.problems:
        raise LayoutError(source, r.problems)
    regular, bold = FONT_FAMILIES[family]
    return Layout(
        name=name,
        title=title,
        description=description,
        page_width=pw,
        page_height=ph,
        rows=rows,
        columns=columns,
        margin_top=margin_top,
        margin_left=margin_left,
        gutter_x=gutter_x,
        gutter_y=gutter_y,
        label_width=lw,
        label_height=lh,
        corner_radius=radius,
        outline=outline,
        font_regular=regular,
        font_bold=bold,
        fields=tuple(fields),
        source=source,
        purpose=purpose,
    )


def inside_label(
    x: float, y: float, w: float, h: float, lw: float, lh: float, radius: float = 0.0, *, corners: bool = False
) -> bool:
    """Whether the box (mm from the label's top-left) keeps EDGE_MARGIN_MM from the label's edges and,
    with corners=True, from its rounded corners (corner radius `radius`, mm) too. A layout's boxes are
    checked against the edges; what is drawn in them (text ink, frames) against the corners as well
    (stockroom.pdf.labels.drawn_boxes)."""
    m = EDGE_MARGIN_MM - _TOLERANCE_MM
    if x < m or y < m or x + w > lw - m or y + h > lh - m:
        return False
    if not corners or radius <= EDGE_MARGIN_MM:
        return True
    # A box corner inside a corner's square must lie within the arc drawn EDGE_MARGIN_MM inside it.
    inner = radius - EDGE_MARGIN_MM + _TOLERANCE_MM
    for px, py in ((x, y), (x + w, y), (x, y + h), (x + w, y + h)):
        cx = radius if px < radius else (lw - radius if px > lw - radius else px)
        cy = radius if py < radius else (lh - radius if py > lh - radius else py)
        if math.hypot(px - cx, py - cy) > inner:
            return False
    return True


def _check_shorter(r: _Reader, where: str, field: Field) -> None:
    try:
        names = [n for _, n, _, _ in string.Formatter().parse(field.shorter) if n]
    except ValueError as exc:
        r.problem(f"{where}shorter", f"braces do not match ({exc})")
        return
    unknown = [n for n in names if n not in PLACEHOLDERS]
    if unknown:
        r.problem(f"{where}shorter", f"unknown placeholder {{{unknown[0]}}}")
    dropped = [p for p in _safe_placeholders(field) if p in REQUIRED and p not in names]
    if dropped:
        r.problem(f"{where}shorter", "must keep what the label must show: " + ", ".join("{" + p + "}" for p in dropped))


def _safe_placeholders(f: Field) -> tuple[str, ...]:
    try:
        return f.placeholders
    except ValueError:
        return ()


def _check_overlaps(r: _Reader, fields: list[Field]) -> None:
    for i, a in enumerate(fields):
        for b in fields[i + 1 :]:
            if (
                a.x + a.width - _TOLERANCE_MM > b.x
                and b.x + b.width - _TOLERANCE_MM > a.x
                and a.y + a.height - _TOLERANCE_MM > b.y
                and b.y + b.height - _TOLERANCE_MM > a.y
            ):
                r.problem(f"[[field]] {a.name}: box_mm", f"overlaps the box of field {b.name}")


def load_layout(path: str | Path) -> Layout:
    """Read and check one layout file; LayoutError naming the file and every problem."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise LayoutError(p.name, [f"cannot be read ({exc.strerror})"]) from None
    except UnicodeDecodeError:
        raise LayoutError(p.name, ["is not UTF-8 text"]) from None
    return parse_layout(p.stem, text, source=f"labels/{p.name}")


def layouts_folder() -> Path:
    """The labels/ folder shipped with stockroom (checkout or wheel)."""
    return resource_dir("labels")


def container_layouts_folder() -> Path:
    """labels/containers/: the layouts of a container's label (purpose = "container")."""
    return resource_dir("labels") / "containers"


def load_all(folder: str | Path | None = None) -> tuple[dict[str, Layout], list[LayoutError]]:
    """Every layout in the folder by name, and the problems of files that could not be used."""
    base = Path(folder) if folder is not None else layouts_folder()
    found: dict[str, Layout] = {}
    broken: list[LayoutError] = []
    for path in sorted(base.glob("*.toml")):
        try:
            layout = load_layout(path)
        except LayoutError as exc:
            broken.append(exc)
            continue
        found[layout.name] = layout
    return found, broken


def get(name: str, folder: str | Path | None = None) -> Layout:
    """The layout called `name` from the labels folder; LayoutError if missing or broken."""
    base = Path(folder) if folder is not None else layouts_folder()
    if not _NAME.fullmatch(name or ""):
        raise LayoutError(f"{name!r}", ["is not a layout name"])
    path = base / f"{name}.toml"
    if not path.is_file():
        names = ", ".join(sorted(p.stem for p in base.glob("*.toml")))
        raise LayoutError(f"{name!r}", [f"there is no such layout (layouts: {names})"])
    return load_layout(path)
