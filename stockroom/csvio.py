"""stockroom's CSV layouts: the replicate sheet (import and export) and the batch history export.

Replicate sheet, one row per replicate, header row required, columns in any order, unknown columns
refused (but the export's computed molarity_mol_l, which is skipped), `#` lines are comments:

    replicate,gross_g,tare_g,mass_g,aliquot_ml,initial_ml,final_ml,blank_ml,temperature_c,exclude_reason

Masses in g (either gross_g and tare_g for mass by difference, or mass_g), volumes in mL, burette
readings as read, temperature in °C; decimal point only. `aliquot_ml` is for a run against a
certified titrant batch (then the mass columns stay empty). A non-empty `exclude_reason` leaves that
replicate out of the result, with that reason.

Curve sheet, one row per point of the replicates' titration curves, header row required:

    replicate,volume_ml,ph        (or replicate,volume_ml,mv)

`replicate` counts the replicate sheet's rows from 1; `volume_ml` is the volume added since the start
of that titration (mL); `ph` or `mv` the reading. Points of one replicate need not be adjacent but keep
their order. Each replicate's points become the text the run form's curve box holds, read (with every
limit) by stockroom.run_input.read_curve, as a pasted or a JSON curve is.

A run's curves are exported in that same layout (write_curves), so the file is read back by this
reader; each replicate's located end point and its standard uncertainty u are `#` comment lines above
the header, which the reader skips.
"""

from __future__ import annotations

import csv
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from stockroom import formatting
from stockroom.csvsafe import SafeCsv
from stockroom.run_input import CURVE_METHODS, CURVE_READINGS

SHEET_COLUMNS = (
    "replicate",
    "gross_g",
    "tare_g",
    "mass_g",
    "aliquot_ml",
    "initial_ml",
    "final_ml",
    "blank_ml",
    "temperature_c",
    "exclude_reason",
)
NUMERIC_COLUMNS = SHEET_COLUMNS[1:9]
# Written by the run export after the sheet's columns (write_run); read back, it is skipped, since a
# run's molarities are always computed again from its readings, so an exported run imports as it is.
COMPUTED_COLUMNS = ("molarity_mol_l",)


@dataclass(frozen=True)
class SheetRow:
    """One replicate read from a sheet: its line number and raw text values by column."""

    line: int
    values: dict[str, str]


@dataclass
class Sheet:
    """A parsed replicate sheet: rows, and problems by line (line 0 is the file as a whole)."""

    rows: list[SheetRow] = field(default_factory=list)
    problems: list[tuple[int, str]] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


MAX_LINE_CHARS = 2000


def _content_lines(text: str) -> list[tuple[int, str]]:
    """The lines of a sheet's text that hold something, with their line numbers (1-based).

    A byte-order mark is dropped; blank lines and comment lines (starting with "#", quoted or not) are skipped.
    """
    if text.startswith("\ufeff"):
        text = text[1:]
    return [
        (i, line)
        for i, line in enumerate(text.splitlines(), start=1)
        if line.strip() and not line.lstrip().lstrip('"').startswith("#")
    ]


def _header(reader: Iterator[list[str]], what: str) -> tuple[list[str], str | None]:
    """A sheet's header row, its names trimmed and in lower case; or why it cannot be read (`what` names it)."""
    try:
        return [h.strip().lower() for h in next(reader)], None
    except csv.Error as exc:
        return [], f"{what} cannot be read: {exc}"


def read_sheet(text: str, max_rows: int) -> Sheet:
    """Read a replicate sheet's text; structure problems are reported per line, values stay text.

    The numbers are checked later by stockroom.run_input, the parser every door uses, so a sheet
    and a typed run can never be judged differently.
    """
    sheet = Sheet()
    lines = _content_lines(text)
    if not lines:
        sheet.problems.append((0, "the file has no header row and no data"))
        return sheet
    reader = csv.reader([line for _, line in lines])
    header, problem = _header(reader, "the header row")
    if problem is not None:
        sheet.problems.append((lines[0][0], problem))
        return sheet
    unknown = [h for h in header if h not in SHEET_COLUMNS and h not in COMPUTED_COLUMNS]
    if unknown:
        sheet.problems.append(
            (
                lines[0][0],
                "unknown column(s) " + ", ".join(repr(h) for h in unknown) + "; the columns are " + ", ".join(SHEET_COLUMNS),
            )
        )
    if len(set(header)) != len(header):
        sheet.problems.append((lines[0][0], "a column name appears twice in the header"))
    if not {"initial_ml", "final_ml"} <= set(header):
        sheet.problems.append((lines[0][0], "the header needs at least initial_ml and final_ml"))
    if sheet.problems:
        return sheet
    data = lines[1:]
    # A replicate row is a few numbers and a reason (at most 500 characters): a longer line is not a
    # sheet row, and the csv module would refuse a cell past its own limit with an exception.
    long_line = next((n for n, line in data if len(line) > MAX_LINE_CHARS), None)
    if long_line is not None:
        sheet.problems.append((long_line, f"is longer than {MAX_LINE_CHARS} characters"))
        return sheet
    if len(data) > max_rows:
        sheet.problems.append((0, f"the file has {len(data)} data rows; at most {max_rows} are accepted"))
        return sheet
    for (line_no, _), cells in zip(data, reader, strict=False):
        if len(cells) != len(header):
            sheet.problems.append((line_no, f"has {len(cells)} cells; the header has {len(header)}"))
            continue
        sheet.rows.append(
            SheetRow(line_no, {h: c.strip() for h, c in zip(header, cells, strict=True) if h not in COMPUTED_COLUMNS})
        )
    if not sheet.rows and not sheet.problems:
        sheet.problems.append((0, "the file has a header but no replicate rows"))
    return sheet


def _fmt(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.10g}"
    return str(value)


def write_run(run: Mapping[str, Any], batch: Mapping[str, Any]) -> str:
    """One run as a replicate sheet (re-importable) followed by its computed molarities, as CSV text."""
    out = SafeCsv()
    current = run["current"]
    out.comment(
        f"stockroom run {run['id']} of batch {batch['code']} ({batch['reagent']}, nominal {batch['nominal_molarity']} mol/L)"
    )
    out.comment(f"{run['purpose']} / {run['method']} on {run['performed_on']} by {run['analyst']}")
    out.comment(
        f"result: {current['molarity']:.6f} mol/L, U = {current['expanded_u']:.6f} mol/L "
        f"(k = {current['k']:g}), n = {current['n']}, at 20 °C"
    )
    out.row([*SHEET_COLUMNS, *COMPUTED_COLUMNS])
    excluded = {e["position"]: e["reason"] for e in run["exclusions"]}
    for rep in run["replicates"]:
        out.row(
            [
                rep["position"],
                *(_fmt(rep.get(c)) for c in NUMERIC_COLUMNS),
                excluded.get(rep["position"], ""),
                _fmt(rep["molarity"]),
            ]
        )
    return out.text()


HISTORY_COLUMNS = (
    "batch",
    "reagent",
    "nominal_mol_l",
    "run_id",
    "purpose",
    "method",
    "performed_on",
    "analyst",
    "standard_or_reference",
    "n",
    "molarity_mol_l",
    "U_mol_l",
    "k",
    "rsd_percent",
    "decision",
    "decision_reason",
    "released_on",
    "expires_on",
    "superseded",
)


def write_history(batch: Mapping[str, Any], history: Mapping[str, Any]) -> str:
    """A batch's runs, decisions and releases, one row per run, as CSV text."""
    releases = {r["run_id"]: r for r in history["releases"]}
    out = SafeCsv()
    out.row(HISTORY_COLUMNS)
    for run in history["runs"]:
        cur = run["current"] or {}
        rel = releases.get(run["id"])
        source = run["lot"]["code"] if run.get("lot") else (run["reference"]["code"] if run.get("reference") else "")
        decision = run["decision"] or {}
        out.row(
            [
                batch["code"],
                batch["reagent"],
                _fmt(batch["nominal_molarity"]),
                run["id"],
                run["purpose"],
                run["method"],
                run["performed_on"],
                run["analyst"],
                source,
                _fmt(cur.get("n")),
                _fmt(cur.get("molarity")),
                _fmt(cur.get("expanded_u")),
                _fmt(cur.get("k")),
                _fmt(cur["rsd"] * 100 if cur.get("rsd") is not None else None),
                decision.get("decision", ""),
                decision.get("reason", ""),
                rel["released_on"] if rel else "",
                rel["expires_on"] if rel else "",
                ("yes" if rel["superseded"] else "no") if rel else "",
            ]
        )
    for wd in history["withdrawals"]:
        out.row(
            [
                batch["code"],
                batch["reagent"],
                _fmt(batch["nominal_molarity"]),
                "",
                "withdrawal",
                "",
                wd["withdrawn_on"],
                wd["recorded_by"],
                "",
                "",
                "",
                "",
                "",
                "",
                "",
                wd["reason"],
                "",
                "",
                "",
            ]
        )
    return out.text()


def rows_as_replicates(rows: Sequence[SheetRow], secondary: bool) -> list[dict[str, str]]:
    """Sheet rows as a run's JSON-shaped replicates (values stay text), read by stockroom.run_input.

    The columns this kind of run does not use are left out (columns_unused reports them); a
    non-empty exclude_reason leaves the replicate out with that reason.
    """
    skip = {"gross_g", "tare_g", "mass_g"} if secondary else {"aliquot_ml"}
    out: list[dict[str, str]] = []
    for row in rows:
        rep = {c: row.values[c] for c in NUMERIC_COLUMNS if c not in skip and row.values.get(c)}
        if row.values.get("exclude_reason"):
            rep["exclude_reason"] = row.values["exclude_reason"]
        out.append(rep)
    return out


def columns_unused(rows: Iterable[SheetRow], secondary: bool) -> list[str]:
    """Columns with values that this kind of run does not use (e.g. masses in a run against a titrant)."""
    unused = {"gross_g", "tare_g", "mass_g"} if secondary else {"aliquot_ml"}
    return sorted({c for r in rows for c in unused if r.values.get(c)})


CURVE_COLUMNS = ("replicate", "volume_ml", "ph", "mv")


@dataclass
class CurveSheet:
    """A parsed curve sheet: the reading kind ("ph" or "mv"), each replicate's points as text lines, problems by line."""

    reading: str = "ph"
    curves: dict[int, list[str]] = field(default_factory=dict)
    problems: list[tuple[int, str]] = field(default_factory=list)


def read_curve_sheet(text: str, max_replicates: int, max_points: int) -> CurveSheet:
    """Read a curve sheet's text: structure checked here (line by line), the numbers by run_input.read_curve.

    max_replicates: the highest replicate number taken; max_points: the most points one replicate may give
    (more is refused here, before any text is built).
    """
    sheet = CurveSheet()
    lines = _content_lines(text)
    if not lines:
        sheet.problems.append((0, "the curve file has no header row and no data"))
        return sheet
    if any(len(line) > MAX_LINE_CHARS for _, line in lines):
        sheet.problems.append((0, f"the curve file has a line longer than {MAX_LINE_CHARS} characters"))
        return sheet
    reader = csv.reader([line for _, line in lines])
    header, problem = _header(reader, "the curve file's header row")
    if problem is not None:
        sheet.problems.append((lines[0][0], problem))
        return sheet
    kinds = [h for h in header if h in ("ph", "mv")]
    if sorted(header) != sorted({"replicate", "volume_ml", *kinds}) or len(kinds) != 1:
        sheet.problems.append(
            (
                lines[0][0],
                "the curve file's header must be replicate, volume_ml and one of ph or mv (got " + ",".join(header) + ")",
            )
        )
        return sheet
    sheet.reading = kinds[0]
    for (line_no, _), cells in zip(lines[1:], reader, strict=False):
        if len(cells) != len(header):
            sheet.problems.append((line_no, f"has {len(cells)} cells; the header has {len(header)}"))
            continue
        row = {h: c.strip() for h, c in zip(header, cells, strict=True)}
        number = row["replicate"]
        if not (number.isascii() and number.isdigit() and 1 <= int(number) <= max_replicates):
            sheet.problems.append((line_no, f"replicate must be a whole number from 1 to {max_replicates}"))
            continue
        if not row["volume_ml"] or not row[sheet.reading]:
            sheet.problems.append((line_no, f"needs both volume_ml and {sheet.reading}"))
            continue
        points = sheet.curves.setdefault(int(number), [])
        if len(points) >= max_points:
            sheet.problems.append((line_no, f"replicate {number} has more than {max_points} points"))
            continue
        points.append(f"{row['volume_ml']}, {row[sheet.reading]}")
    if not sheet.curves and not sheet.problems:
        sheet.problems.append((0, "the curve file has a header but no points"))
    return sheet


def write_curves(run: Mapping[str, Any], batch: Mapping[str, Any], k: float) -> str:
    """A run's titration curves as a curve sheet (replicate, volume_ml, ph|mv) that read_curve_sheet reads back.

    run: as records.run_by_id gives it (each replicate's "curve" with its points, volume_ml and u_ml in mL);
    k: the coverage factor of the U beside each end point (dimensionless). The located end points and
    their u come first as comment lines; the points are written with every digit stored (mL, pH or mV).
    A run's curves share one reading (the run's choice); a run without curves gives the header alone.
    """
    curved = [rep for rep in run["replicates"] if rep.get("curve")]
    reading = curved[0]["curve"]["reading"] if curved else "ph"
    out = SafeCsv()
    out.comment(f"stockroom titration curves of run {run['id']} of batch {batch['code']} ({batch['reagent']})")
    out.comment(
        f"readings in {CURVE_READINGS.get(reading, reading)}; volume_ml is the volume added since the start (mL); "
        "the import page takes this file back as the curve file beside a replicate sheet"
    )
    for rep in curved:
        curve = rep["curve"]
        volume, u = float(curve["volume_ml"]), float(curve["u_ml"])
        out.comment(
            f"replicate {rep['position']}: end point located at {volume:.4f} mL, standard uncertainty "
            f"u = {formatting.uncertainty(u, 'mL')}, that is {formatting.volume_u(volume, k * u, k)}; "
            f"{CURVE_METHODS.get(curve['method'], curve['method'])}, {len(curve['points'])} points"
        )
    out.row(("replicate", "volume_ml", reading))
    for rep in curved:
        for volume_ml, value in rep["curve"]["points"]:
            out.row((rep["position"], float(volume_ml), float(value)))
    return out.text()
