"""The drift chart: what it draws where, as SVG for the batch page and as a Drawing a PDF can embed."""

from __future__ import annotations

import datetime as dt
import io
import re
import xml.etree.ElementTree as ET

import pytest
from pypdf import PdfReader
from reportlab.graphics import renderPDF
from reportlab.graphics.shapes import Circle, Line, PolyLine, Rect, String

from stockroom import drift
from stockroom.drift import Band, Point
from stockroom.pdf import charts

D0 = dt.date(2026, 10, 3)
SVG = "{http://www.w3.org/2000/svg}"


def report(
    days=(0, 14, 28, 42, 56), rel=(0.0, -0.0012, -0.0028, -0.0046, -0.0068), on_day=59, c0=0.10035, u=8e-5
) -> drift.DriftReport:
    """Invented: a 0.1 mol/L NaOH release and re-checks falling as it takes up CO2 (like the demo's batch)."""
    pts = [
        Point(D0 + dt.timedelta(days=d), c0 * (1 + r), u, "release" if d == 0 else "recheck", 2.0)
        for d, r in zip(days, rel, strict=True)
    ]
    return drift.assess(pts, Band(c0, 0.005), D0, D0 + dt.timedelta(days=88), 14, D0 + dt.timedelta(days=on_day))


def shapes(node):
    for item in getattr(node, "contents", []):
        yield item
        yield from shapes(item)


def _y_of(drawing, value, rep):
    """Map a molarity to the chart's y through two known lines: the band edges (drawn as dashed polylines)."""
    edges = sorted(
        {
            s.points[1]
            for s in shapes(drawing)
            if isinstance(s, PolyLine) and s.strokeColor == charts.BAND_EDGE and s.points[1] == s.points[3]
        }
    )
    assert len(edges) == 2
    y_low, y_high = edges
    return y_low + (y_high - y_low) * (value - rep.band.low) / (rep.band.high - rep.band.low)


def test_trend_line_is_drawn_where_the_fit_puts_it():
    rep = report()
    d = charts.drift_drawing(rep, 640, 300)
    solid = [s for s in shapes(d) if isinstance(s, Line) and s.strokeColor == charts.TREND and s.x2 - s.x1 > 20]
    dashed = [s for s in shapes(d) if isinstance(s, PolyLine) and s.strokeColor == charts.TREND]
    assert len(solid) == 1 and len(dashed) == 1  # over the data, then ahead of it
    line = solid[0]
    # The solid part runs from the release to the newest re-check, at the fitted values there.
    assert line.y1 == pytest.approx(_y_of(d, rep.fit.value_at(0), rep), abs=1e-6)
    assert line.y2 == pytest.approx(_y_of(d, rep.fit.value_at(56), rep), abs=1e-6)
    release_box = next(s for s in shapes(d) if isinstance(s, Rect) and s.width == pytest.approx(6.4))
    assert line.x1 == pytest.approx(release_box.x + 3.2)
    assert dashed[0].points[0] == pytest.approx(line.x2)  # the forecast continues where the data stop


def test_certified_value_band_and_error_bars_are_to_scale():
    rep = report()
    d = charts.drift_drawing(rep, 640, 300)
    certified = [
        s for s in shapes(d) if isinstance(s, Line) and s.strokeColor == charts.CERTIFIED and s.y1 == s.y2 and s.x2 - s.x1 > 100
    ]
    assert len(certified) == 1 and certified[0].y1 == pytest.approx(_y_of(d, rep.band.certified, rep))
    dots = [s for s in shapes(d) if isinstance(s, Circle) and s.r == 3.0]
    assert len(dots) == 4  # the four re-checks; the release is the square
    for dot, p in zip(sorted(dots, key=lambda c: c.cx), rep.points[1:], strict=True):
        assert dot.cy == pytest.approx(_y_of(d, p.molarity, rep))
        bar = next(
            s
            for s in shapes(d)
            if isinstance(s, Line)
            and s.x1 == s.x2 == dot.cx
            and s.y2 - s.y1 > 5
            and s.strokeColor in (charts.POINT, charts.OUTSIDE)
        )
        # ± U = ± k·u = ± 1.6e-4 mol/L about the re-check
        assert bar.y1 == pytest.approx(_y_of(d, p.molarity - 1.6e-4, rep))
        assert bar.y2 == pytest.approx(_y_of(d, p.molarity + 1.6e-4, rep))
    # The last re-check (-0.68 %) is outside the ±0.5 % band and drawn in the warning colour.
    assert sorted(dots, key=lambda c: c.cx)[-1].fillColor == charts.OUTSIDE
    assert sorted(dots, key=lambda c: c.cx)[0].fillColor == charts.POINT


def test_axis_titles_units_and_legend():
    d = charts.drift_drawing(report(), 640, 300)
    texts = [s.text for s in shapes(d) if isinstance(s, String)]
    assert "molarity at 20 °C (mol/L)" in texts and "date" in texts
    assert "certified 0.10035 ± 0.00016 mol/L (k = 2)" in texts  # U = 2 × 8e-5 mol/L and "tolerance ±0.50 %" in texts
    assert any(t.startswith("trend left the band 2026-") for t in texts)
    assert "2026-10-03" in texts  # the release day is a date tick


def test_svg_is_well_formed_with_title_description_and_a_dashed_forecast():
    rep = report()
    svg = charts.drift_svg(rep, 720, 320, title="Drift of NAOH-2610-01 as of 2026-12-01")
    root = ET.fromstring(svg.encode("utf-8"))
    assert root.tag == SVG + "svg" and root.get("width") == "720"
    assert root.find(SVG + "title").text == "Drift of NAOH-2610-01 as of 2026-12-01"
    desc = root.find(SVG + "desc").text
    assert "Certified 0.10035 ± 0.00016 mol/L (k = 2)" in desc and "per 30 days" in desc
    dashed = [
        el for el in root.iter(SVG + "polyline") if re.search(r"stroke-dasharray: 5(\.0)?, 3(\.0)?;", el.get("style") or "")
    ]
    assert len(dashed) == 1  # the trend ahead of the data; a closed path would fill its dashes in
    assert "<script" not in svg


def test_scaled_chart_keeps_its_proportions():
    rep = report()
    big = charts.drift_drawing(rep, 1080, 430, font_size=11.5)
    assert (big.width, big.height) == (1080, 430)
    group = big.contents[0]
    assert group.transform[0] == pytest.approx(11.5 / 8.5) and group.transform[3] == pytest.approx(11.5 / 8.5)


def test_without_a_fit_the_chart_says_why_and_draws_no_trend():
    rep = report(days=(0, 14), rel=(0.0, -0.001), on_day=20)
    d = charts.drift_drawing(rep, 640, 300)
    assert not [s for s in shapes(d) if getattr(s, "strokeColor", None) == charts.TREND]
    texts = [s.text for s in shapes(d) if isinstance(s, String)]
    assert any(t.startswith("no trend line: 2 standardizations so far") for t in texts)


def test_the_drawing_embeds_in_a_pdf():
    pdf = renderPDF.drawToString(charts.drift_drawing(report(), 500, 260))
    assert pdf[:5] == b"%PDF-"
    text = PdfReader(io.BytesIO(pdf)).pages[0].extract_text()
    assert "certified 0.10035 ± 0.00016 mol/L (k = 2)" in text and "date" in text
