"""A replicate's titration curve drawn: reading and its first derivative against volume, the end point ±U.

    d = curve_drawing(points, reading="ph", volume_ml=..., U_ml=..., k=2.0)   # reportlab Drawing (vector)
    svg = curve_svg(points, ..., title="Replicate 1")                          # the same Drawing as SVG text

Render layer: numbers in, a reportlab.graphics Drawing out, so the certificate embeds it as vector
shapes and the run page gets the same picture as inline SVG (renderSVG; no bitmap, no script). Two
panels one above the other, so it stays legible on a 390 px phone: the whole curve, and a close-up of
±ZOOM_HALF_ML around the located end point where the ±U band (U = k u) is wide enough to see. The
derivative is the first difference placed at each interval's midpoint (stockroom.endpoints), on the
right-hand axis. Sizes are points (one SVG px each); the SVG carries a viewBox and scales to its box.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from xml.sax.saxutils import escape

from reportlab.graphics import renderSVG
from reportlab.graphics.shapes import Circle, Drawing, Line, PolyLine, Rect, String
from reportlab.lib import colors

from stockroom import endpoints
from stockroom import formatting as fmt
from stockroom.pdf import typeface
from stockroom.pdf.charts import FONT, GRID, INK, MUTED  # the charts' palette and typeface

SLOPE = colors.HexColor("#8a5a00")
MARK = colors.HexColor("#23527c")
BAND = colors.HexColor("#dce8f4")
ZOOM_HALF_ML = 1.0  # mL either side of the end point in the close-up (common practice: the fine-step region)
WIDTH, PANEL_HEIGHT = 360.0, 170.0  # pt: fits a 390 px phone screen at one px a point
_LEFT, _RIGHT, _BOTTOM, _TOP = 38.0, 44.0, 30.0, 24.0  # pt: margins of each panel for the axes' labels


def _step(span: float, target: int) -> float:
    """A 1-2-2.5-5 step giving about `target` intervals over span (span's unit)."""
    raw = span / max(target, 1) if span > 0 else 1.0
    mag = 10 ** math.floor(math.log10(raw))
    return next(m * mag for m in (1, 2, 2.5, 5, 10) if raw <= m * mag * (1 + 1e-9))


def _ticks(lo: float, hi: float, target: int) -> tuple[list[float], int]:
    """Tick values from lo to hi and the decimals that write each exactly."""
    step = _step(hi - lo, target)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    if abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6:
        decimals += 1
    return ticks, decimals


def _range(values: Sequence[float], pad: float = 0.05) -> tuple[float, float]:
    lo, hi = min(values), max(values)
    if hi - lo < 1e-12:
        lo, hi = lo - 1.0, hi + 1.0
    span = hi - lo
    return lo - pad * span, hi + pad * span


def _panel(
    d: Drawing,
    y0: float,
    points: Sequence[tuple[float, float]],
    reading: str,
    window: tuple[float, float],
    volume_ml: float,
    U_ml: float,
    caption: str,
) -> None:
    """One panel of the drawing: axes with units, the curve, its derivative, the end point and its band."""
    x0, w, h = _LEFT, WIDTH - _LEFT - _RIGHT, PANEL_HEIGHT - _BOTTOM - _TOP
    yb = y0 + _BOTTOM
    vlo, vhi = window
    inside = [(v, e) for v, e in points if vlo <= v <= vhi]
    vols = [v for v, _ in points]
    mids, slope = endpoints.first_derivative(vols, [e for _, e in points])
    d_inside = [(m, abs(s)) for m, s in zip(mids, slope, strict=True) if vlo <= m <= vhi]
    elo, ehi = _range([e for _, e in inside] or [e for _, e in points])
    slo, shi = 0.0, max([s for _, s in d_inside] or [1.0]) * 1.08 or 1.0

    def px(v: float) -> float:
        return x0 + (v - vlo) / (vhi - vlo) * w

    def py(e: float) -> float:
        return yb + (e - elo) / (ehi - elo) * h

    def ps(s: float) -> float:
        return yb + (s - slo) / (shi - slo) * h

    unit = endpoints.UNITS[reading]
    fs = 7.5
    # The ±U band and the end point first, under the curve.
    b_lo, b_hi = max(volume_ml - U_ml, vlo), min(volume_ml + U_ml, vhi)
    if b_hi > b_lo:
        d.add(Rect(px(b_lo), yb, max(px(b_hi) - px(b_lo), 1.0), h, fillColor=BAND, strokeColor=None))
    if vlo <= volume_ml <= vhi:
        d.add(PolyLine([px(volume_ml), yb, px(volume_ml), yb + h], strokeColor=MARK, strokeWidth=1.0, strokeDashArray=[3, 2]))
    # Axes and grid, with their units.
    ticks, dec = _ticks(vlo, vhi, 5)
    for t in ticks:
        d.add(Line(px(t), yb, px(t), yb + h, strokeColor=GRID, strokeWidth=0.5))
        d.add(String(px(t), yb - 10, f"{t:.{dec}f}", fontName=FONT, fontSize=fs, fillColor=MUTED, textAnchor="middle"))
    ticks, dec = _ticks(elo, ehi, 4)
    for t in ticks:
        d.add(Line(x0, py(t), x0 + w, py(t), strokeColor=GRID, strokeWidth=0.5))
        d.add(String(x0 - 3, py(t) - 2.5, f"{t:.{dec}f}", fontName=FONT, fontSize=fs, fillColor=MUTED, textAnchor="end"))
    ticks, dec = _ticks(slo, shi, 4)
    for t in ticks:
        d.add(String(x0 + w + 3, ps(t) - 2.5, f"{t:.{dec}f}", fontName=FONT, fontSize=fs, fillColor=SLOPE))
    d.add(Rect(x0, yb, w, h, fillColor=None, strokeColor=MUTED, strokeWidth=0.6))
    d.add(String(x0 + w / 2, y0 + 4, "Volume added (mL)", fontName=FONT, fontSize=fs, fillColor=INK, textAnchor="middle"))
    d.add(String(x0 - 30, yb + h + 6, unit if reading == endpoints.PH else "E (mV)", fontName=FONT, fontSize=fs, fillColor=INK))
    d.add(
        String(
            x0 + w + 44, yb + h + 6, f"|d{unit}/dV| ({unit}/mL)", fontName=FONT, fontSize=fs, fillColor=SLOPE, textAnchor="end"
        )
    )
    d.add(String(x0, y0 + PANEL_HEIGHT - 10, caption, fontName=FONT, fontSize=8, fillColor=INK))
    # The derivative, then the curve with its points.
    if len(d_inside) >= 2:
        d.add(PolyLine([c for m, s in d_inside for c in (px(m), ps(s))], strokeColor=SLOPE, strokeWidth=0.9))
    if len(inside) >= 2:
        d.add(PolyLine([c for v, e in inside for c in (px(v), py(e))], strokeColor=INK, strokeWidth=1.1))
    if len(inside) <= 80:
        for v, e in inside:
            d.add(Circle(px(v), py(e), 1.4, fillColor=INK, strokeColor=None))


def curve_drawing(
    points: Sequence[tuple[float, float]], *, reading: str, volume_ml: float, U_ml: float, k: float, method: str = ""
) -> Drawing:
    """The curve as a Drawing WIDTH × 2·PANEL_HEIGHT pt: the whole titration above, ±ZOOM_HALF_ML below.

    points: (volume added, mL; reading, pH or mV); reading: endpoints.PH or MV; volume_ml: the located end
    point, mL; U_ml: its expanded uncertainty k·u, mL; k: the coverage factor; method: how it was located
    (words for the caption, e.g. "derivative method").
    """
    d = typeface.drawing(WIDTH, 2 * PANEL_HEIGHT)
    vols = [v for v, _ in points]
    whole = (min(vols), max(vols))
    located = fmt.volume_u(volume_ml, U_ml, k)
    by = f", {method}" if method else ""
    _panel(d, PANEL_HEIGHT, points, reading, whole, volume_ml, U_ml, f"Whole titration · end point {located}{by}")
    half = max(ZOOM_HALF_ML, 4 * U_ml)
    near = (max(volume_ml - half, whole[0]), min(volume_ml + half, whole[1]))
    _panel(d, 0.0, points, reading, near, volume_ml, U_ml, f"Close-up · shaded band: {located}")
    return d


def describe(points: Sequence[tuple[float, float]], *, reading: str, volume_ml: float, U_ml: float, k: float) -> str:
    """A sentence saying what the drawing shows (screen readers, the SVG's desc)."""
    unit = endpoints.UNITS[reading]
    lo, hi = min(e for _, e in points), max(e for _, e in points)
    return (
        f"Titration curve of {len(points)} points, {unit} from {lo:g} to {hi:g} over {points[0][0]:g} to {points[-1][0]:g} mL "
        f"added, with its first derivative; end point located at {fmt.volume_u(volume_ml, U_ml, k)}."
    )


_STYLE = re.compile(r'style="([^"]*)"')


def _as_attributes(match: re.Match[str]) -> str:
    """A style attribute rewritten as SVG presentation attributes (a strict content security policy
    blocks inline style attributes, and the drawing would lose its colours and sizes)."""
    attrs = []
    for decl in match.group(1).split(";"):
        if ":" not in decl:
            continue
        name, value = (part.strip() for part in decl.split(":", 1))
        value = "none" if value == "None" else value
        attrs.append(f'{name}="{value.replace(chr(34), chr(39))}"')
    return " ".join(attrs)


def curve_svg(
    points: Sequence[tuple[float, float]],
    *,
    reading: str,
    volume_ml: float,
    U_ml: float,
    k: float,
    method: str = "",
    title: str = "",
    key: str = "1",
) -> str:
    """The same drawing as SVG text that scales to its box (viewBox; width 100 %), with `title` and a description.

    key: what makes this drawing's element ids unique on its page (letters, digits and hyphens).
    """
    d = curve_drawing(points, reading=reading, volume_ml=volume_ml, U_ml=U_ml, k=k, method=method)
    svg = renderSVG.drawToString(d)
    svg = svg[svg.index("<svg") :]  # inline in a page: no XML declaration or doctype
    svg = svg.replace("<title>...</title>", f"<title>{escape(title or 'Titration curve')}</title>", 1)
    svg = svg.replace(
        "<desc>...</desc>", f"<desc>{escape(describe(points, reading=reading, volume_ml=volume_ml, U_ml=U_ml, k=k))}</desc>", 1
    )
    svg = svg.replace(f"font-family: {FONT};", "font-family: DejaVu Sans, Verdana, Arial, sans-serif;")
    # Scale to the box it sits in: renderSVG writes the viewBox; the fixed size gives way to the box's width.
    svg = svg.replace(f'width="{WIDTH:.1f}" height="{2 * PANEL_HEIGHT:.1f}"', 'width="100%" class="curve-drawing"', 1)
    # Several drawings share a page: each its own clip and group ids.
    n = re.sub(r"[^A-Za-z0-9-]", "-", key)
    svg = svg.replace('id="clip"', f'id="curve-clip-{n}"').replace("url(#clip)", f"url(#curve-clip-{n})")
    svg = svg.replace('id="group"', f'id="curve-group-{n}"')
    return _STYLE.sub(_as_attributes, svg)
