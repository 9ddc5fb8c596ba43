"""The drift chart of a batch: certified value, tolerance band, standardizations with ±U, trend and band.

Drawn with reportlab.graphics shapes, so the same Drawing goes into a PDF (a certificate or sheet
embeds it as a flowable) and into SVG for the batch page (renderSVG; no cairo, no bitmap). No web
or database import: a stockroom.drift.DriftReport in, a Drawing or SVG text out.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable, Sequence
from xml.sax.saxutils import escape

from reportlab.graphics import renderSVG
from reportlab.graphics.shapes import Circle, Drawing, Group, Line, Polygon, PolyLine, Rect, String
from reportlab.lib import colors
from reportlab.pdfbase.pdfmetrics import stringWidth

from stockroom import formatting as fmt
from stockroom.drift import DriftReport, Fit, interval_at
from stockroom.pdf import typeface

FONT = typeface.REGULAR
INK = colors.HexColor("#1d2327")
MUTED = colors.HexColor("#5b6770")
GRID = colors.HexColor("#e3e7e9")
BAND_FILL = colors.HexColor("#e3f1e6")
BAND_EDGE = colors.HexColor("#8fbf9c")
CERTIFIED = colors.HexColor("#2c6e3f")
TREND = colors.HexColor("#23527c")
PI_FILL = colors.HexColor("#dce8f4")
POINT = colors.HexColor("#1d2327")
OUTSIDE = colors.HexColor("#9b2226")
ON_LINE = colors.HexColor("#8a5a00")

_SAMPLES = 80  # straight pieces of each prediction-band edge (a hyperbola)


def _dashed(x1: float, y1: float, x2: float, y2: float, dash: list[float] | None, **kw: object) -> Line | PolyLine:
    """A straight line, dashed when `dash` is given; why PolyLine: renderSVG closes a Line's path (M…L…Z),
    and the stroke back over it fills the gaps of the dash."""
    if dash:
        return PolyLine([x1, y1, x2, y2], strokeDashArray=dash, **kw)
    return Line(x1, y1, x2, y2, **kw)


def _nice_step(span: float, target: int) -> float:
    """A 1-2-5 step giving about `target` intervals over span (same unit as span)."""
    raw = span / max(target, 1)
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        if raw <= m * mag:
            return m * mag
    return 10 * mag


def _y_ticks(lo: float, hi: float) -> tuple[list[float], int]:
    step = _nice_step(hi - lo, 6)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = []
    v = first
    while v <= hi + step * 1e-9:
        ticks.append(v)
        v += step
    # Enough decimals to write every tick exactly (a 2.5 step needs one more than its magnitude).
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    while abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6 and decimals < 12:
        decimals += 1
    return ticks, decimals


def _date_ticks(start: dt.date, end: dt.date) -> list[dt.date]:
    """Dates to label: month starts for a long span, else every 7 or 14 days from the start."""
    span = (end - start).days
    if span > 100:
        months = max(1, round(span / 30 / 6))
        out, y, m = [], start.year, start.month
        while True:
            d = dt.date(y, m, 1)
            if d > end:
                break
            if d >= start and (m - 1) % months == 0:
                out.append(d)
            m += 1
            if m > 12:
                y, m = y + 1, 1
        return out
    step = 3 if span <= 24 else 7 if span <= 60 else 14
    return [start + dt.timedelta(days=i) for i in range(0, span + 1, step)]


def _clip_segment(
    x1: float, y1: float, x2: float, y2: float, box: tuple[float, float, float, float]
) -> tuple[float, float, float, float] | None:
    """Liang–Barsky clip of a segment to box (x0, y0, x1, y1); None when it lies wholly outside."""
    bx0, by0, bx1, by1 = box
    dx, dy = x2 - x1, y2 - y1
    t0, t1 = 0.0, 1.0
    for p, q in ((-dx, x1 - bx0), (dx, bx1 - x1), (-dy, y1 - by0), (dy, by1 - y1)):
        if p == 0:
            if q < 0:
                return None
            continue
        r = q / p
        if p < 0:
            t0 = max(t0, r)
        else:
            t1 = min(t1, r)
        if t0 > t1:
            return None
    return (x1 + t0 * dx, y1 + t0 * dy, x1 + t1 * dx, y1 + t1 * dy)


def _certified(report: DriftReport) -> str:
    """The certified value (mol/L) with the release's U when the release point is among the points."""
    release = next((p for p in report.points if p.kind == "release"), None)
    if release is None:
        return fmt.quantity(report.band.certified, "mol/L", 5)
    return fmt.molarity(report.band.certified, release.U, release.k)


def _domain(report: DriftReport) -> tuple[dt.date, dt.date]:
    start = report.released_on
    end = max(report.expires_on, *(p.on for p in report.points))
    # The day asked about joins the axis unless it lies long after the batch's life (an old batch).
    if report.on > end and (report.on - end).days <= max(7, (end - start).days // 10):
        end = report.on
    if (end - start).days < 14:
        end = start + dt.timedelta(days=14)
    return start, end


def _y_range(report: DriftReport, fit: Fit | None, start: dt.date, end: dt.date) -> tuple[float, float]:
    band = report.band
    values = [band.low, band.high]
    for p in report.points:
        values += [p.molarity - p.U, p.molarity + p.U]
    lo, hi = min(values), max(values)
    base = hi - lo
    if fit is not None:
        # Let the trend pull the axis out a little, never so far that the band becomes a hairline.
        for d in (start, end):
            v = fit.value_at(fit.days(d))
            lo = min(lo, max(v, lo - 0.6 * base))
            hi = max(hi, min(v, hi + 0.6 * base))
    pad = 0.10 * (hi - lo)
    return lo - pad, hi + pad


def _marker(report: DriftReport) -> tuple[dt.date, str] | None:
    """The date to mark on the band edge and its legend text: the forecast exit, else the past crossing."""
    if report.fit is None:
        return None
    if report.forecast is not None and report.forecast > report.on:
        return report.forecast, f"trend leaves the band {report.forecast.isoformat()}"
    if report.crossing is not None:
        return report.crossing, f"trend left the band {report.crossing.isoformat()}"
    return None


BASE_FONT = 8.5  # pt: the size the layout below is drawn at; other sizes scale the whole drawing


def drift_drawing(
    report: DriftReport,
    width_pt: float = 640,
    height_pt: float = 300,
    *,
    on_label: str | None = None,
    font_size: float | None = None,
) -> Drawing:
    """The drift chart of one release as a reportlab Drawing (vector; embed in a PDF or render to SVG).

    report: the release's drift (stockroom.drift.assess / policy.drift_on); width_pt, height_pt: size in
    points (1/72 in; one SVG px each); on_label: caption of the vertical line at report.on (default the
    date); font_size: text size in points (default 8.5, or 7 below 420 pt wide); lines and markers
    scale with it. Molarity axis in mol/L at 20 °C, time axis in calendar dates.
    """
    if font_size is not None and abs(font_size - BASE_FONT) > 1e-9:
        k = font_size / BASE_FONT
        inner = _draw(report, width_pt / k, height_pt / k, on_label, BASE_FONT)
        outer = typeface.drawing(width_pt, height_pt)
        group = Group(*inner.contents)
        group.scale(k, k)
        outer.add(group)
        return outer
    return _draw(report, width_pt, height_pt, on_label, BASE_FONT if width_pt >= 420 else 7.0)


def _draw(report: DriftReport, width_pt: float, height_pt: float, on_label: str | None, fs: float) -> Drawing:
    d = typeface.drawing(width_pt, height_pt)
    left, right, bottom = 62.0, 14.0, 40.0
    start, end = _domain(report)
    fit = report.fit
    marker = _marker(report)
    legend_rows = _legend(None, report, left, 0, width_pt - right, fs, marker)
    top = 14.0 + legend_rows * (fs + 5)
    x0, x1 = left, width_pt - right
    y0, y1 = bottom, height_pt - top
    box = (x0, y0, x1, y1)
    ylo, yhi = _y_range(report, fit, start, end)
    span_days = max((end - start).days, 1)
    pad_days = span_days * 0.03  # room for the first and last error bars inside the frame

    def X(day: dt.date | float) -> float:
        t = (day - start).days if isinstance(day, dt.date) else day
        return x0 + (x1 - x0) * (t + pad_days) / (span_days + 2 * pad_days)

    def Y(v: float) -> float:
        return y0 + (y1 - y0) * (v - ylo) / (yhi - ylo)

    def clamp(y: float) -> float:
        return min(max(y, y0), y1)

    band = report.band
    # Plot area and tolerance band, grid, then the prediction band, then the lines over them.
    d.add(Rect(x0, y0, x1 - x0, y1 - y0, fillColor=colors.white, strokeColor=None))
    d.add(Rect(x0, clamp(Y(band.low)), x1 - x0, clamp(Y(band.high)) - clamp(Y(band.low)), fillColor=BAND_FILL, strokeColor=None))
    ticks, decimals = _y_ticks(ylo, yhi)
    for v in ticks:
        d.add(Line(x0, Y(v), x1, Y(v), strokeColor=GRID, strokeWidth=0.5))
        d.add(String(x0 - 4, Y(v) - fs / 3, f"{v:.{decimals}f}", fontName=FONT, fontSize=fs, fillColor=MUTED, textAnchor="end"))
    for day in _date_ticks(start, end):
        d.add(Line(X(day), y0, X(day), y1, strokeColor=GRID, strokeWidth=0.5))
        d.add(Line(X(day), y0, X(day), y0 - 3, strokeColor=MUTED, strokeWidth=0.6))
        d.add(String(X(day), y0 - 5 - fs, day.isoformat(), fontName=FONT, fontSize=fs, fillColor=MUTED, textAnchor="middle"))
    t_end = (end - start).days
    if fit is not None:
        upper, lower = [], []
        for i in range(_SAMPLES + 1):
            t = t_end * i / _SAMPLES
            value, half, _ = interval_at(fit, t)
            upper.append((X(t), clamp(Y(value + half))))
            lower.append((X(t), clamp(Y(value - half))))
        pts: list[float] = []
        for x, y in upper + lower[::-1]:
            pts += [x, y]
        d.add(Polygon(pts, fillColor=PI_FILL, strokeColor=None))
    for edge in (band.low, band.high):
        if y0 <= Y(edge) <= y1:
            d.add(_dashed(x0, Y(edge), x1, Y(edge), [3, 2], strokeColor=BAND_EDGE, strokeWidth=0.8))
    d.add(Line(x0, Y(band.certified), x1, Y(band.certified), strokeColor=CERTIFIED, strokeWidth=1.2))
    if fit is not None:
        last_t = fit.days(fit.last_on)
        segments: tuple[tuple[tuple[float, float], list[float] | None], ...] = (
            ((0, last_t), None),
            ((last_t, t_end), [5.0, 3.0]),
        )
        for (ta, tb), dash in segments:
            if tb <= ta:
                continue
            seg = _clip_segment(X(ta), Y(fit.value_at(ta)), X(tb), Y(fit.value_at(tb)), box)
            if seg:
                d.add(_dashed(*seg, dash, strokeColor=TREND, strokeWidth=1.4))

    # Expiry, the day asked about, and where the trend meets the band.
    if start < report.expires_on <= end:
        xe = X(report.expires_on)
        d.add(Line(xe, y0, xe, y1, strokeColor=MUTED, strokeWidth=0.9))
        d.add(
            String(
                xe - 3,
                y0 + 4,
                f"expires {report.expires_on.isoformat()}",
                fontName=FONT,
                fontSize=fs,
                fillColor=MUTED,
                textAnchor="end",
            )
        )
    if start <= report.on <= end:
        xo = X(report.on)
        d.add(_dashed(xo, y0, xo, y1, [2, 2], strokeColor=ON_LINE, strokeWidth=0.9))
        anchor = "end" if xo > (x0 + x1) / 2 else "start"
        label = on_label or report.on.isoformat()
        w = stringWidth(label, FONT, fs)
        tx = xo + (-3 if anchor == "end" else 3)
        # A white ground keeps the date readable where it crosses a band edge or the prediction band.
        d.add(
            Rect(tx - w - 1 if anchor == "end" else tx - 1, y1 - fs - 4, w + 2, fs + 2, fillColor=colors.white, strokeColor=None)
        )
        d.add(String(tx, y1 - fs - 2, label, fontName=FONT, fontSize=fs, fillColor=ON_LINE, textAnchor=anchor))
    if fit is not None and marker is not None and start <= marker[0] <= end:
        edge = band.low if fit.slope < 0 else band.high
        xm, ym = X(marker[0]), clamp(Y(edge))
        d.add(_triangle(xm, ym, pointing_up=fit.slope < 0))

    # Standardizations with ±U error bars; a point outside the band in red.
    for p in report.points:
        colour = POINT if band.contains(p.molarity) else OUTSIDE
        x = X(p.on)
        lo_y, hi_y = Y(p.molarity - p.U), Y(p.molarity + p.U)
        seg = _clip_segment(x, lo_y, x, hi_y, box)
        if seg:
            d.add(Line(*seg, strokeColor=colour, strokeWidth=0.9))
        for yy in (lo_y, hi_y):
            if y0 <= yy <= y1:
                d.add(Line(x - 3, yy, x + 3, yy, strokeColor=colour, strokeWidth=0.9))
        yv = Y(p.molarity)
        if y0 <= yv <= y1:
            if p.kind == "release":
                d.add(Rect(x - 3.2, yv - 3.2, 6.4, 6.4, fillColor=colors.white, strokeColor=colour, strokeWidth=1.3))
            else:
                d.add(Circle(x, yv, 3.0, fillColor=colour, strokeColor=colors.white, strokeWidth=0.6))

    # Frame, axis titles, legend and the note when there is no trend.
    d.add(Rect(x0, y0, x1 - x0, y1 - y0, fillColor=None, strokeColor=MUTED, strokeWidth=0.8))
    d.add(String((x0 + x1) / 2, 6, "date", fontName=FONT, fontSize=fs, fillColor=INK, textAnchor="middle"))
    ytitle = Group(String(0, 0, "molarity at 20 °C (mol/L)", fontName=FONT, fontSize=fs, fillColor=INK, textAnchor="middle"))
    ytitle.translate(11, (y0 + y1) / 2)
    ytitle.rotate(90)
    d.add(ytitle)
    _legend(d, report, x0, height_pt - 14, x1, fs, marker)
    return d


def _triangle(x: float, y: float, pointing_up: bool, size: float = 4.5) -> Polygon:
    """A small filled triangle whose tip touches (x, y): under the lower edge pointing up, or the reverse."""
    base = y - 1.6 * size if pointing_up else y + 1.6 * size
    return Polygon([x - size, base, x + size, base, x, y], fillColor=OUTSIDE, strokeColor=colors.white, strokeWidth=0.5)


def _legend(
    d: Drawing | None, report: DriftReport, x: float, y: float, x_max: float, fs: float, marker: tuple[dt.date, str] | None
) -> int:
    """Draw the legend from (x, y) leftwards-to-right, wrapping at x_max; return the rows used (d None: measure)."""
    band = report.band
    items: list[tuple[Callable[[float, float], Sequence[object]], str]] = [
        (
            lambda a, b: [Line(a, b + 3, a + 14, b + 3, strokeColor=CERTIFIED, strokeWidth=1.2)],
            f"certified {_certified(report)}",
        ),
        (
            lambda a, b: [Rect(a, b - 1, 14, 8, fillColor=BAND_FILL, strokeColor=BAND_EDGE, strokeWidth=0.6)],
            f"tolerance ±{fmt.percent(band.tolerance_rel)}",
        ),
        (lambda a, b: [Rect(a + 4, b, 6, 6, fillColor=colors.white, strokeColor=POINT, strokeWidth=1.2)], "release"),
        (
            lambda a, b: [
                Line(a + 7, b - 2, a + 7, b + 8, strokeColor=POINT, strokeWidth=0.9),
                Circle(a + 7, b + 3, 2.6, fillColor=POINT, strokeColor=colors.white, strokeWidth=0.5),
            ],
            "re-check, bar ± U",
        ),
    ]
    if report.fit is not None:
        f = report.fit
        items.append(
            (
                lambda a, b: [
                    Rect(a, b - 1, 14, 8, fillColor=PI_FILL, strokeColor=None),
                    Line(a, b + 3, a + 14, b + 3, strokeColor=TREND, strokeWidth=1.4),
                ],
                f"trend (dashed ahead) and {round(f.confidence * 100)} % prediction band",
            )
        )
    if marker is not None:
        items.append((lambda a, b: [_triangle(a + 7, b + 7, pointing_up=True)], marker[1]))
    if report.fit is None and report.fit_note:
        items.append((lambda a, b: [], f"no trend line: {report.fit_note}"))
    cx, row_y, rows = x, y, 1
    for draw, text in items:
        w = 18 + stringWidth(text, FONT, fs) + 12
        if cx + w > x_max and cx > x:
            cx, row_y, rows = x, row_y - fs - 5, rows + 1
        if d is not None:
            for shape in draw(cx, row_y):
                d.add(shape)  # type: ignore[arg-type]
            d.add(String(cx + 18, row_y, text, fontName=FONT, fontSize=fs, fillColor=INK))
        cx += w
    return rows


def drift_svg(
    report: DriftReport,
    width_pt: float = 640,
    height_pt: float = 300,
    *,
    title: str = "",
    on_label: str | None = None,
    font_size: float | None = None,
) -> str:
    """The drift chart as SVG text (UTF-8), with `title` as its accessible title; sizes in points = px."""
    svg = renderSVG.drawToString(drift_drawing(report, width_pt, height_pt, on_label=on_label, font_size=font_size))
    summary = title or "Drift chart"
    desc = _describe(report)
    svg = svg.replace("<title>...</title>", f"<title>{escape(summary)}</title>", 1)
    # The text was measured in the PDFs' typeface; a browser without it takes the nearest sans.
    svg = svg.replace(f"font-family: {FONT};", "font-family: 'DejaVu Sans', Verdana, Arial, sans-serif;")
    return svg.replace("<desc>...</desc>", f"<desc>{escape(desc)}</desc>", 1)


def _describe(report: DriftReport) -> str:
    """A sentence saying what the chart shows, for screen readers and the SVG's desc."""
    band = report.band
    text = (
        f"Certified {_certified(report)}, tolerance ±{fmt.percent(band.tolerance_rel)}, "
        f"{len(report.points)} standardization(s) from {report.released_on.isoformat()}."
    )
    if report.fit is not None:
        f = report.fit
        text += f" Trend {fmt.signed_percent(f.slope_per_period / band.certified, 3)} per 30 days ({fmt.p_value(f.p_value)})."
    if report.forecast is not None:
        text += f" The trend line is outside the band from {report.forecast.isoformat()}."
    return text
