"""GHS hazard pictograms drawn as vector shapes (reportlab Drawings), our own drawing of the UN symbols.

The Globally Harmonized System (UN, open standard) fixes what a pictogram shows: a black symbol on a
white ground inside a red square set on one corner, with a red border wide enough to be clearly seen.
Each symbol here is drawn in a 100 x 100 design box (y upwards) and scaled to the size asked for.

    ghs.pictogram("GHS05", 30 * mm)     -> Drawing, 30 mm square
    ghs.svg("GHS07", 48)                 -> inline SVG text for a web page
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

from reportlab.graphics.shapes import Circle, Drawing, Ellipse, Group, Polygon, Rect
from reportlab.lib import colors

from stockroom.hazards import PICTOGRAMS
from stockroom.pdf import typeface

# GHS red; the standard asks for red, and print shops use a strong warm red (this one is our choice).
GHS_RED = colors.Color(0.86, 0.0, 0.05)
BLACK = colors.black
WHITE = colors.white
BORDER = 6.0  # design units: width of the red border measured across it
_HALF = 50.0  # half-diagonal of the outer diamond
_INNER = _HALF - BORDER * math.sqrt(2)

Point = tuple[float, float]


def _poly(points: Sequence[Point], fill: colors.Color = BLACK, stroke: colors.Color | None = None, width: float = 0) -> Polygon:
    flat: list[float] = []
    for x, y in points:
        flat += [x, y]
    return Polygon(flat, fillColor=fill, strokeColor=stroke, strokeWidth=width, strokeLineJoin=1)


def _spline(points: Sequence[Point], steps: int = 8) -> list[Point]:
    """A closed Catmull-Rom curve through the points, as a polyline (smooth flames at any size)."""
    out: list[Point] = []
    n = len(points)
    for i in range(n):
        p0, p1, p2, p3 = points[i - 1], points[i], points[(i + 1) % n], points[(i + 2) % n]
        for s in range(steps):
            t = s / steps
            t2, t3 = t * t, t * t * t
            out.append(
                tuple(  # type: ignore[arg-type]
                    0.5 * ((2 * b) + (-a + c) * t + (2 * a - 5 * b + 4 * c - d) * t2 + (-a + 3 * b - 3 * c + d) * t3)
                    for a, b, c, d in zip(p0, p1, p2, p3, strict=True)
                )
            )
    return out


def _diamond(group: Group) -> None:
    group.add(_poly([(50, 50 + _HALF), (50 + _HALF, 50), (50, 50 - _HALF), (50 - _HALF, 50)], fill=GHS_RED))
    group.add(_poly([(50, 50 + _INNER), (50 + _INNER, 50), (50, 50 - _INNER), (50 - _INNER, 50)], fill=WHITE))


def _tube(closed: Point, mouth: Point, width: float = 7.0) -> list:
    """A test tube from its rounded closed end to its open mouth, with liquid near the mouth."""
    (cx, cy), (mx, my) = closed, mouth
    length = math.hypot(mx - cx, my - cy)
    dx, dy = (mx - cx) / length, (my - cy) / length
    nx, ny = -dy, dx
    r = width / 2
    outline: list[Point] = [(mx + nx * (r + 1), my + ny * (r + 1)), (mx - nx * (r + 1), my - ny * (r + 1))]
    for k in range(13):  # the rounded end, from one side round to the other
        a = math.pi * k / 12
        ux, uy = -nx * math.cos(a) - dx * math.sin(a), -ny * math.cos(a) - dy * math.sin(a)
        outline.append((cx + ux * r, cy + uy * r))
    liquid_from = 0.45 * length
    lx, ly = cx + dx * liquid_from, cy + dy * liquid_from
    inner = r - 1.6
    liquid = [
        (lx + nx * inner, ly + ny * inner),
        (mx + nx * inner, my + ny * inner),
        (mx - nx * inner, my - ny * inner),
        (lx - nx * inner, ly - ny * inner),
    ]
    return [_poly(outline, fill=WHITE, stroke=BLACK, width=2.2), _poly(liquid)]


def _drops(x: float, ys: Sequence[float]) -> list:
    return [Ellipse(x, y, 1.9, 2.8, fillColor=BLACK, strokeColor=None) for y in ys]


def _corrosion(g: Group) -> None:
    """GHS05: liquid from two test tubes eating into a metal bar (left) and a hand (right)."""
    for shape in _tube((45.5, 79.5), (32.0, 64.0), 9.0) + _tube((54.5, 79.5), (68.0, 64.0), 9.0):
        g.add(shape)
    for shape in _drops(31.0, (57.0, 51.0)) + _drops(69.0, (57.0, 51.0)):
        g.add(shape)
    # The bar, with a bite eaten out where the drops land.
    g.add(
        _poly(
            [
                (17, 46.5),
                (26, 46.5),
                (27.5, 43.0),
                (29.5, 45.2),
                (31.5, 41.8),
                (33.5, 44.8),
                (35.5, 43.2),
                (37, 46.5),
                (47, 46.5),
                (47, 39.0),
                (17, 39.0),
            ]
        )
    )
    # The hand, palm down, fingers to the right, a bite eaten out of its back.
    g.add(
        _poly(
            [
                (53, 38.5),
                (53, 46.0),
                (56, 47.5),
                (63.5, 47.8),
                (65.5, 44.2),
                (67.5, 46.6),
                (69.5, 43.6),
                (71.5, 46.8),
                (78.5, 46.2),
                (81.5, 45.0),
                (81.5, 43.8),
                (76.5, 43.4),
                (80.5, 42.4),
                (80.5, 41.2),
                (75.5, 40.8),
                (78.5, 39.9),
                (78.0, 38.7),
                (66, 38.5),
            ]
        )
    )
    # The surface both rest on.
    g.add(_poly([(31, 35.5), (69, 35.5), (69, 29.0), (31, 29.0)]))


def _exclamation(g: Group) -> None:
    """GHS07: a heavy exclamation mark."""
    top, bottom = 79.0, 38.0
    g.add(_poly(_spline([(44.0, top - 2), (50.0, top + 1.5), (56.0, top - 2), (53.2, bottom), (46.8, bottom)], steps=6)))
    g.add(Circle(50, 29.5, 5.6, fillColor=BLACK, strokeColor=None))


# A flame in a unit box: x from -0.5 to 0.5, y from 0 (base) to 1 (highest tongue).
_FLAME = [
    (0.0, 0.0),
    (-0.38, 0.12),
    (-0.47, 0.4),
    (-0.33, 0.66),
    (-0.24, 0.86),
    (-0.12, 0.62),
    (-0.02, 0.78),
    (0.06, 1.0),
    (0.2, 0.74),
    (0.3, 0.84),
    (0.45, 0.5),
    (0.4, 0.16),
]
_FLAME_CORE = [(0.0, 0.08), (-0.18, 0.2), (-0.16, 0.38), (-0.05, 0.5), (0.02, 0.62), (0.12, 0.46), (0.2, 0.28), (0.14, 0.12)]


def _flame_at(g: Group, x: float, y: float, width: float, height: float, core_fill: colors.Color = WHITE) -> None:
    def place(points: Sequence[Point]) -> list[Point]:
        return [(x + px * width, y + py * height) for px, py in points]

    g.add(_poly(_spline(place(_FLAME))))
    g.add(_poly(_spline(place(_FLAME_CORE)), fill=core_fill))


def _flame(g: Group) -> None:
    """GHS02: a flame on a base line."""
    _flame_at(g, 50, 34.5, 36, 45)
    g.add(_poly([(33, 32.5), (67, 32.5), (67, 27.5), (33, 27.5)]))


def _flame_over_circle(g: Group) -> None:
    """GHS03: a flame over a ring, on a base line (oxidisers)."""
    _flame_at(g, 50, 46.5, 30, 34)
    g.add(Circle(50, 40.5, 10.5, fillColor=BLACK, strokeColor=None))
    g.add(Circle(50, 40.5, 5.5, fillColor=WHITE, strokeColor=None))
    g.add(_poly([(35, 27.5), (65, 27.5), (65, 23.0), (35, 23.0)]))


def _star(cx: float, cy: float, outer: float, inner: float, points: int = 8) -> list[Point]:
    out: list[Point] = []
    for i in range(2 * points):
        r = outer if i % 2 == 0 else inner
        a = math.pi / 2 + i * math.pi / points
        out.append((cx + r * math.cos(a), cy + r * math.sin(a)))
    return out


def _health_hazard(g: Group) -> None:
    """GHS08: a head and shoulders with a burst on the chest (long-term health hazards)."""
    g.add(Circle(50, 68.5, 7.5, fillColor=BLACK, strokeColor=None))
    g.add(_poly([(29, 26), (71, 26), (71, 45), (65, 55), (56, 59), (44, 59), (35, 55), (29, 45)]))
    g.add(_poly(_star(50, 41, 10.5, 4.5), fill=WHITE))


def _environment(g: Group) -> None:
    """GHS09: a bare tree and a fish lying on its back beside water (hazard to the aquatic environment)."""
    g.add(_poly([(35.5, 31), (40.5, 31), (41.5, 63), (38.5, 64)]))  # trunk
    g.add(_poly([(40.5, 51), (50.5, 62.5), (48.5, 64), (39.5, 54.5)]))  # right branch
    g.add(_poly([(39.0, 57), (30.5, 66), (29.0, 64.5), (38.5, 54)]))  # left branch
    g.add(_poly([(26, 31), (74, 31), (74, 27.5), (26, 27.5)]))  # ground
    g.add(Ellipse(57.5, 38.5, 10.0, 4.6, fillColor=BLACK, strokeColor=None))  # the fish
    g.add(_poly([(66, 38.5), (73.5, 44), (73.5, 33)]))  # its tail
    g.add(Circle(51.5, 39.5, 1.4, fillColor=WHITE, strokeColor=None))  # its eye


_SYMBOLS: dict[str, Callable[[Group], None]] = {
    "GHS02": _flame,
    "GHS03": _flame_over_circle,
    "GHS05": _corrosion,
    "GHS07": _exclamation,
    "GHS08": _health_hazard,
    "GHS09": _environment,
}


def available() -> tuple[str, ...]:
    """Codes of the pictograms this module draws (e.g. 'GHS05'), sorted."""
    return tuple(sorted(_SYMBOLS))


def name(code: str) -> str:
    """The pictogram's name in words (e.g. 'corrosion')."""
    return PICTOGRAMS[code]


def group(code: str) -> Group:
    """The pictogram as a Group in the 100 x 100 design box (y upwards); KeyError for a code not drawn."""
    symbol = _SYMBOLS[code]
    g = Group()
    _diamond(g)
    symbol(g)
    return g


def pictogram(code: str, size: float) -> Drawing:
    """The pictogram `code` as a square Drawing `size` points wide (the diamond touches all four sides)."""
    d = typeface.drawing(size, size)
    g = group(code)
    scale = size / 100.0
    g.transform = (scale, 0, 0, scale, 0, 0)
    d.add(g)
    return d


def svg(code: str, size_px: float = 48) -> str:
    """The pictogram as an SVG document string `size_px` pixels square, for showing on a web page."""
    from reportlab.graphics import renderSVG

    d = pictogram(code, size_px)
    d.add(Rect(0, 0, 0, 0, fillColor=None, strokeColor=None))  # keeps renderSVG's viewBox at the drawing
    text = renderSVG.drawToString(d)
    start = text.find("<svg")
    return text[start:] if start >= 0 else text
