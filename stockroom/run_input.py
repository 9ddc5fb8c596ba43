"""One standardization run's input, read the same way at every door: form, CSV, JSON API, preview.

Pure: no Flask, no database. The input is JSON-shaped data (nested dicts and lists; numbers as JSON
numbers or plain decimal text), the output a frozen RunInput. Errors are collected and raised once
as InvalidInput, each named by its request path (`replicates[2].final_ml`, 0-based). The run form's
fields have their own names (`r3_final_ml`, 1-based rows); form_name() and request_path() map one
onto the other, from_form() and to_form() carry a whole grid across, and label() names a field the
way the form's labels read it ("Replicate 3, final reading").

Whatever needs the records (the lot usable that day, the reference's value in force, the instruments
on the register) is checked by workflow.record_run; dates that need "today" or the batch's prepared
date take them as arguments.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import stockroom.endpoints as endpoints
from stockroom.errors import FieldError, InvalidInput
from stockroom.parsing import MISSING, Parser, date_problem, field_path, kind_of
from stockroom.standardization import OVERRIDABLE_CHECKS


@dataclass(frozen=True)
class Limits:
    """Every limit a run's input is held to. One table, used by the form, the CSV import, the JSON API
    and the preview alike; each value is the strictest of what those doors used to accept."""

    # A weighed portion of primary standard: at least 1 mg (ten digits of a 0.1 mg balance, below which
    # the weighing is mostly its own uncertainty) and at most 50 g (far past any titration; a larger
    # figure is a unit slip, mg typed for g). The form's range; the preview took 0.01 mg to 1000 g.
    min_mass_g: float = 0.001
    max_mass_g: float = 50.0
    # A gross or tare weighing: a weighing bottle or beaker on a bench balance, at most 1000 g.
    max_weighing_g: float = 1000.0
    # The smallest volume that can be delivered and read at all (a titre, an aliquot, a titre less
    # its blank): a thousandth of a mL; below it the arithmetic would reach nonsense, not an answer.
    min_volume_ml: float = 0.001
    # An aliquot taken with a pipette or flask: at most 500 mL (the form's limit; the preview took 1000).
    max_aliquot_ml: float = 500.0
    # The burettes the prep room offers (mL); a reading is refused past the chosen burette's scale,
    # and past the largest of them when a request names none (the preview used to take 1000 mL).
    burettes_ml: tuple[float, ...] = (10.0, 25.0, 50.0, 100.0)
    # A blank titration: at most 5 mL (a blank larger than that is a fault in the method, common
    # practice); it must also leave a titre of at least min_volume_ml. The preview took 1000 mL.
    max_blank_ml: float = 5.0
    # Titrant temperature, °C: the range the temperature referral of the burette volume is made for.
    min_temperature_c: float = 5.0
    max_temperature_c: float = 40.0
    # Temperature of the solution being titrated, °C (permanganate and cerium(IV) against oxalate are
    # titrated hot): from 5 °C up to boiling water.
    min_titration_temperature_c: float = 5.0
    max_titration_temperature_c: float = 100.0
    # Replicates in one run: 50 (every door's limit; more is a pasted sheet gone wrong).
    max_replicates: int = 50
    # Text lengths (characters): the analyst's name, the end point or indicator, the notes, a reason
    # for leaving a replicate out, a reference batch's code (batch codes are at most 40 characters).
    max_analyst: int = 120
    max_endpoint: int = 200
    max_notes: int = 2000
    max_reason: int = 500
    max_batch_code: int = 40
    # A replicate's titration curve: from endpoints' MIN_POINTS to MAX_POINTS points (fewer cannot show a
    # break; more is a logger's whole file, not a manual titration), volumes added from 0 mL up to the
    # burette's scale, readings within endpoints.READING_RANGE (pH -2 to 16, mV -2000 to 2000). The
    # pasted text is at most 40 characters a point.
    min_curve_points: int = endpoints.MIN_POINTS
    max_curve_points: int = endpoints.MAX_POINTS
    max_curve_chars: int = 40 * endpoints.MAX_POINTS
    # A typed titre and the end point located on the curve may differ by at most this many standard
    # uncertainties of the located volume; past it the run is refused (the two cannot both be right).
    curve_titre_max_u: float = 3.0

    @property
    def max_reading_ml(self) -> float:
        """The largest burette offered, mL: the scale a reading is held to when no burette is named."""
        return max(self.burettes_ml)


LIMITS = Limits()

METHODS = ("primary", "secondary")
PURPOSES = ("certify", "recheck")
# The instruments a run may name, by method (role -> the form's and the request's `<role>_id`).
ROLES: dict[str, tuple[str, ...]] = {"primary": ("balance", "burette"), "secondary": ("burette", "pipette")}

COMMON_KEYS = (
    "method",
    "purpose",
    "performed_on",
    "analyst",
    "burette_capacity_ml",
    "temperature_c",
    "titration_temperature_c",
    "endpoint",
    "notes",
    "curve_reading",
    "curve_method",
)
PARTNER_KEY = {"primary": "standard_lot_id", "secondary": "reference_batch"}
REPLICATE_KEYS: dict[str, tuple[str, ...]] = {
    "primary": ("gross_g", "tare_g", "mass_g", "initial_ml", "final_ml", "blank_ml", "temperature_c", "exclude_reason"),
    "secondary": ("aliquot_ml", "initial_ml", "final_ml", "blank_ml", "temperature_c", "exclude_reason"),
}
# The numeric columns of the grid, in the order the form shows them.
GRID_COLUMNS: dict[str, tuple[str, ...]] = {m: tuple(k for k in REPLICATE_KEYS[m] if k != "exclude_reason") for m in METHODS}
# A replicate may carry its titration curve (lines of "volume, reading"): a text box below the grid's row.
CURVE_KEY = "curve"
# What a curve's readings are and how its end point is located (the run's choice, for every replicate).
CURVE_READINGS = {endpoints.PH: "pH", endpoints.MV: "mV (electrode potential)"}
CURVE_METHODS = {
    endpoints.DERIVATIVE: "derivative method",
    endpoints.SECOND_DERIVATIVE: "second-derivative method",
    endpoints.GRAN: "Gran's method",
}
# Paths the science core names that the grid shows under another column (the titre is typed as readings).
PATH_ALIASES = {"volume_ml": "final_ml"}

LABELS = {
    "method": "Kind of run",
    "purpose": "Purpose",
    "performed_on": "Titrated on",
    "analyst": "Analyst",
    "burette_capacity_ml": "Burette",
    "temperature_c": "Titrant temperature",
    "titration_temperature_c": "Temperature of the titrated solution",
    "endpoint": "End point / indicator",
    "notes": "Notes",
    "curve_reading": "Curve readings",
    "curve_method": "End point located by",
    "standard_lot_id": "Primary-standard lot",
    "reference_batch": "Certified reference batch",
    "balance_id": "Balance used",
    "burette_id": "Burette used",
    "pipette_id": "Pipette used",
    "replicates": "Replicates",
    "batch": "Batch",
}
REPLICATE_LABELS = {
    "gross_g": "gross weighing",
    "tare_g": "tare weighing",
    "mass_g": "mass",
    "aliquot_ml": "aliquot",
    "initial_ml": "initial reading",
    "final_ml": "final reading",
    "volume_ml": "titre",
    "blank_ml": "blank",
    "temperature_c": "temperature",
    "exclude_reason": "reason for leaving it out",
    "curve": "titration curve",
}


@dataclass(frozen=True)
class CurveInput:
    """A replicate's titration curve as read and its located end point.

    reading: endpoints.PH or endpoints.MV; method: one of endpoints.METHODS; points: (volume added, mL;
    reading, pH or mV) pairs as recorded; end_point: the located volume (mL, counted from the first
    point's 0 of added titrant) and its standard uncertainty.
    """

    reading: str
    method: str
    points: tuple[tuple[float, float], ...]
    end_point: endpoints.EndPoint

    def stored(self) -> dict[str, Any]:
        """The curve as the record layer stores it (one row per replicate, the points as JSON)."""
        ep = self.end_point
        return {
            "reading": self.reading,
            "method": self.method,
            "points": [list(pt) for pt in self.points],
            "volume_ml": ep.volume_ml,
            "u_ml": ep.u_ml,
            "u_step_ml": ep.u_step_ml,
            "u_noise_ml": ep.u_noise_ml,
            "u_fit_ml": ep.u_fit_ml,
        }


@dataclass(frozen=True)
class ReplicateInput:
    """One replicate as read: burette readings and titre (mL), blank (mL), temperature (°C), and either
    the mass of standard (g: direct, or gross and tare) or the aliquot of this batch (mL)."""

    volume_ml: float
    initial_ml: float | None = None
    final_ml: float | None = None
    blank_ml: float = 0.0
    temperature_c: float | None = None
    mass_g: float | None = None
    gross_g: float | None = None
    tare_g: float | None = None
    aliquot_ml: float | None = None
    curve: CurveInput | None = None

    def stored(self) -> dict[str, Any]:
        """The replicate as the record layer stores it (mass by difference as mass_gross_g/mass_tare_g)."""
        row: dict[str, Any] = {}
        if self.aliquot_ml is not None:
            row["aliquot_ml"] = self.aliquot_ml
        elif self.gross_g is not None:
            row["mass_gross_g"], row["mass_tare_g"] = self.gross_g, self.tare_g
        else:
            row["mass_g"] = self.mass_g
        if self.initial_ml is not None:
            row["initial_ml"], row["final_ml"] = self.initial_ml, self.final_ml
        row["volume_ml"] = self.volume_ml
        row["blank_ml"] = self.blank_ml
        row["temperature_c"] = self.temperature_c
        if self.curve is not None:
            # The located u is the end-point term of this replicate's titre in the budget.
            row["curve"] = self.curve.stored()
            row["endpoint_u_ml"] = self.curve.end_point.u_ml
            row["endpoint_method"] = self.curve.method
        return row


@dataclass(frozen=True)
class RunInput:
    """A whole run as read: what it is for, when, by whom, with which burette and standard, its
    replicates, the replicates left out (1-based position -> reason) and the instruments named
    (role -> instrument id). Capacities in mL, temperature in °C."""

    method: str
    purpose: str
    performed_on: dt.date
    analyst: str
    burette_capacity_ml: float
    replicates: tuple[ReplicateInput, ...]
    temperature_c: float | None = None
    endpoint: str = ""
    notes: str = ""
    titration_temperature_c: float | None = None
    standard_lot_id: int | None = None
    reference_batch: str | None = None
    exclusions: Mapping[int, str] = field(default_factory=lambda: MappingProxyType({}))
    instruments: Mapping[str, int] = field(default_factory=lambda: MappingProxyType({}))
    # Checks gone ahead despite, with the reason (check code from standardization.OVERRIDABLE_CHECKS -> reason).
    overrides: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))

    def meta(self) -> dict[str, Any]:
        """The run's own columns as the record layer stores them (without batch and partner ids)."""
        return {
            "purpose": self.purpose,
            "performed_on": self.performed_on.isoformat(),
            "analyst": self.analyst,
            "burette_capacity_ml": self.burette_capacity_ml,
            "temperature_c": self.temperature_c,
            "titration_temperature_c": self.titration_temperature_c,
            "endpoint": self.endpoint,
            "notes": self.notes,
        }


# ------------------------------------------------------------------------------------------ parsing


def parse_run(data: Any, *, today: dt.date, prepared_on: dt.date | None = None, decimal_comma: bool = False) -> RunInput:
    """JSON-shaped run data -> RunInput; every broken rule at once as InvalidInput (request paths).

    today: the lab's today (a run cannot be dated after it); prepared_on: the batch's preparation
    date (a run cannot be dated before it), None to skip that rule; decimal_comma: True for the
    HTML form only (an unambiguous "0,05" reads as 0.05, parsing.form_decimal).
    """
    p = Parser(decimal_comma=decimal_comma)
    if not isinstance(data, Mapping):
        raise InvalidInput([FieldError("_body", "the run must be a JSON object")])
    bad = _refuse_non_text(p, data, TEXT_KEYS, "")
    data = {k: (MISSING if k in bad else v) for k, v in data.items()}
    method = p.choice(data.get("method", MISSING), "method", METHODS, default="primary") or "primary"
    allowed = (*COMMON_KEYS, PARTNER_KEY[method], *(f"{r}_id" for r in ROLES[method]), "replicates", "overrides")
    _refuse_unknown(p, data, allowed, method, "")
    purpose = p.choice(data.get("purpose", MISSING), "purpose", PURPOSES)
    performed_on = _date(p, data.get("performed_on", MISSING), "performed_on", not_after=today, not_before=prepared_on)
    analyst = p.text(data.get("analyst", MISSING), "analyst", max_length=LIMITS.max_analyst)
    capacity = burette_capacity(p, data.get("burette_capacity_ml", MISSING), required=True)
    run_t = temperature(p, data.get("temperature_c", MISSING), "temperature_c")
    flask_t = p.number(
        data.get("titration_temperature_c", MISSING),
        "titration_temperature_c",
        required=False,
        ge=LIMITS.min_titration_temperature_c,
        le=LIMITS.max_titration_temperature_c,
        unit="°C",
    )
    endpoint = p.text(data.get("endpoint", MISSING), "endpoint", required=False, max_length=LIMITS.max_endpoint) or ""
    notes = p.text(data.get("notes", MISSING), "notes", required=False, max_length=LIMITS.max_notes) or ""
    lot_id: int | None = None
    reference: str | None = None
    if method == "primary":
        lot_id = p.integer(data.get("standard_lot_id", MISSING), "standard_lot_id", ge=1)
    else:
        reference = p.text(data.get("reference_batch", MISSING), "reference_batch", max_length=LIMITS.max_batch_code)
    instruments: dict[str, int] = {}
    for role in ROLES[method]:
        iid = p.integer(data.get(f"{role}_id", MISSING), f"{role}_id", required=False, ge=1)
        if iid is not None:
            instruments[role] = iid
    curve_reading, curve_method = read_curve_options(p, data)
    reps, excluded = read_replicates(
        p,
        data.get("replicates", MISSING),
        method,
        capacity_ml=capacity,
        run_temperature=run_t,
        curve_reading=curve_reading,
        curve_method=curve_method,
    )
    overrides = read_overrides(p, data.get("overrides", MISSING))
    # A field refused for its type is named once (not again as "is required").
    first = {e.field: e for e in reversed(p.errors) if e.field in bad}
    p.errors = [e for e in p.errors if e.field not in bad or first[e.field] is e]
    p.raise_if_errors()
    assert purpose is not None and performed_on is not None and analyst is not None and capacity is not None
    return RunInput(
        method=method,
        purpose=purpose,
        performed_on=performed_on,
        analyst=analyst,
        burette_capacity_ml=capacity,
        replicates=tuple(reps),
        temperature_c=run_t,
        endpoint=endpoint,
        notes=notes,
        titration_temperature_c=flask_t,
        standard_lot_id=lot_id,
        reference_batch=reference,
        exclusions=MappingProxyType(dict(excluded)),
        instruments=MappingProxyType(instruments),
        overrides=MappingProxyType(overrides),
    )


def override_path(code: str) -> str:
    """The request path (and the run form's field name) of one override's reason: overrides[<code>]."""
    return f"overrides[{code}]"


def read_overrides(p: Parser, raw: Any) -> dict[str, str]:
    """The checks a run goes ahead despite: {check code: reason} -> the same dict, trimmed.

    Codes are those of standardization.OVERRIDABLE_CHECKS; each needs a reason of at most
    LIMITS.max_reason characters. Errors go to `p`, named overrides[<code>] (an empty map is none).
    """
    out: dict[str, str] = {}
    if raw is MISSING or raw is None:
        return out
    if not isinstance(raw, Mapping):
        p.error("overrides", "must map a check's code to the reason for going ahead despite it")
        return out
    codes = ", ".join(OVERRIDABLE_CHECKS)
    for code, reason in raw.items():
        if not isinstance(code, str) or code not in OVERRIDABLE_CHECKS:
            # An unknown key is named only when short enough to read; a long one is reported on the field.
            shown = code if isinstance(code, str) and len(code) <= 40 and code.isprintable() else None
            p.error(override_path(shown) if shown else "overrides", f"is not a check that can be gone ahead despite ({codes})")
            continue
        path = override_path(code)
        if reason is None or (isinstance(reason, str) and not reason.strip()):
            p.error(path, "give the reason for going ahead despite this check")
            continue
        text = p.text(reason, path, max_length=LIMITS.max_reason)
        if text:
            out[code] = text
    return out


def _refuse_unknown(p: Parser, data: Mapping[str, Any], allowed: Sequence[str], method: str, base: str) -> None:
    other = "secondary" if method == "primary" else "primary"
    kind = "a run against a primary standard" if method == "primary" else "a run against a certified titrant batch"
    if base:
        foreign = set(REPLICATE_KEYS[other])
        what = "a replicate of " + kind
    else:
        foreign = {PARTNER_KEY[other], *(f"{r}_id" for r in ROLES[other])}
        what = kind
    for key in data:
        if key in allowed:
            continue
        name = field_path(base, str(key)) if base else str(key)
        if key in foreign:
            p.error(name, f"is not a field of {what}")
        else:
            p.error(name, "is not a field of this request")


def _date(p: Parser, raw: Any, name: str, *, not_after: dt.date, not_before: dt.date | None) -> dt.date | None:
    if raw is MISSING or raw is None or (isinstance(raw, str) and not raw.strip()):
        p.error(name, "is required")
        return None
    value, problem = date_problem(raw)
    if problem is not None:
        p.error(name, problem)
        return None
    assert value is not None
    if value > not_after:
        p.error(name, f"cannot be later than {not_after.isoformat()} (today)")
        return None
    if not_before is not None and value < not_before:
        p.error(name, f"cannot be earlier than {not_before.isoformat()}, when the batch was prepared")
        return None
    return value


# The fields a run gives as text. A JSON list, object, number or null in one of them is refused by
# name (a form or a CSV sheet can only send text, so only the JSON door can get this wrong).
TEXT_KEYS = ("method", "purpose", "performed_on", "analyst", "endpoint", "notes", "reference_batch")


def _refuse_non_text(p: Parser, data: Mapping[str, Any], keys: Sequence[str], base: str) -> set[str]:
    """Record an error for each of keys present in data whose value is not a string; return those keys."""
    bad = set()
    for key in keys:
        if key in data and not isinstance(data[key], str):
            p.error(field_path(base, key) if base else key, f"must be text, not {kind_of(data[key])}")
            bad.add(key)
    return bad


def burette_capacity(p: Parser, raw: Any, *, required: bool) -> float | None:
    """The burette's capacity (mL): one of the sizes offered (LIMITS.burettes_ml)."""
    value = p.number(raw, "burette_capacity_ml", required=required, gt=0, le=LIMITS.max_reading_ml, unit="mL")
    if value is not None and value not in LIMITS.burettes_ml:
        sizes = ", ".join(f"{b:g}" for b in LIMITS.burettes_ml)
        p.error("burette_capacity_ml", f"must be one of the burette sizes offered: {sizes} mL")
        return None
    return value


def temperature(p: Parser, raw: Any, name: str) -> float | None:
    """A titrant temperature (°C) within the referral's range, or None when not given."""
    return p.number(raw, name, required=False, ge=LIMITS.min_temperature_c, le=LIMITS.max_temperature_c, unit="°C")


def read_curve_options(p: Parser, data: Mapping[str, Any]) -> tuple[str, str]:
    """The run's curve_reading (pH or mV; default pH) and curve_method (default the derivative method)."""
    reading = p.choice(data.get("curve_reading", MISSING), "curve_reading", tuple(CURVE_READINGS), default=endpoints.PH)
    method = p.choice(data.get("curve_method", MISSING), "curve_method", tuple(CURVE_METHODS), default=endpoints.DERIVATIVE)
    return reading or endpoints.PH, method or endpoints.DERIVATIVE


# A curve's line: two numbers (decimal point) separated by a comma, a semicolon, a tab or spaces.
_CURVE_LINE = re.compile(r"\s*([^,;\s]+)\s*(?:[,;\t]|\s)\s*([^,;\s]+)\s*")


def _curve_pairs(p: Parser, raw: Any, here: str) -> list[tuple[Any, Any, str]] | None:
    """The raw (volume, reading, where) of each point: from text lines or a JSON list of pairs."""
    if isinstance(raw, str):
        if len(raw) > LIMITS.max_curve_chars:
            p.error(here, f"is longer than {LIMITS.max_curve_chars} characters: at most {LIMITS.max_curve_points} points")
            return None
        out = []
        for n, line in enumerate(raw.splitlines(), start=1):
            if not line.strip() or line.lstrip().startswith("#"):
                continue
            m = _CURVE_LINE.fullmatch(line)
            if m is None:
                p.error(here, f"line {n} ({line.strip()[:40]!r}) must be a volume and a reading, such as 12.50, 7.83")
                return None
            out.append((m.group(1), m.group(2), f"line {n}"))
        return out
    if isinstance(raw, list):
        out = []
        for n, item in enumerate(raw, start=1):
            if not (isinstance(item, list) and len(item) == 2):
                p.error(here, f"point {n} must be a pair [volume in mL, reading]")
                return None
            out.append((item[0], item[1], f"point {n}"))
        return out
    p.error(here, f"must be lines of volume and reading, or a list of [volume, reading] pairs, not {kind_of(raw)}")
    return None


def read_curve(p: Parser, raw: Any, here: str, *, reading: str, method: str, scale_ml: float) -> CurveInput | None:
    """One replicate's curve -> CurveInput with its located end point, or None (errors go to `p`, on `here`).

    raw: text lines "volume, reading" (form, CSV import) or a list of [volume, reading] pairs (JSON);
    reading: endpoints.PH or MV; method: one of endpoints.METHODS; scale_ml: the burette's scale (mL),
    the largest volume added a point may give. Every door reads a curve here, under LIMITS.
    """
    pairs = _curve_pairs(p, raw, here)
    if pairs is None:
        return None
    n = len(pairs)
    if n < LIMITS.min_curve_points or n > LIMITS.max_curve_points:
        p.error(here, f"must have {LIMITS.min_curve_points} to {LIMITS.max_curve_points} points (it has {n})")
        return None
    low, high = endpoints.READING_RANGE[reading]
    unit = endpoints.UNITS[reading]
    check = Parser(decimal_comma=False)
    volumes: list[float] = []
    readings: list[float] = []
    for v_raw, e_raw, where in pairs:
        v = check.number(v_raw, "volume", ge=0, le=scale_ml, unit="mL")
        e = check.number(e_raw, "reading", ge=low, le=high, unit=unit)
        if check.errors:
            first = check.errors[0]
            p.error(here, f"{where}: the {'volume added' if first.field == 'volume' else 'reading'} {first.message}")
            return None
        assert v is not None and e is not None
        volumes.append(v)
        readings.append(e)
    try:
        found = endpoints.locate(volumes, readings, kind=reading, method=method)
    except InvalidInput as exc:
        first = exc.errors[0]
        m = re.fullmatch(r"points\[(\d+)\]\.\w+", first.field)
        where = f"{pairs[int(m.group(1))][2]}: the volume added " if m else "the points "
        p.error(here, where + first.message)
        return None
    except (ArithmeticError, ValueError, FloatingPointError):
        p.error(here, "no end point can be computed from these points")
        return None
    if len(found) > 1:
        at = ", ".join(f"{f.volume_ml:.2f}" for f in found)
        p.error(
            here, f"shows {len(found)} end points (at {at} mL): a titre needs one; give the points up to the break titrated to"
        )
        return None
    return CurveInput(reading=reading, method=method, points=tuple(zip(volumes, readings, strict=True)), end_point=found[0])


def read_replicates(
    p: Parser,
    raw: Any,
    method: str,
    *,
    capacity_ml: float | None,
    run_temperature: float | None = None,
    allow_volume: bool = False,
    base: str = "replicates",
    curve_reading: str = endpoints.PH,
    curve_method: str = endpoints.DERIVATIVE,
) -> tuple[list[ReplicateInput], dict[int, str]]:
    """The replicate list of a run -> ReplicateInputs and exclusions (1-based position -> reason).

    capacity_ml: the burette's scale (mL; None: the largest offered); run_temperature: °C, taken by
    each replicate that gives none; allow_volume: a titre may be given as volume_ml instead of two
    readings (the preview's standalone form); curve_reading, curve_method: how each replicate's curve
    (key `curve`, read by read_curve) is read and its end point located. Errors go to `p`, named under `base`.
    """
    reps: list[ReplicateInput] = []
    excluded: dict[int, str] = {}
    items = p.array(raw, base, min_items=1, max_items=LIMITS.max_replicates)
    if items is None:
        if p.errors and p.errors[-1].field == base and "at least 1" in p.errors[-1].message:
            p.errors[-1] = FieldError(base, "enter at least one replicate")
        return reps, excluded
    keys = (*REPLICATE_KEYS[method], CURVE_KEY, *(("volume_ml",) if allow_volume else ()))
    for i, item in enumerate(items):
        here = field_path(base, i)
        obj = p.mapping(item, here)
        if obj is None:
            continue
        _refuse_unknown(p, obj, keys, method, here)
        if _refuse_non_text(p, obj, ("exclude_reason",), here):
            obj = {k: v for k, v in obj.items() if k != "exclude_reason"}
        curve = None
        if obj.get(CURVE_KEY) not in (None, "", []) and not (isinstance(obj.get(CURVE_KEY), str) and not obj[CURVE_KEY].strip()):
            curve = read_curve(
                p,
                obj[CURVE_KEY],
                field_path(here, CURVE_KEY),
                reading=curve_reading,
                method=curve_method,
                scale_ml=capacity_ml or LIMITS.max_reading_ml,
            )
            if curve is None:
                continue
        rep = _replicate(p, obj, here, method, capacity_ml, run_temperature, allow_volume, curve)
        if "exclude_reason" in obj:
            reason = p.text(
                obj["exclude_reason"], field_path(here, "exclude_reason"), required=False, max_length=LIMITS.max_reason
            )
            if reason:
                excluded[i + 1] = reason
            elif not p.has_error(field_path(here, "exclude_reason")):
                p.error(field_path(here, "exclude_reason"), "say why this replicate is left out")
        if rep is not None:
            reps.append(rep)
    return reps, excluded


def _replicate(
    p: Parser,
    obj: Mapping[str, Any],
    here: str,
    method: str,
    capacity_ml: float | None,
    run_t: float | None,
    allow_volume: bool,
    curve: CurveInput | None = None,
) -> ReplicateInput | None:
    def path(key: str) -> str:
        return field_path(here, key)

    def given(key: str) -> bool:
        v = obj.get(key)
        return v is not None and not (isinstance(v, str) and not v.strip())

    before = len(p.errors)
    mass = gross = tare = aliquot = None
    if method == "secondary":
        aliquot = p.number(
            obj.get("aliquot_ml", MISSING), path("aliquot_ml"), ge=LIMITS.min_volume_ml, le=LIMITS.max_aliquot_ml, unit="mL"
        )
    elif given("mass_g") and (given("gross_g") or given("tare_g")):
        p.error(path("mass_g"), "give either the mass or gross and tare, not both")
    elif given("mass_g"):
        mass = p.number(obj["mass_g"], path("mass_g"), ge=LIMITS.min_mass_g, le=LIMITS.max_mass_g, unit="g")
    elif given("gross_g") or given("tare_g"):
        gross = p.number(obj.get("gross_g", MISSING), path("gross_g"), gt=0, le=LIMITS.max_weighing_g, unit="g")
        tare = p.number(obj.get("tare_g", MISSING), path("tare_g"), ge=0, le=LIMITS.max_weighing_g, unit="g")
        if gross is not None and tare is not None:
            net = gross - tare
            if net <= 0:
                p.error(path("gross_g"), "the gross weighing must be heavier than the tare")
            elif not LIMITS.min_mass_g <= net <= LIMITS.max_mass_g:
                p.error(
                    path("gross_g"),
                    f"the mass by difference, {net:.4f} g, is outside {LIMITS.min_mass_g:g}–{LIMITS.max_mass_g:g} g: "
                    "check the unit",
                )
    else:
        p.error(path("mass_g"), "is required (give the mass, or gross and tare)")
    scale_ml = capacity_ml or LIMITS.max_reading_ml
    scale = f"the {capacity_ml:g} mL burette" if capacity_ml is not None else f"a {scale_ml:g} mL burette"
    initial = final = None
    volume: float | None = None
    titre_given = allow_volume and "volume_ml" in obj
    if titre_given and (given("initial_ml") or given("final_ml")):
        p.error(path("volume_ml"), "give volume_ml, or initial_ml and final_ml, not both")
    elif curve is not None and not (given("initial_ml") or given("final_ml") or titre_given):
        # No readings typed: the end point located on the curve is the titre (volume added from 0 mL).
        volume = round(curve.end_point.volume_ml, 4)
    elif titre_given:
        volume = p.number(obj["volume_ml"], path("volume_ml"), gt=0, le=scale_ml, unit="mL")
        if volume is not None and volume < LIMITS.min_volume_ml:
            p.error(path("volume_ml"), f"is too small to measure: must be at least {LIMITS.min_volume_ml:g} mL")
            volume = None
    else:
        initial = p.number(obj.get("initial_ml", MISSING), path("initial_ml"), ge=0, unit="mL")
        final = p.number(obj.get("final_ml", MISSING), path("final_ml"), gt=0, unit="mL")
        for key, reading in (("initial_ml", initial), ("final_ml", final)):
            if reading is not None and reading > scale_ml:
                p.error(path(key), f"{reading:g} mL is beyond the scale of {scale}")
        if initial is not None and final is not None and initial <= scale_ml and final <= scale_ml:
            if final - initial < LIMITS.min_volume_ml:
                p.error(path("final_ml"), f"the final reading must be greater than the initial reading ({initial:g} mL)")
            else:
                volume = round(final - initial, 6)
    blank = p.number(obj.get("blank_ml", MISSING), path("blank_ml"), required=False, ge=0, le=LIMITS.max_blank_ml, unit="mL")
    if blank is not None and volume is not None and volume - blank < LIMITS.min_volume_ml:
        p.error(path("blank_ml"), f"the blank must be smaller than the titre ({volume:g} mL)")
    t = temperature(p, obj.get("temperature_c", MISSING), path("temperature_c"))
    if curve is not None and volume is not None and len(p.errors) == before:
        _check_titre_against_curve(p, volume, curve, path("volume_ml" if titre_given else "final_ml"))
    if len(p.errors) > before or volume is None:
        return None
    return ReplicateInput(
        volume_ml=volume,
        initial_ml=initial,
        final_ml=final,
        blank_ml=blank or 0.0,
        temperature_c=t if t is not None else run_t,
        mass_g=mass,
        gross_g=gross,
        tare_g=tare,
        aliquot_ml=aliquot,
        curve=curve,
    )


def _check_titre_against_curve(p: Parser, titre_ml: float, curve: CurveInput, here: str) -> None:
    """Refuse a typed titre (mL) that differs from the located end point by more than LIMITS.curve_titre_max_u u.

    Refused rather than warned about: a replicate has one titre, and when the burette readings and the
    curve disagree that far one of them was misread or mistyped; storing either would hide which.
    """
    ep = curve.end_point
    gap = abs(titre_ml - ep.volume_ml)
    allowed = LIMITS.curve_titre_max_u * ep.u_ml
    if gap > allowed:
        p.error(
            here,
            f"the titre from the readings, {titre_ml:.2f} mL, and the end point located on the curve, "
            f"{ep.volume_ml:.3f} mL (standard uncertainty {ep.u_ml:.3f} mL), differ by {gap:.3f} mL, more than "
            f"{LIMITS.curve_titre_max_u:g} standard uncertainties ({allowed:.3f} mL): check the readings and the curve, "
            "or leave the readings empty to take the located end point as the titre",
        )


# ------------------------------------------------------------------------------ paths and form fields

# Row numbers are digits 0-9 (re.ASCII: `\d` and `\w` would also take '٣' or '²'), at most 4 of them.
_PATH = re.compile(r"replicates\[([0-9]{1,4})\](?:\.(\w+))?", re.ASCII)
_FORM = re.compile(r"r([0-9]{1,4})_(\w+)", re.ASCII)
_OVERRIDE = re.compile(r"overrides\[([^\]]*)\]")


def form_name(path: str, rows: Sequence[int] | None = None) -> str:
    """A request path -> the run form's field: replicates[2].final_ml -> r3_final_ml; others unchanged.

    rows: the grid row (1-based) of each replicate when blank rows were skipped (from_form_rows);
    None when replicate i sits in row i + 1. A path naming a whole replicate (or the science core's
    titre, volume_ml) lands on the row's final reading; "replicates" itself on the first row.
    """
    if path == "replicates":
        return f"r{rows[0] if rows else 1}_initial_ml"
    m = _PATH.fullmatch(path)
    if not m:
        return path
    i = int(m.group(1))
    row = rows[i] if rows is not None and i < len(rows) else i + 1
    key = m.group(2) or "initial_ml"
    return f"r{row}_{PATH_ALIASES.get(key, key)}"


def request_path(name: str) -> str:
    """A run form's field -> its request path: r3_final_ml -> replicates[2].final_ml; others unchanged.

    The leave-out checkbox (r3_exclude) belongs with its reason: replicates[2].exclude_reason.
    """
    m = _FORM.fullmatch(name)
    if not m or int(m.group(1)) < 1:
        return name
    key = "exclude_reason" if m.group(2) == "exclude" else m.group(2)
    return field_path("replicates", int(m.group(1)) - 1, key)


def label(path: str, rows: Sequence[int] | None = None) -> str:
    """How the run form names a field: replicates[2].final_ml -> "Replicate 3, final reading"."""
    o = _OVERRIDE.fullmatch(path)
    if o and o.group(1) in OVERRIDABLE_CHECKS:
        return f"Reason for going ahead despite {OVERRIDABLE_CHECKS[o.group(1)]}"
    m = _PATH.fullmatch(path)
    if m:
        i = int(m.group(1))
        row = rows[i] if rows is not None and i < len(rows) else i + 1
        key = m.group(2)
        return f"Replicate {row}" + (f", {REPLICATE_LABELS.get(key, key.replace('_', ' '))}" if key else "")
    return LABELS.get(path, path.replace("_", " "))


def form_errors(errors: Sequence[FieldError], rows: Sequence[int] | None = None) -> list[tuple[str, str, str]]:
    """Errors as the form shows them: (form field, label, message) for each."""
    return [(form_name(e.field, rows), label(e.field, rows), e.message) for e in errors]


def _rows_with_data(form: Mapping[str, Any]) -> list[int]:
    rows: set[int] = set()
    for key in form:
        m = _FORM.fullmatch(str(key))
        if m and m.group(2) in _ALL_GRID_KEYS and str(form.get(key) or "").strip():
            rows.add(int(m.group(1)))
    return sorted(r for r in rows if r >= 1)


_ALL_GRID_KEYS = {k for m in METHODS for k in GRID_COLUMNS[m]} | {CURVE_KEY}


def from_form_rows(form: Mapping[str, Any]) -> list[int]:
    """The grid rows (1-based) that hold a replicate, in order: the rows from_form() reads."""
    return _rows_with_data(form)


def from_form(form: Mapping[str, Any]) -> dict[str, Any]:
    """The run form's fields -> JSON-shaped run data (values stay the typed text; blank rows skipped).

    A row counts when any of its numeric cells has text; a ticked leave-out box gives the row an
    exclude_reason (empty when none was typed, which the parser refuses).
    """
    top = (*COMMON_KEYS, *PARTNER_KEY.values(), *{f"{r}_id" for rs in ROLES.values() for r in rs})
    data: dict[str, Any] = {}
    for key in top:
        value = form.get(key)
        if value is not None and str(value).strip() != "":
            data[key] = value
    reps = []
    for row in _rows_with_data(form):
        rep: dict[str, Any] = {}
        for key in sorted(_ALL_GRID_KEYS):
            value = form.get(f"r{row}_{key}")
            if value is not None and str(value).strip() != "":
                rep[key] = str(value).strip()
        if form.get(f"r{row}_exclude"):
            rep["exclude_reason"] = str(form.get(f"r{row}_exclude_reason") or "")
        reps.append(rep)
    data["replicates"] = reps
    # A reason box shown for a refused check: overrides[<code>]; only filled ones count.
    overrides = {}
    for key in form:
        o = _OVERRIDE.fullmatch(str(key))
        if o and str(form.get(key) or "").strip():
            overrides[o.group(1)] = str(form.get(key))
    if overrides:
        data["overrides"] = overrides
    return data


def to_form(data: Mapping[str, Any]) -> dict[str, str]:
    """JSON-shaped run data -> the run form's fields (replicate i in row i + 1): what fills the grid."""
    form: dict[str, str] = {}
    for key, value in data.items():
        if key == "overrides" and isinstance(value, Mapping):
            form.update({override_path(str(code)): str(reason) for code, reason in value.items()})
        elif key != "replicates" and value is not None:
            form[key] = str(value)
    for i, rep in enumerate(data.get("replicates") or (), start=1):
        for key, value in rep.items():
            if value is None or value == "":
                continue
            if key == "exclude_reason":
                form[f"r{i}_exclude"] = "on"
            form[form_name(field_path("replicates", i - 1, key))] = str(value)
    return form
