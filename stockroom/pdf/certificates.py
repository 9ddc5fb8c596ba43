"""Certificate of standardization (PDF), one per release of a batch.

    data = certificate_data(db, release_id, on)    # everything the certificate states, from the records
    pdf = build_certificate(data)                  # A4 PDF bytes

It states the batch and reagent; what the value rests on (the primary-standard lot and its certificate,
or for a secondary standardization the chain of reference batches down to their lots); the replicate
table, statistics, outlier screening, exclusions with their reasons; the uncertainty budget as stored
with the run; the drift chart of the release; who standardized and who released it, when; and lines
to sign. A superseded, expired or withdrawn release says so at the top, so an old certificate on file
is never read as the value in force. The footer prints the audit trail's head when the certificate was
made (entry id and the first 16 hex digits of its MAC), so a paper copy is an anchor for
`stockroom verify --anchor ID:MAC`.
"""

from __future__ import annotations

import datetime as dt
import io
from collections.abc import Mapping
from typing import Any
from xml.sax.saxutils import escape

import sqlite_utils
from reportlab.graphics.shapes import Group
from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    KeepTogether,
    Paragraph,
    SimpleDocTemplate,
    Spacer,
    Table,
    TableStyle,
)

from stockroom import chemistry, readmodel, records
from stockroom import db as dbmod
from stockroom import formatting as fmt
from stockroom.errors import NotFound
from stockroom.pdf import curve_drawing, typeface
from stockroom.pdf.ghs import GHS_RED
from stockroom.pdf.labels import value_text
from stockroom.pdf.typeface import printable
from stockroom.policy import ReleaseFact
from stockroom.records import audit
from stockroom.run_input import CURVE_METHODS

HEAD_MAC_DIGITS = 16  # hex digits of the head's MAC the footer prints (64 bits: enough to anchor, short to copy)
MAX_CHAIN = 12  # reference steps followed before giving up (a loop in the records would be a data fault)
_INK = colors.HexColor("#1d2327")
_RULE = colors.HexColor("#9aa5ab")
_SHADE = colors.HexColor("#eef1f2")
_BODY = ParagraphStyle("body", fontName=typeface.REGULAR, fontSize=9, leading=11.5, textColor=_INK, alignment=TA_LEFT)
_SMALL = ParagraphStyle("small", parent=_BODY, fontSize=7.5, leading=9.5)
_CELL = ParagraphStyle("cell", parent=_BODY, fontSize=8, leading=10)
_CELL_BOLD = ParagraphStyle("cellb", parent=_CELL, fontName=typeface.BOLD)
_H1 = ParagraphStyle("h1", parent=_BODY, fontName=typeface.BOLD, fontSize=17, leading=21, spaceAfter=2)
_H2 = ParagraphStyle("h2", parent=_BODY, fontName=typeface.BOLD, fontSize=11, leading=14, spaceBefore=9, spaceAfter=4)
_VALUE = ParagraphStyle("value", parent=_BODY, fontName=typeface.BOLD, fontSize=15, leading=19)
_INSTITUTION = ParagraphStyle(
    "institution", parent=_BODY, fontName=typeface.BOLD, fontSize=9.5, leading=12, textColor=colors.HexColor("#4a555c")
)
_BANNER = ParagraphStyle("banner", parent=_BODY, fontName=typeface.BOLD, fontSize=10.5, leading=13.5, textColor=colors.white)


def _p(text: Any, style: ParagraphStyle = _CELL) -> Paragraph:
    return Paragraph(escape(printable(str(text))), style)


def _reading(value: float | None, digits: int) -> str:
    """A replicate's reading (g, mL, °C: the unit is in the column head) to the decimals it is read to."""
    return fmt.quantity(value, "", digits).rstrip()


# ---------------------------------------------------------------- gathering


def _user_name(db: sqlite_utils.Database, username: str) -> str:
    rows = dbmod.query(db, "SELECT display_name FROM users WHERE username = ?", [username])
    return f"{rows[0]['display_name']} ({username})" if rows else username


def _release_row(db: sqlite_utils.Database, release_id: int) -> dict[str, Any]:
    rows = dbmod.query(db, "SELECT * FROM releases WHERE id = ?", [release_id])
    if not rows:
        raise NotFound(f"no release with id {release_id}")
    return rows[0]


def _chain(db: sqlite_utils.Database, run: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The reference steps of a secondary standardization, down to the primary lot(s) at the bottom."""
    steps: list[dict[str, Any]] = []
    seen: set[int] = set()
    current = run
    while current["method"] == "secondary" and len(steps) < MAX_CHAIN:
        release_id = current["reference_release_id"]
        if release_id is None or release_id in seen:
            break
        seen.add(release_id)
        ref_release = _release_row(db, release_id)
        ref_batch = records.batch_by_id(db, current["reference_batch_id"])
        ref_run = records.run_by_id(db, ref_release["run_id"])
        lot = records.lot_by_id(db, ref_run["standard_lot_id"]) if ref_run["standard_lot_id"] else None
        number = records.release_number(db, release_id)
        steps.append({"batch": ref_batch, "release": ref_release, "run": ref_run, "lot": lot, "number": number})
        current = ref_run
    return steps


def certificate_data(db: sqlite_utils.Database, release_id: int, on: dt.date) -> dict[str, Any]:
    """Everything the certificate of release `release_id` states, as plain dicts; `on` is the lab's date."""
    release = _release_row(db, release_id)
    batch = records.batch_by_id(db, release["batch_id"])
    run = records.run_by_id(db, release["run_id"])
    lot = records.lot_by_id(db, run["standard_lot_id"]) if run["standard_lot_id"] else None
    later = dbmod.query(db, "SELECT * FROM releases WHERE supersedes_id = ? ORDER BY id LIMIT 1", [release_id])
    facts = readmodel.batch_facts(db, batch["id"])
    fact = next((r for r in facts.releases if r.id == release_id), None)
    numbers = records.release_numbers(db, [release_id, release["supersedes_id"], later[0]["id"] if later else None])
    return {
        "release": release,
        # Releases as people read them: their number within the batch (release 2 of HCL-2606-01).
        "release_number": numbers.get(release_id),
        "supersedes_number": numbers.get(release["supersedes_id"]) if release["supersedes_id"] else None,
        "superseded_by_number": numbers.get(later[0]["id"]) if later else None,
        "batch": batch,
        "run": run,
        "lot": lot,
        "titrant": chemistry.titrant(batch["reagent"]),
        "result": (run["current"] or {}).get("result") or {},
        "chain": _chain(db, run) if run["method"] == "secondary" else [],
        "superseded_by": later[0] if later else None,
        "withdrawal": records.withdrawal_of(db, batch["id"]),
        "released_by": _user_name(db, release["recorded_by"]),
        "recorded_by": _user_name(db, run["recorded_by"]),
        "decision": run["decisions"][-1] if run["decisions"] else None,
        "drift": _drift_report(facts, fact, on),
        "on": on,
        "trail_head": audit.chain_head(db),
    }


def certificate_data_for_batch(db: sqlite_utils.Database, code: str, on: dt.date) -> dict[str, Any]:
    """The certificate data of the release in force of batch `code` on `on`, else of its latest release."""
    from stockroom.policy import latest_release, release_in_force

    batch = records.batch_by_code(db, code)
    facts = readmodel.batch_facts(db, batch["id"])
    release = release_in_force(facts, on) or latest_release(facts, on)
    if release is None:
        raise NotFound(f"batch {code} has not been released, so it has no certificate of standardization yet")
    return certificate_data(db, release.id, on)


def _drift_report(facts: Any, fact: ReleaseFact | None, on: dt.date) -> Any:
    """The release's drift report for the chart (stockroom.policy.drift_on), or None without one."""
    if fact is None:
        return None
    try:
        from stockroom.policy import drift_on
    except ImportError:  # the drift work is not installed: the certificate goes without its chart
        return None
    return drift_on(facts, on, fact)


def _drift_flowable(report: Any, width: float) -> Any:
    """The drift chart as a flowable, from stockroom.pdf.charts.drift_drawing; None when unavailable."""
    if report is None:
        return None
    try:
        from stockroom.pdf.charts import drift_drawing
    except ImportError:  # charts not installed: the certificate states that below instead
        return None
    return drift_drawing(report, width, width * 0.36)


# The coverage factor of an end point's ±U band when the caller gives none (data["curve_k"]: the lab's k).
CURVE_K_DEFAULT = 2.0
_CURVE_SCALE = 0.7  # each curve drawing at 70 %: two side by side across the text width


def _curve_flowables(data: Mapping[str, Any]) -> list[Any]:
    """The run's stored titration curves as vector drawings (stockroom.pdf.curve_drawing), two to a row."""
    k = float(data.get("curve_k") or CURVE_K_DEFAULT)
    cells = []
    for rep in data["run"]["replicates"]:
        curve = rep.get("curve")
        if not curve:
            continue
        method = CURVE_METHODS.get(curve["method"], curve["method"])
        inner = curve_drawing.curve_drawing(
            curve["points"], reading=curve["reading"], volume_ml=curve["volume_ml"], U_ml=k * curve["u_ml"], k=k, method=method
        )
        outer = typeface.drawing(inner.width * _CURVE_SCALE, inner.height * _CURVE_SCALE)
        group = Group(*inner.contents)
        group.scale(_CURVE_SCALE, _CURVE_SCALE)
        outer.add(group)
        taken = ", its titre" if rep.get("initial_ml") is None else ""
        cells.append(
            (outer, _p(f"Replicate {rep['position']}: {len(curve['points'])} points, end point by the {method}{taken}", _SMALL))
        )
    if not cells:
        return []
    tables = []
    for i in range(0, len(cells), 2):
        pair = cells[i : i + 2]
        rows = [[c[0] for c in pair] + [""] * (2 - len(pair)), [c[1] for c in pair] + [""] * (2 - len(pair))]
        table = Table(rows, colWidths=[90 * mm, 90 * mm])
        table.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("BOTTOMPADDING", (0, 1), (-1, 1), 6)]))
        tables.append(table)
    intro = _p(
        "Titration curves as recorded, with the first derivative (right-hand scale) and the located end point; "
        "the shaded band is its ± U. The located standard uncertainty enters the budget's end-point line.",
        _BODY,
    )
    # The heading stays with the first pair of drawings.
    return [KeepTogether([Paragraph("Titration curves", _H2), intro, Spacer(1, 2 * mm), tables[0]]), *tables[1:]]


# ---------------------------------------------------------------- the document


def _kv_table(rows: list[tuple[str, Any]], widths: tuple[float, float]) -> Table:
    body = [[_p(k, _CELL_BOLD), v if isinstance(v, Paragraph) else _p(v)] for k, v in rows]
    t = Table(body, colWidths=list(widths), hAlign="LEFT")
    t.setStyle(
        typeface.table_style(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("LINEBELOW", (0, 0), (-1, -1), 0.25, _RULE),
                ("TOPPADDING", (0, 0), (-1, -1), 2),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
            ]
        )
    )
    return t


def _grid(header: list[str], rows: list[list[Any]], widths: list[float], shade_rows: tuple[int, ...] = ()) -> Table:
    body = [[_p(h, _CELL_BOLD) for h in header]]
    body += [[c if isinstance(c, Paragraph) else _p(c) for c in row] for row in rows]
    t = Table(body, colWidths=widths, repeatRows=1, hAlign="LEFT")
    style = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, _INK),
        ("LINEBELOW", (0, 1), (-1, -1), 0.25, _RULE),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
    ]
    for r in shade_rows:
        style.append(("BACKGROUND", (0, r + 1), (-1, r + 1), _SHADE))
    t.setStyle(typeface.table_style(style))
    return t


def _banner(text: str) -> Table:
    t = Table([[Paragraph(escape(printable(text)), _BANNER)]], colWidths=[180 * mm], hAlign="LEFT")
    t.setStyle(
        typeface.table_style(
            [
                ("BACKGROUND", (0, 0), (-1, -1), GHS_RED),
                ("TOPPADDING", (0, 0), (-1, -1), 5),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
                ("LEFTPADDING", (0, 0), (-1, -1), 6),
            ]
        )
    )
    return t


def status_lines(data: Mapping[str, Any]) -> list[str]:
    """Plain warnings for the top of the certificate: superseded, expired, withdrawn (empty when in force)."""
    release, on = data["release"], data["on"]
    out = []
    later = data["superseded_by"]
    if later is not None:
        out.append(
            f"SUPERSEDED: {fmt.release_name(data.get('superseded_by_number'))} of {later['released_on']} "
            "replaced this value with "
            f"{value_text(later['molarity'], later['expanded_u'], later['k'], later['reference_temperature_c'])}. "
            "This certificate records a value no longer in force."
        )
    if data["withdrawal"] is not None:
        w = data["withdrawal"]
        out.append(f"WITHDRAWN: the batch was withdrawn from use on {w['withdrawn_on']} ({w['reason']}).")
    if dt.date.fromisoformat(release["expires_on"]) < on:
        out.append(f"EXPIRED on {release['expires_on']}: not for use.")
    return out


def _replicate_rows(data: Mapping[str, Any]) -> tuple[list[str], list[list[Any]], list[float], tuple[int, ...]]:
    run, result = data["run"], data["result"]
    secondary = run["method"] == "secondary"
    excluded = {e["position"]: e for e in run["exclusions"]}
    screened = {r["index"] + 1: r for r in result.get("replicates", [])}
    header = [
        "#",
        "Aliquot (mL)" if secondary else "Mass (g)",
        "Initial (mL)",
        "Final (mL)",
        "Titre (mL)",
        "Blank (mL)",
        "Temp. (°C)",
        "Molarity (mol/L)",
        "Used",
    ]
    rows, shaded = [], []
    r_U = data["result"].get("U")  # replicate molarities read to the place the run's U sets
    for i, rep in enumerate(run["replicates"]):
        pos = rep["position"]
        if pos in excluded:
            used = f"excluded: {excluded[pos]['reason']}"
            shaded.append(i)
        elif screened.get(pos, {}).get("outlier"):
            used = "yes (flagged by " + ", ".join(screened[pos].get("outlier_tests", [])) + "; kept)"
        else:
            used = "yes"
        rows.append(
            [
                pos,
                _reading(rep["aliquot_ml"], 2) if secondary else _reading(rep["mass_g"], 4),
                _reading(rep["initial_ml"], 2),
                _reading(rep["final_ml"], 2),
                _reading(rep["volume_ml"], 2),
                _reading(rep["blank_ml"], 2),
                _reading(rep["temperature_c"], 1),
                fmt.value_at(rep["molarity"], r_U, ""),
                used,
            ]
        )
    widths = [7 * mm, 17 * mm, 17 * mm, 16 * mm, 16 * mm, 15 * mm, 15 * mm, 22 * mm, 55 * mm]
    return header, rows, widths, tuple(shaded)


def _coverage_words(release: Mapping[str, Any], result: Mapping[str, Any]) -> str:
    """How the release's k was chosen ('k = 2.78 for 95 % coverage (ν_eff = ...)' or '... fixed by the
    laboratory's procedure'), from the run's result that carries nu_eff and the coverage probability."""
    return fmt.coverage_basis(release["k"], result.get("nu_eff"), result.get("coverage"))


def _statistics(data: Mapping[str, Any]) -> list[tuple[str, Any]]:
    r = data["result"]
    ci = r.get("ci95") or [None, None]
    mc = r.get("monte_carlo") or {}
    mean = r.get("molarity")
    rows = [
        ("Replicates used", f"{r.get('n', '—')} of {r.get('n_total', '—')}"),
        ("Mean molarity", fmt.molarity(r.get("molarity"), r.get("U"), r.get("k"))),
        ("Standard deviation s", fmt.uncertainty(r.get("sd"), "mol/L")),
        ("Relative standard deviation", fmt.relative(r.get("sd"), mean)),
        ("95 % confidence interval of the mean", fmt.interval(ci[0], ci[1], "mol/L")),
        ("Combined standard uncertainty u", f"{fmt.uncertainty(r.get('u'), 'mol/L')} ({fmt.relative(r.get('u'), mean)})"),
        (
            "Expanded uncertainty U",
            f"{fmt.uncertainty(r.get('U'), 'mol/L')} ({fmt.coverage_basis(r.get('k', 2), r.get('nu_eff'), r.get('coverage'))})",
        ),
        (
            "Monte Carlo cross-check (JCGM 101)",
            f"u = {fmt.uncertainty(mc.get('u'), 'mol/L')} from {mc.get('draws', 0):,} draws" if mc else "—",
        ),
        ("Ratio to nominal", fmt.quantity(r.get("nominal_ratio"), "", 4).rstrip()),
        ("Acceptance rule", "met" if r.get("accepted") else "not met: " + "; ".join(r.get("reasons", []))),
    ]
    for line in override_lines(r, (data.get("run") or {}).get("recorded_by")):
        rows.append(("Check gone ahead despite", line))
    return rows


def override_lines(result: Mapping[str, Any], recorded_by: str | None) -> list[str]:
    """Each overridden check of a run's result: '<what it found> — overridden by <who>: <reason>'."""
    who = result.get("overridden_by") or recorded_by or "?"
    return [
        f"{c.get('message')} — overridden by {who}: {c.get('override_reason')}"
        for c in result.get("checks") or []
        if c.get("override_reason")
    ]


def _budget_rows(result: Mapping[str, Any]) -> list[list[Any]]:
    rows = []
    for b in result.get("budget", []):
        source = escape(printable(str(b.get("source", ""))))
        parts = [escape(printable(f"{c['source']}: {c.get('derivation', '')}")) for c in b.get("components", [])]
        if parts:
            source += "<br/><font size=6.5>" + "<br/>".join(parts) + "</font>"
        rows.append(
            [
                Paragraph(source, _CELL),
                fmt.value_at(b.get("value"), b.get("u"), b.get("unit", "")),
                fmt.uncertainty(b.get("u"), b.get("unit", "")),
                fmt.relative(b.get("u"), b.get("value")),
                fmt.percent(b.get("share"), 1),
            ]
        )
    return rows


def _lot_rows(lot: Mapping[str, Any]) -> list[tuple[str, Any]]:
    substance = chemistry.standard(lot["substance"])
    M = substance.molar_mass  # g/mol with its standard uncertainty
    drying = (
        f"dried {lot['dried_on'] or '(date not recorded)'} at {lot['dried_at_c']:g} °C"
        if lot.get("dried_at_c") is not None
        else "not oven-dried"
    )
    if lot.get("storage_note"):
        drying += f"; {lot['storage_note']}"
    return [
        (
            "Primary standard",
            f"{substance.name} ({substance.formula}), M = {fmt.value_at(M.value, M.u, 'g/mol')} "
            f"(standard uncertainty {fmt.uncertainty(M.u, 'g/mol')})",
        ),
        ("Lot", f"{lot['code']} · supplier {lot['supplier'] or '—'}, supplier's lot {lot['supplier_lot'] or '—'}"),
        ("Certificate assay", fmt.percent_u(lot["assay"], lot["assay_expanded_u"], lot["assay_k"])),
        ("Lot expires", lot["expires_on"]),
        ("Drying / storage", drying),
    ]


def _story(data: Mapping[str, Any]) -> list[Any]:
    release, batch, run, titrant = data["release"], data["batch"], data["run"], data["titrant"]
    result = data["result"]
    story: list[Any] = [_p(data["institution"], _INSTITUTION)] if data.get("institution") else []
    story += [
        Paragraph("Certificate of standardization", _H1),
        _p(
            f"Batch {batch['code']} · {titrant.name} ({titrant.formula}), {batch['nominal_molarity']:g} mol/L "
            f"nominal · {fmt.release_name(data.get('release_number'), batch['code'])}",
            _BODY,
        ),
        Spacer(1, 4 * mm),
    ]
    for line in status_lines(data):
        story += [_banner(line), Spacer(1, 2 * mm)]
    story.append(
        KeepTogether(
            [
                _p("Certified molarity", _SMALL),
                _p(
                    value_text(release["molarity"], release["expanded_u"], release["k"], release["reference_temperature_c"]),
                    _VALUE,
                ),
                _p(
                    f"Standard uncertainty u = {fmt.uncertainty(release['u'], 'mol/L')}. U is the expanded uncertainty, "
                    f"U = k · u (JCGM 100:2008), {_coverage_words(release, data.get('result') or {})}. "
                    "This certificate describes one release; a later release supersedes it, and the batch page "
                    "shows the value in force today. Handle the solution as its label and safety data "
                    "sheet say, following local regulations and your institution's chemical hygiene plan.",
                    _SMALL,
                ),
                Spacer(1, 3 * mm),
            ]
        )
    )
    story.append(
        _kv_table(
            [
                ("Released on", f"{release['released_on']} by {data['released_by']}"),
                ("Expires", release["expires_on"]),
                (
                    "Re-check",
                    f"every {release['recheck_interval_days']} days; drift tolerance "
                    f"± {fmt.percent(release['tolerance_rel'])} of the certified value",
                ),
                (
                    "Supersedes",
                    fmt.release_name(data.get("supersedes_number"), batch["code"])
                    if release["supersedes_id"]
                    else "— (first release)",
                ),
            ],
            (45 * mm, 135 * mm),
        )
    )

    story.append(Paragraph("Batch", _H2))
    assay = f", {fmt.percent(batch['concentrate_assay_w_w'], 1)} w/w" if batch.get("concentrate_assay_w_w") else ""
    story.append(
        _kv_table(
            [
                ("Prepared", f"{batch['prepared_on']} by {batch['prepared_by']}"),
                ("Volume", f"{batch['volume_l']:g} L"),
                ("Concentrate lot", f"{batch['concentrate_lot'] or '—'}{assay}"),
                ("Water", batch["water_grade"] or "—"),
                ("Container", batch["container"] or "—"),
            ],
            (45 * mm, 135 * mm),
        )
    )

    story.append(Paragraph("Traceability", _H2))
    if run["method"] == "primary" and data["lot"] is not None:
        story.append(_p("Standardized against a weighed primary standard:", _BODY))
        story.append(_kv_table(_lot_rows(data["lot"]), (45 * mm, 135 * mm)))
    else:
        story.append(
            _p(
                "Secondary standardization: aliquots titrated against a certified reference batch. "
                "The chain, from this batch down to the primary standard:",
                _BODY,
            )
        )
        rows = []
        for i, step in enumerate(data["chain"], start=1):
            rel = step["release"]
            ref_run = step["run"]
            basis = (
                f"lot {step['lot']['code']} ({step['lot']['substance']}, assay "
                f"{fmt.percent_u(step['lot']['assay'], step['lot']['assay_expanded_u'], step['lot']['assay_k'])})"
                if step["lot"]
                else "a further reference batch (next row)"
            )
            rows.append(
                [
                    i,
                    step["batch"]["code"],
                    f"{fmt.release_name(step.get('number'))} of {rel['released_on']}: "
                    f"{fmt.molarity(rel['molarity'], rel['expanded_u'], rel['k'])}",
                    f"{ref_run['performed_on']}, against {basis}",
                ]
            )
        if not rows:
            rows.append(["—", "—", "the reference release could not be traced in the records", "—"])
        story.append(
            _grid(
                ["Step", "Reference batch", "Its release used", "That release rests on"],
                rows,
                [11 * mm, 30 * mm, 64 * mm, 75 * mm],
            )
        )

    story.append(Paragraph("Standardization", _H2))
    story.append(
        _kv_table(
            [
                (
                    "Performed",
                    f"{run['performed_on']} by {run['analyst']} (recorded by {data['recorded_by']} at {run['recorded_at']})",
                ),
                (
                    "Method",
                    "primary standard, weighed"
                    if run["method"] == "primary"
                    else "secondary, against a certified reference batch",
                ),
                ("End point", run["endpoint"] or "—"),
                ("Burette", f"{run['burette_capacity_ml']:g} mL" if run["burette_capacity_ml"] else "—"),
                ("Temperature", fmt.temperature(run["temperature_c"]) if run["temperature_c"] is not None else "not recorded"),
                ("Notes", run["notes"] or "—"),
            ],
            (45 * mm, 135 * mm),
        )
    )
    header, rows, widths, shaded = _replicate_rows(data)
    story += [Spacer(1, 3 * mm), _grid(header, rows, widths, shaded)]
    story += _curve_flowables(data)

    story.append(Paragraph("Statistics", _H2))
    story.append(_kv_table(_statistics(data), (68 * mm, 112 * mm)))
    screening = result.get("screening", [])
    if screening:
        story.append(Paragraph("Outlier screening", _H2))
        story.append(
            _grid(
                ["Test", "Result"], [[s.get("test", "").capitalize(), s.get("note", "")] for s in screening], [22 * mm, 158 * mm]
            )
        )
    story.append(Paragraph("Exclusions", _H2))
    if run["exclusions"]:
        story.append(
            _grid(
                ["Replicate", "Reason", "Recorded"],
                [[e["position"], e["reason"], f"{e['recorded_at']} by {e['recorded_by']}"] for e in run["exclusions"]],
                [20 * mm, 100 * mm, 60 * mm],
            )
        )
    else:
        story.append(_p("None: every replicate was used.", _BODY))

    story.append(Paragraph("Uncertainty budget", _H2))
    story.append(
        _p(
            "Each input's standard uncertainty, relative uncertainty and share of u² (GUM, JCGM 100:2008), "
            "as computed when the run was recorded.",
            _SMALL,
        )
    )
    story += [
        Spacer(1, 2 * mm),
        _grid(
            ["Input", "Value", "u", "u relative", "Share of u²"],
            _budget_rows(result),
            [78 * mm, 28 * mm, 28 * mm, 24 * mm, 22 * mm],
        ),
    ]

    story.append(Paragraph("Drift", _H2))
    chart = _drift_flowable(data["drift"], 180 * mm)
    if chart is not None:
        story.append(chart)
        story.append(
            _p(
                f"The certified value, its tolerance band and the re-checks of this release as of {data['on'].isoformat()}.",
                _SMALL,
            )
        )
    else:
        story.append(_p("No drift chart: this release has no drift record yet.", _BODY))

    decision = data["decision"]
    sig = Table(
        [["Standardized by (signature)", "", "Date", ""], ["Released by (signature)", "", "Date", ""]],
        colWidths=[48 * mm, 72 * mm, 14 * mm, 46 * mm],
        rowHeights=[12 * mm, 12 * mm],
        hAlign="LEFT",
    )
    sig.setStyle(
        typeface.table_style(
            [
                ("FONT", (0, 0), (-1, -1), typeface.REGULAR, 8.5),
                ("VALIGN", (0, 0), (-1, -1), "BOTTOM"),
                ("LINEBELOW", (1, 0), (1, -1), 0.6, _INK),
                ("LINEBELOW", (3, 0), (3, -1), 0.6, _INK),
            ]
        )
    )
    # The people and the lines to sign stay on one page.
    story.append(
        KeepTogether(
            [
                Paragraph("Decision and signatures", _H2),
                _kv_table(
                    [
                        ("Standardized by", f"{run['analyst']} on {run['performed_on']}"),
                        (
                            "Accepted and released by",
                            f"{data['released_by']} at {release['recorded_at']}"
                            + (f" (note: {decision['reason']})" if decision and decision["reason"] else ""),
                        ),
                    ],
                    (52 * mm, 128 * mm),
                ),
                Spacer(1, 2 * mm),
                sig,
            ]
        )
    )
    return story


class _NumberedCanvas(Canvas):
    """A canvas that writes the footer, the trail's head and 'page N of M' once every page is laid out."""

    def __init__(self, *args: Any, footer: str = "", anchor: str = "", **kwargs: Any):
        super().__init__(*args, **kwargs)
        self._pages: list[dict[str, Any]] = []
        self._footer = footer
        self._anchor = anchor

    def showPage(self) -> None:  # noqa: N802 (reportlab's name)
        self._pages.append(dict(self.__dict__))
        self._startPage()

    def save(self) -> None:
        total = len(self._pages)
        for state in self._pages:
            self.__dict__.update(state)
            self.setFont(typeface.REGULAR, 7)
            self.setFillColor(_INK)
            self.drawString(15 * mm, 9 * mm, self._footer)
            self.drawRightString(A4[0] - 15 * mm, 9 * mm, f"page {self._pageNumber} of {total}")
            self.drawString(15 * mm, 5.5 * mm, self._anchor)
            super().showPage()
        super().save()


def head_anchor(head: tuple[int, str] | None) -> str:
    """The audit trail's head as the footer prints it and `stockroom verify --anchor` reads it: `ID:MAC16`."""
    if head is None:
        return "none (the audit trail is empty)"
    entry_id, mac = head
    return f"{entry_id}:{mac[:HEAD_MAC_DIGITS]}"


def build_certificate(data: Mapping[str, Any], institution: str = "") -> bytes:
    """The certificate of standardization as A4 PDF bytes, from certificate_data(...).

    institution: the INSTITUTION_NAME setting, printed above the title (nothing when empty).
    """
    if institution.strip():
        data = {**data, "institution": institution.strip()}
    buf = io.BytesIO()
    batch = data["batch"]
    footer = printable(
        f"stockroom · certificate of standardization · {fmt.release_name(data.get('release_number'), batch['code'])} "
        f"· issued {data['on'].isoformat()}"
    )
    anchor = f"audit trail head when made (entry:MAC, for stockroom verify --anchor): {head_anchor(data.get('trail_head'))}"
    doc = SimpleDocTemplate(
        buf,
        initialFontName=typeface.REGULAR,  # no standard font in the file, not even unused
        pagesize=A4,
        leftMargin=15 * mm,
        rightMargin=15 * mm,
        topMargin=14 * mm,
        bottomMargin=16 * mm,
        title=printable(f"Certificate of standardization, {fmt.release_name(data.get('release_number'), batch['code'])}"),
        author="stockroom",
        creator="stockroom",
        subject=printable(f"{batch['reagent']} {batch['nominal_molarity']:g} mol/L"),
        invariant=1,
    )
    doc.build(_story(data), canvasmaker=lambda *a, **k: _NumberedCanvas(*a, footer=footer, anchor=anchor, **k))
    return buf.getvalue()
