"""The recall impact report as PDF: what is suspect, and every release, batch, lab day and class-data
correction resting on it.

reportlab platypus on A4 portrait. A stockroom.recall.Impact in, PDF bytes out; no web or database
import (the Impact is built by stockroom.recall).
"""

from __future__ import annotations

import datetime as dt
import io
from typing import TYPE_CHECKING
from xml.sax.saxutils import escape as _xml_escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.platypus import KeepTogether, Paragraph, SimpleDocTemplate, Spacer, Table

from stockroom import formatting as fmt
from stockroom.pdf import typeface

if TYPE_CHECKING:
    from stockroom.recall import Impact

INK = colors.HexColor("#1d2327")
MUTED = colors.HexColor("#5b6770")
LINE = colors.HexColor("#b9c1c6")
BAD = colors.HexColor("#9b2226")
BAD_BG = colors.HexColor("#fbe9e9")
OK = colors.HexColor("#2f6b3a")
WIDTH = A4[0] - 28 * mm


def escape(text: str) -> str:
    """Text for a Paragraph: what the typeface can draw (typeface.printable), XML-escaped."""
    return _xml_escape(typeface.printable(str(text)))


def _styles() -> dict[str, ParagraphStyle]:
    base = getSampleStyleSheet()
    body = ParagraphStyle(
        "body", parent=base["BodyText"], fontName=typeface.REGULAR, fontSize=9.5, leading=12.5, textColor=INK, alignment=TA_LEFT
    )
    return {
        "title": ParagraphStyle("title", parent=body, fontName=typeface.BOLD, fontSize=16, leading=20, spaceAfter=2),
        "h2": ParagraphStyle("h2", parent=body, fontName=typeface.BOLD, fontSize=11.5, leading=14, spaceBefore=8, spaceAfter=3),
        "sub": ParagraphStyle("sub", parent=body, textColor=MUTED),
        "body": body,
        "cell": ParagraphStyle("cell", parent=body, fontSize=8.5, leading=10.5),
        "head": ParagraphStyle("head", parent=body, fontName=typeface.BOLD, fontSize=8, leading=10, textColor=MUTED),
        "bad": ParagraphStyle("bad", parent=body, fontName=typeface.BOLD, textColor=BAD),
        "ok": ParagraphStyle("ok", parent=body, fontName=typeface.BOLD, textColor=OK),
        "note": ParagraphStyle("note", parent=body, fontSize=8, leading=10.5, textColor=MUTED),
    }


def _cell(text: str, width: float | None, style: ParagraphStyle) -> Paragraph:
    """A cell; a single token (a batch ID, a date) is set smaller rather than broken when its column is narrow."""
    if width is None or " " in text.strip():
        return Paragraph(escape(text), style)
    size = typeface.fitting_size(text, style.fontName, style.fontSize, width - 6, 6.0)  # 3 pt padding each side
    if size >= style.fontSize:
        return Paragraph(escape(text), style)
    return Paragraph(f"<font size={size:g}>{escape(text)}</font>", style)


def _table(
    head: list[str], rows: list[list[str]], widths: list[float | None], st: dict[str, ParagraphStyle], *, urgent: bool = False
) -> Table:
    data = [[Paragraph(escape(h), st["head"]) for h in head]]
    data += [[_cell(c, w, st["cell"]) for c, w in zip(r, widths, strict=False)] for r in rows]
    t = Table(data, repeatRows=1, colWidths=widths)
    style = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, INK),
        ("LINEBELOW", (0, 1), (-1, -1), 0.4, LINE),
        ("TOPPADDING", (0, 0), (-1, -1), 3),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
    ]
    if urgent:
        style.append(("BACKGROUND", (0, 1), (-1, -1), BAD_BG))
    t.setStyle(typeface.table_style(style))
    return t


def _footer(recall_id: int, printed_on: dt.date):  # type: ignore[no-untyped-def]
    def draw(canvas, doc) -> None:  # type: ignore[no-untyped-def]
        canvas.saveState()
        canvas.setFont(typeface.REGULAR, 7.5)
        canvas.setFillColor(MUTED)
        canvas.drawString(
            doc.leftMargin,
            10 * mm,
            f"stockroom recall {recall_id}, impact report printed "
            f"{printed_on.isoformat()}. The record may have changed since: check the recall page.",
        )
        canvas.drawRightString(A4[0] - doc.rightMargin, 10 * mm, f"page {doc.page}")
        canvas.restoreState()

    return draw


def _value(molarity: float, U: float, k: float) -> str:
    return fmt.molarity(molarity, U, k)


def recall_report_pdf(report: Impact, *, printed_on: dt.date) -> bytes:
    """The impact report of a recall as PDF bytes (A4 portrait).

    report: stockroom.recall.impact(...) as of report.on; printed_on: the date the PDF is made.
    Molarities in mol/L at 20 °C with U and k as released.
    """
    st = _styles()
    rc = report.recall
    buf = io.BytesIO()
    doc = SimpleDocTemplate(
        buf,
        initialFontName=typeface.REGULAR,  # no standard font in the file, not even unused
        pagesize=A4,
        leftMargin=14 * mm,
        rightMargin=14 * mm,
        topMargin=14 * mm,
        bottomMargin=18 * mm,
        title=f"Recall {rc.id}: impact report",
        author="stockroom",
        subject=f"What rests on {rc.subject_label}",
    )
    story: list[object] = [
        Paragraph(escape(f"Recall {rc.id}: {rc.subject_label}"), st["title"]),
        Paragraph(
            escape(
                f"Impact as of {report.on.isoformat()}, from the stockroom record. Everything listed rests, "
                "directly or through secondary standardizations, on the suspect item."
            ),
            st["sub"],
        ),
        Spacer(1, 3 * mm),
    ]
    state = (
        f"Cleared on {rc.cleared.cleared_on.isoformat()} by {rc.cleared.recorded_by}: {rc.cleared.reason}"
        if rc.cleared
        else "Open"
    )
    facts = [
        ("Suspect item", f"{rc.subject_label}: {rc.subject_detail}"),
        ("Suspect from", rc.suspect_from.isoformat()),
        ("Reason", rc.reason),
        ("Recorded", f"{rc.opened_on.isoformat()} by {rc.recorded_by}"),
        ("State", state),
    ]
    box = Table(
        [[Paragraph(f"<b>{escape(k)}</b>", st["cell"]), Paragraph(escape(v), st["cell"])] for k, v in facts],
        colWidths=[32 * mm, WIDTH - 32 * mm],
    )
    box.setStyle(
        typeface.table_style(
            [
                ("BOX", (0, 0), (-1, -1), 1, INK),
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("LINEBELOW", (0, 0), (-1, -2), 0.3, LINE),
                ("TOPPADDING", (0, 0), (-1, -1), 3),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 4),
            ]
        )
    )
    story += [box, Spacer(1, 3 * mm)]
    n_review = len(report.under_review)
    summary = (
        f"{len(report.releases)} certified value{'s' if len(report.releases) != 1 else ''} reached; "
        f"{len(report.batches)} batch{'es' if len(report.batches) != 1 else ''} resting on them, "
        f"{n_review} in use under review; {report.lab_days} day{'s' if report.lab_days != 1 else ''} "
        f"with a suspect value in force; {len(report.corrections)} class-data correction"
        f"{'s' if len(report.corrections) != 1 else ''} made with one."
    )
    story.append(Paragraph(escape(summary), st["bad"] if n_review else st["body"]))

    story.append(Paragraph("Batches in use, under review", st["h2"]))
    if report.under_review:
        story.append(
            _table(
                ["Batch", "Titrant", "Status", "Why"],
                [[b.code, f"{b.reagent} {b.nominal_molarity:g} mol/L", b.status, b.note] for b in report.under_review],
                [30 * mm, 30 * mm, 26 * mm, None],
                st,
                urgent=True,
            )
        )
        story.append(
            Paragraph(
                "Stop using these values until the batch is re-standardized on a chain free of the "
                "suspect item, or the recall is cleared for it with a reason.",
                st["note"],
            )
        )
    else:
        story.append(Paragraph("None: no batch in use rests on the suspect item.", st["ok"]))

    others = [b for b in report.batches if not b.in_service_under_review]
    if others:
        story.append(Paragraph("Other batches that rested on it", st["h2"]))
        story.append(
            _table(
                ["Batch", "Titrant", "State", "Note"],
                [[b.code, f"{b.reagent} {b.nominal_molarity:g} mol/L", b.state, b.note] for b in others],
                [30 * mm, 30 * mm, 26 * mm, None],
                st,
            )
        )

    story.append(Paragraph("Certified values reached", st["h2"]))
    if report.releases:
        story.append(
            _table(
                ["Batch", "Release", "Certified value (20 °C)", "Rests on", "Links", "Suspect", "Days in force"],
                [
                    [
                        r.batch_code,
                        f"{r.number or '—'} ({r.released_on.isoformat()})",
                        _value(r.molarity, r.U, r.k),
                        r.via,
                        str(r.depth),
                        r.suspect_from.isoformat() if r.suspect_from else "whole life",
                        str(r.days_in_force),
                    ]
                    for r in report.releases
                ],
                [24 * mm, 22 * mm, 44 * mm, None, 11 * mm, 17 * mm, 15 * mm],
                st,
            )
        )
        story.append(
            Paragraph(
                "Links: 0 is the suspect batch's own value, 1 a value resting directly on the suspect "
                "item, 2 a value standardized against one of those, and so on.",
                st["note"],
            )
        )
    else:
        story.append(Paragraph("None: no certified value rests on the suspect item from that date.", st["ok"]))

    periods = [(r, p) for r in report.releases for p in r.periods]
    story.append(Paragraph("Days on which a suspect value was in force", st["h2"]))
    if periods:
        story.append(
            _table(
                ["Batch", "Release", "From", "To", "Days"],
                [[r.batch_code, str(r.number or "—"), p.start.isoformat(), p.end.isoformat(), str(p.days)] for r, p in periods],
                [30 * mm, 22 * mm, 30 * mm, 30 * mm, None],
                st,
            )
        )
        story.append(
            Paragraph(
                "Calendar days, both ends included: stockroom keeps no teaching timetable, so any of "
                "them may have been a lab day. The lab-day look-up gives the value in force on each.",
                st["note"],
            )
        )
    else:
        story.append(Paragraph("None up to the report's date.", st["body"]))

    story.append(Paragraph("Containers and destinations that received suspect solution", st["h2"]))
    if report.containers:
        story.append(
            _table(
                ["Container", "Batch", "Filled", "Volume", "Destination", "In use while suspect"],
                [
                    [
                        c.code,
                        c.batch_code,
                        c.filled_on.isoformat(),
                        fmt.quantity(c.volume_l, "L", 3),
                        c.destination,
                        f"{c.from_day.isoformat()} to {c.to_day.isoformat()}",
                    ]
                    for c in report.containers
                ],
                [34 * mm, 28 * mm, 20 * mm, 16 * mm, 38 * mm, None],
                st,
            )
        )
        story.append(
            Paragraph(
                "Destinations: "
                + "; ".join(
                    f"{d.destination} ({len(d.containers)} container{'s' if len(d.containers) != 1 else ''}, "
                    f"{d.first_day.isoformat()} to {d.last_day.isoformat()})"
                    for d in report.destinations
                )
                + ". Tell the instructors of these sections which days their values are in doubt.",
                st["note"],
            )
        )
    else:
        story.append(Paragraph("None recorded: no container filled from a reached batch was in use while suspect.", st["body"]))

    story.append(Paragraph("Class-data corrections made with a suspect value", st["h2"]))
    if report.corrections:
        story.append(
            _table(
                ["Lab day", "Batch", "Release", "Molarity used", "Rows", "Recorded"],
                [
                    [
                        c["lab_day"],
                        c["batch_code"],
                        str(c.get("release_number") or "—"),
                        fmt.quantity(c["molarity_used"], "mol/L", 6),
                        str(c["row_count"]),
                        f"{c['recorded_at'][:10]} by {c['recorded_by']}",
                    ]
                    for c in report.corrections
                ],
                [22 * mm, 28 * mm, 16 * mm, 30 * mm, 12 * mm, None],
                st,
            )
        )
        story.append(
            Paragraph("Each of these was computed with a value now in doubt: tell the instructor who made it.", st["note"])
        )
    else:
        story.append(Paragraph("None.", st["body"]))
    if rc.clearances:
        story.append(Paragraph("Clearances", st["h2"]))
        story.append(
            KeepTogether(
                [
                    _table(
                        ["Cleared", "For", "By", "Reason"],
                        [
                            [c.cleared_on.isoformat(), c.batch_code or "the whole recall", c.recorded_by, c.reason]
                            for c in rc.clearances
                        ],
                        [22 * mm, 32 * mm, 26 * mm, None],
                        st,
                    )
                ]
            )
        )
    footer = _footer(rc.id, printed_on)
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return buf.getvalue()
