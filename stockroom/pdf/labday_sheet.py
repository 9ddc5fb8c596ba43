"""The printable lab-day sheet: which titrant batches to use on a day, their molarity, flags and cautions.

reportlab platypus on A4, for posting at the bench. A stockroom.labday.LabDay in, PDF bytes out; no
web or database import.
"""

from __future__ import annotations

import datetime as dt
import io
from typing import Any
from xml.sax.saxutils import escape as _xml_escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.platypus import KeepTogether, Paragraph, SimpleDocTemplate, Spacer, Table

from stockroom import chemistry
from stockroom import formatting as fmt
from stockroom.labday import LabDay, LabDayEntry, cautions
from stockroom.pdf import typeface
from stockroom.pdf.tall_rows import group_ends, split_row

INK = colors.HexColor("#1d2327")
MUTED = colors.HexColor("#5b6770")
LINE = colors.HexColor("#b9c1c6")
BAD = colors.HexColor("#9b2226")
WARN = colors.HexColor("#8a5a00")
WARN_BG = colors.HexColor("#fdf0d5")


def escape(text: str) -> str:
    """Text for a Paragraph: what the typeface can draw (typeface.printable), XML-escaped."""
    return _xml_escape(typeface.printable(str(text)))


def _styles() -> dict[str, ParagraphStyle]:
    base = getSampleStyleSheet()
    body = ParagraphStyle(
        "body", parent=base["BodyText"], fontName=typeface.REGULAR, fontSize=9.5, leading=12.5, textColor=INK, alignment=TA_LEFT
    )
    return {
        "title": ParagraphStyle("title", parent=body, fontName=typeface.BOLD, fontSize=17, leading=21, spaceAfter=2),
        "sub": ParagraphStyle("sub", parent=body, textColor=MUTED, fontSize=9.5, leading=12.5),
        "institution": ParagraphStyle(
            "institution", parent=body, fontName=typeface.BOLD, textColor=MUTED, fontSize=9.5, leading=12
        ),
        "body": body,
        "cell": ParagraphStyle("cell", parent=body, fontSize=9, leading=11.5),
        "head": ParagraphStyle("head", parent=body, fontName=typeface.BOLD, fontSize=8.5, leading=10.5, textColor=MUTED),
        "value": ParagraphStyle("value", parent=body, fontName=typeface.BOLD, fontSize=12.5, leading=15),
        "hold": ParagraphStyle("hold", parent=body, fontName=typeface.BOLD, fontSize=12.5, leading=15, textColor=BAD),
        "flag": ParagraphStyle("flag", parent=body, fontSize=8.5, leading=11, textColor=BAD),
        "note": ParagraphStyle("note", parent=body, fontSize=8, leading=10.5, textColor=MUTED),
        "reason": ParagraphStyle("reason", parent=body, fontName=typeface.BOLD, fontSize=12, leading=16),
    }


_BATCH_COLUMN = 31 * mm
_CELL_PADDING = 6  # pt each side, reportlab's table default


def _code_size(code: str, size: float) -> float:
    """The size the batch ID is set at so it stays on one line in its column (IDs are never broken)."""
    return typeface.fitting_size(code, typeface.BOLD, size, _BATCH_COLUMN - 2 * _CELL_PADDING, 6.0)


def _row(e: LabDayEntry, st: dict[str, ParagraphStyle]) -> list[list[object]]:
    """One batch's cells, each a list of short paragraphs (tall_rows.split_row lays them out over rows)."""
    r = e.release
    t = chemistry.titrant(e.batch.reagent)
    reference = "<b>For reference, not for use:</b><br/>" if e.hold else ""
    certified = (
        f"{reference}{fmt.molarity(r.molarity, r.U)}<br/>{fmt.coverage(r.k)}, at 20 °C<br/>"
        f"released {r.released_on.isoformat()}<br/>expires {r.expires_on.isoformat()}"
    )
    if e.hold and e.latest_recheck is not None:
        c = e.latest_recheck
        certified += f"<br/>latest re-check {fmt.value_at(c.molarity, r.U, 'mol/L')} on {c.on.isoformat()}"
    if e.prediction is not None:
        p = e.prediction
        # Derived figures read to the place the certified value's U sets, like the value itself.
        trend = (
            f"{reference}{fmt.value_at(p.molarity, r.U, 'mol/L')}<br/>{fmt.percent(p.confidence, 0)} interval "
            f"{fmt.value_at(p.pi_low, r.U, '')} to {fmt.value_at(p.pi_high, r.U, 'mol/L')}"
        )
        if e.fit is not None:
            trend += f"<br/>{e.fit.n} standardizations made up to {e.trend_through.isoformat()}"
    else:
        trend = "no trend yet"
    if e.hold:
        # No figure in the box a reader copies from: the hold and its reasons take its place, one
        # paragraph a reason so that many reasons (many open recalls) can run over several rows.
        use: list[object] = [
            Paragraph("ON HOLD", st["hold"]),
            Paragraph(f"No value to use for {e.on.isoformat()}.", st["flag"]),
        ]
        use += [Paragraph(escape(_sentence(reason)), st["flag"]) for reason in e.current.holds]
    else:
        assert e.use_molarity is not None
        use_note = f"at the bench, {fmt.temperature(e.bench_temperature_c)}" if e.molarity_at_bench is not None else "at 20 °C"
        use = [Paragraph(fmt.value_at(e.use_molarity, r.U, "mol/L"), st["value"]), Paragraph(use_note, st["note"])]
    notes = [escape(s) for s in e.plain]
    if e.on < e.known_on:
        notes = [f"<i>That day:</i> {n}" for n in notes] or ["<i>That day:</i> nothing to report."]
        later = [escape(s) for s in e.later_plain] or ["nothing recorded since."]
        notes.append(f"<i>Learnt after {e.on.isoformat()}:</i> {later[0]}")
        notes += later[1:]
    advice = e.advice
    if advice:
        notes.insert(0, f"<b>{escape(advice)}</b>")
    style = st["flag"] if e.flags or advice or e.learnt_later else st["cell"]
    flags = [Paragraph(n, style) for n in notes] or [Paragraph("In service; nothing to report.", st["cell"])]
    return [
        [
            Paragraph(
                f"<b><font size={_code_size(e.batch.code, st['cell'].fontSize)}>{escape(e.batch.code)}</font></b><br/>"
                f"{escape(t.name)}, {e.batch.nominal_molarity:g} mol/L nominal",
                st["cell"],
            )
        ],
        use,
        [Paragraph(certified, st["cell"])],
        [Paragraph(trend, st["cell"])],
        flags,
    ]


def _sentence(text: str) -> str:
    text = text[:1].upper() + text[1:]
    return text if text.endswith((".", "!", "?")) else text + "."


def _footer(printed_on: dt.date):  # type: ignore[no-untyped-def]
    def draw(canvas, doc) -> None:  # type: ignore[no-untyped-def]
        canvas.saveState()
        canvas.setFont(typeface.REGULAR, 7.5)
        canvas.setFillColor(MUTED)
        canvas.drawString(
            doc.leftMargin,
            10 * mm,
            f"stockroom lab-day sheet, printed {printed_on.isoformat()}. "
            "Check the bottle's label against the batch ID before use.",
        )
        canvas.drawRightString(A4[0] - doc.rightMargin, 10 * mm, f"page {doc.page}")
        canvas.restoreState()

    return draw


def labday_sheet_pdf(day: LabDay, *, printed_on: dt.date, institution: str = "", destination_note: str = "") -> bytes:
    """The lab-day sheet as PDF bytes (A4 portrait).

    day: the look-up's answer (stockroom.labday.lab_day); printed_on: the date the sheet is made;
    institution: the INSTITUTION_NAME setting, printed above the title (nothing when empty);
    destination_note: what a destination asked about received, printed under the title (nothing when empty).
    Molarities in mol/L; the certified value at 20 °C, the bench value at day.bench_temperature_c °C.
    """
    st = _styles()
    buf = io.BytesIO()
    doc = SimpleDocTemplate(
        buf,
        initialFontName=typeface.REGULAR,  # no standard font in the file, not even unused
        pagesize=A4,
        leftMargin=14 * mm,
        rightMargin=14 * mm,
        topMargin=14 * mm,
        bottomMargin=18 * mm,
        title=f"Lab day {day.on.isoformat()}",
        author="stockroom",
        subject="Titrant molarities in force on a lab day",
    )
    what = f"{day.titrant} for" if day.titrant else "Titrants for"
    story: list[object] = (
        [Paragraph(escape(typeface.printable(institution.strip())), st["institution"])] if institution.strip() else []
    )
    story.append(Paragraph(f"{escape(what)} the lab day {day.on.isoformat()}", st["title"]))
    sub = (
        f"Certified molarities in force that day, from the stockroom record as of {printed_on.isoformat()}. "
        "Values at 20 °C with their expanded uncertainty U (coverage factor k)"
    )
    if day.bench_temperature_c is not None:
        sub += (
            f"; the large figure is the value at the bench temperature, {fmt.temperature(day.bench_temperature_c)}, for use "
            "with burette readings taken there"
        )
    sub += "."
    if day.future:
        sub += " The day is ahead: flags assume no new standardization before then."
    if day.past:
        sub += (
            f" A past day: each batch shows the record as it stood on {day.on.isoformat()} (its trend through the "
            f"standardizations made up to then), and what was learnt after it up to {printed_on.isoformat()}. "
            "A batch on hold gives no value to use."
        )
    story.append(Paragraph(escape(sub), st["sub"]))
    if destination_note:
        story.append(Paragraph(escape(typeface.printable(destination_note)), st["body"]))
    story.append(Spacer(1, 5 * mm))
    if not day.entries:
        story.append(Paragraph(escape(day.headline or "No titrant batch was in force that day."), st["reason"]))
        if day.detail:
            story.append(Paragraph(escape(day.detail), st["body"]))
    else:
        head = [
            Paragraph(h, st["head"]) for h in ("Batch", "Value to use", "Certified value", "Trend prediction that day", "Flags")
        ]
        groups = [split_row(_row(e, st)) for e in day.entries]
        for e, group in zip(day.entries, groups, strict=True):
            for later_row in group[1:]:  # a batch running over several rows names itself on each
                later_row[0] = [Paragraph(f"{escape(e.batch.code)} (continued)", st["note"])]
        rows: list[list[Any]] = [head]
        for group in groups:
            rows += group
        table = Table(rows, repeatRows=1, colWidths=[_BATCH_COLUMN, 36 * mm, 41 * mm, 33 * mm, None])
        table.setStyle(
            typeface.table_style(
                [
                    ("VALIGN", (0, 0), (-1, -1), "TOP"),
                    ("LINEBELOW", (0, 0), (-1, 0), 0.8, INK),
                    ("TOPPADDING", (0, 0), (-1, -1), 4),
                    ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
                    ("LEFTPADDING", (0, 0), (-1, -1), 3),
                    ("RIGHTPADDING", (0, 0), (-1, -1), 3),
                ]
                # A rule under each batch, not under the rows its long cells run on over.
                + [("LINEBELOW", (0, end), (-1, end), 0.4, LINE) for end in group_ends([len(g) for g in groups])]
            )
        )
        story.append(table)
        story += [
            Spacer(1, 4 * mm),
            Paragraph(
                "Trend prediction: a weighted straight line through the batch's standardizations since its release, "
                "with the interval a new re-check on that day would be expected to fall in. The value to use is the "
                "certified one (at the bench temperature when given); the trend tells whether it still holds. A batch "
                "on hold (beyond tolerance, or under a recall's review) has none.",
                st["note"],
            ),
        ]
    story.append(Spacer(1, 5 * mm))
    lines = cautions(day.entries)
    box = Table(
        [[Paragraph("<b>Safety</b>", st["body"])]] + [[Paragraph(escape(c), st["body"])] for c in lines],
        colWidths=[A4[0] - 28 * mm],
    )
    box.setStyle(
        typeface.table_style(
            [
                ("BOX", (0, 0), (-1, -1), 1.4, WARN),
                ("BACKGROUND", (0, 0), (-1, -1), WARN_BG),
                ("LEFTPADDING", (0, 0), (-1, -1), 7),
                ("RIGHTPADDING", (0, 0), (-1, -1), 7),
                ("TOPPADDING", (0, 0), (-1, -1), 2),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
            ]
        )
    )
    story.append(KeepTogether([box]))
    footer = _footer(printed_on)
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return buf.getvalue()
