"""The traceability chain drawn as SVG: the release at the top, down to its primary-standard lot.

    svg = chain_svg(traceability.chain_of(graph, key), hrefs=..., suspect=..., title=...)

Render layer: the chain (stockroom.traceability, pure) in, SVG text out. Sizes are px; every text is
XML-escaped here, and colours and sizes are SVG presentation attributes (no style attribute or
element, no script), so the drawing can sit inline in a page under a strict content security policy.
Relative uncertainties read as on the pages (stockroom.formatting.relative_percent).
"""

from __future__ import annotations

from collections.abc import Mapping
from xml.sax.saxutils import escape, quoteattr

from stockroom import formatting as fmt
from stockroom.traceability import INSTRUMENT, LOT, PRIMARY, RELEASE, Chain, Node, Step

_W, _H, _GAP = 400, 84, 48  # px: a release or lot box, and the space between rows
_MIN_WIDTH = 580  # px: room for the label beside each connector
_IW, _IH, _IGAP = 210, 72, 14  # px: an instrument box and the space between them
_MARGIN, _REACH = 10, 40  # px: around the drawing; from a release box to its first instrument
_INK, _MUTED, _LINE = "#1d2327", "#5b6770", "#8a949b"
_BAD, _BAD_BG = "#9b2226", "#fbe9e9"
_FILL = {RELEASE: "#ffffff", LOT: "#eef5ee", INSTRUMENT: "#f5f5f0"}
_STROKE = {RELEASE: "#3d5a6c", LOT: "#2f6b3a", INSTRUMENT: "#8a8f94"}


def _fit(text: str, width_px: float, size_px: float) -> str:
    """Text cut to about what fits in width_px at size_px (a sans-serif averages 0.55 em a character)."""
    most = max(4, int(width_px / (size_px * 0.55)))
    return text if len(text) <= most else text[: most - 1].rstrip() + "…"


def _text(x: float, y: float, body: str, size: float, *, weight: str = "normal", fill: str = _INK, anchor: str = "start") -> str:
    return (
        f'<text x="{x:.1f}" y="{y:.1f}" font-size="{size:g}" font-weight="{weight}" fill="{fill}" '
        f'text-anchor="{anchor}">{escape(body)}</text>'
    )


def _box(
    node: Node,
    x: float,
    y: float,
    w: float,
    h: float,
    lines: list[tuple[str, float, str, str]],
    *,
    suspect: bool,
    root: bool,
    href: str | None,
) -> str:
    stroke = _BAD if suspect else _STROKE[node.kind]
    width = 2.5 if suspect or root else 1.2
    fill = _BAD_BG if suspect else _FILL[node.kind]
    parts = [
        f'<rect x="{x:.1f}" y="{y:.1f}" width="{w:.1f}" height="{h:.1f}" rx="6" fill="{fill}" '
        f'stroke="{stroke}" stroke-width="{width:g}"/>'
    ]
    ty = y + 18
    for body, size, weight, colour in lines:
        parts.append(_text(x + 9, ty, _fit(body, w - 18, size), size, weight=weight, fill=colour))
        ty += size + 5
    if suspect:
        parts.append(_text(x + w - 8, y + 16, "SUSPECT", 10, weight="bold", fill=_BAD, anchor="end"))
    inner = "".join(parts)
    if href:
        return f"<a href={quoteattr(href)}><title>{escape(node.label)}</title>{inner}</a>"
    return f"<g><title>{escape(node.label)}</title>{inner}</g>"


def chain_svg(
    chain: Chain, *, hrefs: Mapping[str, str] | None = None, suspect: frozenset[str] = frozenset(), title: str = ""
) -> str:
    """The chain drawn as a small tree (SVG text): the release at the top, down to its primary lot.

    chain: from chain_of; hrefs: node key -> link for its box; suspect: node keys under an open recall
    (drawn in red, marked SUSPECT); title: the drawing's accessible name. Colours and sizes are SVG
    presentation attributes (no style attribute or element, no script), so it can sit inline in a page.
    """
    hrefs = hrefs or {}
    rows: list[tuple[Node, Step | None]] = [(s.release, s) for s in chain.steps]
    if chain.origin is not None:
        rows.append((chain.origin, None))
    kit_max = max((len(s.instruments) for s in chain.steps), default=0)
    width = max(_MIN_WIDTH, _MARGIN * 2 + _W + (_REACH + kit_max * (_IW + _IGAP) - _IGAP if kit_max else 0))
    height = _MARGIN * 2 + len(rows) * _H + max(0, len(rows) - 1) * _GAP
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="chain-tree" role="img" width="{width}" '
        f'height="{height}" viewBox="0 0 {width} {height}" font-family="system-ui, -apple-system, '
        f'Segoe UI, Roboto, Helvetica, Arial, sans-serif"><title>{escape(title or "Traceability chain")}</title>'
    ]
    lines_layer: list[str] = []
    boxes: list[str] = []
    cx = _MARGIN + _W / 2
    for i, (node, step) in enumerate(rows):
        y = _MARGIN + i * (_H + _GAP)
        detail = [(line, 11.5, "normal", _INK) for line in node.detail.split("\n")[:2]]
        if step is not None:
            u_line = f"u_rel {fmt.relative_percent(step.u_rel)}"
            if step.u_rel_added is not None:
                u_line += f" · this step adds {fmt.relative_percent(step.u_rel_added)}"
            lines = [(f"{node.label} · certified value", 13, "bold", _INK), *detail, (u_line, 11.5, "normal", _MUTED)]
        else:
            lines = [
                (f"{node.label} · primary-standard lot", 13, "bold", _INK),
                *detail,
                (f"assay u_rel {fmt.relative_percent(node.u_rel)} (the certificate's U/k)", 11.5, "normal", _MUTED),
            ]
        boxes.append(_box(node, _MARGIN, y, _W, _H, lines, suspect=node.key in suspect, root=i == 0, href=hrefs.get(node.key)))
        if i + 1 < len(rows) and step is not None:
            y0, y1 = y + _H, y + _H + _GAP
            lines_layer.append(
                f'<line x1="{cx:.1f}" y1="{y0:.1f}" x2="{cx:.1f}" y2="{y1 - 6:.1f}" stroke="{_LINE}" stroke-width="1.5"/>'
            )
            lines_layer.append(
                f'<path d="M{cx - 5:.1f},{y1 - 8:.1f} L{cx:.1f},{y1:.1f} L{cx + 5:.1f},{y1 - 8:.1f} Z" fill="{_LINE}"/>'
            )
            used = f" on {step.used_on.isoformat()}" if step.used_on else ""
            label = "rests on: weighed from this lot" if step.role == PRIMARY else "rests on: titrated against this"
            lines_layer.append(_text(cx + 10, y0 + _GAP / 2 + 4, f"{label}{used}", 11, fill=_MUTED))
        if step is not None and step.instruments:
            ym = y + _H / 2
            x_last = _MARGIN + _W + _REACH + (len(step.instruments) - 1) * (_IW + _IGAP)
            lines_layer.append(
                f'<line x1="{_MARGIN + _W:.1f}" y1="{ym:.1f}" x2="{x_last:.1f}" y2="{ym:.1f}" '
                f'stroke="{_LINE}" stroke-width="1.2" stroke-dasharray="4 3"/>'
            )
            for j, (edge, inst) in enumerate(step.instruments):
                ix = _MARGIN + _W + _REACH + j * (_IW + _IGAP)
                iy = y + (_H - _IH) / 2
                ilines = [(f"{inst.label} · {edge.role}", 12, "bold", _INK), (inst.detail, 10.5, "normal", _INK)]
                ilines += [(line, 10.5, "normal", _MUTED) for line in edge.note.split("\n")[:2]]
                boxes.append(
                    _box(inst, ix, iy, _IW, _IH, ilines, suspect=inst.key in suspect, root=False, href=hrefs.get(inst.key))
                )
    out += lines_layer + boxes
    out.append("</svg>")
    return "".join(out)
