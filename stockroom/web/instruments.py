"""The instrument register in the browser, and the instrument choices of the run form.

    GET      /instruments/                         every instrument with its calibration standing today
    GET/POST /instruments/new                      register an instrument (and its calibration on record)
    GET      /instruments/<id>                     one instrument: figures, calibration history, runs
    POST     /instruments/<id>/calibrations        record a calibration (a recalibration is one more row)

Registering and calibrating need `instrument.register` (prep staff and administrators); reads are open
like every other page. Balances take readability and linearity in mg (stored in g); glassware takes
its tolerance and scale division in mL.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Mapping
from typing import Any

from flask import Blueprint, flash, redirect, render_template, request, url_for

from stockroom import glassware
from stockroom import instruments as inst_mod
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.instruments import Instrument
from stockroom.web import forms, lab_today
from stockroom.web.access import current_user, require
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("instruments", __name__, url_prefix="/instruments")

BURETTE_SIZES_ML = (10.0, 25.0, 50.0, 100.0)  # the sizes the run form offers
MAX_BALANCE_G, MAX_GLASS_ML = 10_000.0, 1000.0
MAX_TOLERANCE_FRACTION = 0.02  # a tolerance beyond 2 % of the capacity is a unit slip, not glassware
MAX_INTERVAL_DAYS = 5 * 366  # a calibration interval longer than five years is a typing slip (common practice)
_CODE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._/-]{0,39}")

LABELS: dict[str, str] = {
    "code": "Instrument ID",
    "kind": "Kind",
    "description": "Make, model, serial",
    "capacity": "Capacity",
    "accuracy_class": "Class",
    "tolerance_ml": "Tolerance",
    "division_ml": "Scale division",
    "balance_class": "Balance class",
    "readability_mg": "Readability d",
    "linearity_mg": "Linearity",
    "notes": "Notes",
    "calibrated_on": "Calibrated on",
    "next_due_on": "Next due",
    "outcome": "Outcome",
    "certificate_ref": "Certificate reference",
    "calibrated_by": "Calibrated by",
    "stated_tolerance_ml": "Tolerance stated on the certificate",
    "stated_linearity_mg": "Linearity stated on the certificate",
}
KIND_OPTIONS = [
    ("balance", "Balance (weighing the primary standard)"),
    ("burette", "Burette (delivering the titrant)"),
    ("pipette", "Pipette (the aliquot of a secondary standardization)"),
]
CLASS_OPTIONS = [("A", "Class A"), ("B", "Class B"), ("", "no class: tolerance as calibrated")]
OUTCOME_OPTIONS = [("pass", "passed"), ("fail", "failed")]


# --------------------------------------------------------------------------------------------- reading forms


def _calibration(p: Parser, form: Mapping[str, Any], today: dt.date, kind: str, *, required: bool) -> dict[str, Any] | None:
    """The calibration fields of a form, checked; None when optional and all blank."""
    names = ("calibrated_on", "next_due_on", "certificate_ref", "calibrated_by")
    if not required and not any((form.get(n) or "").strip() for n in names):
        return None
    calibrated_on = forms.date(p, form.get("calibrated_on"), "calibrated_on", not_after=today)
    next_due = forms.date(p, form.get("next_due_on"), "next_due_on")
    if calibrated_on is not None and next_due is not None:
        if next_due <= calibrated_on:
            p.error("next_due_on", "must be after the calibration date")
        elif (next_due - calibrated_on).days > MAX_INTERVAL_DAYS:
            p.error("next_due_on", "is more than five years after the calibration: check the year")
    outcome = p.choice(form.get("outcome") or "pass", "outcome", ("pass", "fail"))
    ref = p.text(form.get("certificate_ref"), "certificate_ref", max_length=80)
    by = p.text(form.get("calibrated_by"), "calibrated_by", required=False, max_length=120) or ""
    tolerance = linearity = None
    if required:  # a later calibration may restate the figures
        if kind == "balance":
            lin = p.number(form.get("stated_linearity_mg"), "stated_linearity_mg", required=False, ge=0, le=100, unit="mg")
            linearity = lin / 1000.0 if lin is not None else None
        else:
            tolerance = p.number(form.get("stated_tolerance_ml"), "stated_tolerance_ml", required=False, gt=0, le=1, unit="mL")
    notes = p.text(form.get("notes"), "notes", required=False, max_length=1000) or ""
    return {
        "calibrated_on": calibrated_on.isoformat() if calibrated_on else None,
        "next_due_on": next_due.isoformat() if next_due else None,
        "outcome": outcome,
        "certificate_ref": ref,
        "calibrated_by": by,
        "tolerance": tolerance,
        "linearity_g": linearity,
        "notes": notes if required else "",
    }


def read_instrument(form: Mapping[str, Any], today: dt.date) -> tuple[dict[str, Any], dict[str, Any] | None, list[str]]:
    """The register form, checked: (instrument values, calibration values or None, notes to show).

    Capacity in g (balance) or mL; a balance's readability and linearity in mg; glassware tolerance and
    scale division in mL. Glassware of Class A or B and a listed size may leave the tolerance blank: it
    is taken from the class table (glassware.py: ISO 385 burettes, ISO 648 pipettes). Raises InvalidInput naming each field.
    """
    p = forms.parser()
    notes: list[str] = []
    raw_code = (form.get("code") or "").strip()
    code = p.text(form.get("code"), "code", max_length=40)
    if code and not _CODE.fullmatch(code):
        p.error("code", "use letters, digits and . _ / - only, starting with a letter or digit (e.g. BUR-07)")
    kind = p.choice(form.get("kind") or None, "kind", inst_mod.KINDS)
    description = p.text(form.get("description"), "description", required=False, max_length=200) or ""
    balance = kind == "balance"
    capacity = p.number(
        form.get("capacity"), "capacity", gt=0, le=MAX_BALANCE_G if balance else MAX_GLASS_ML, unit="g" if balance else "mL"
    )
    values: dict[str, Any] = {
        "code": code or raw_code,
        "kind": kind,
        "description": description,
        "capacity": capacity,
        "accuracy_class": "",
        "tolerance": None,
        "readability": None,
        "linearity_g": None,
    }
    glass_fields = ("tolerance_ml", "division_ml")
    balance_fields = ("readability_mg", "linearity_mg", "balance_class")
    if balance:
        for name in glass_fields:
            if (form.get(name) or "").strip():
                p.error(name, "a balance has no volume tolerance or scale division; leave it blank")
        d = p.number(form.get("readability_mg"), "readability_mg", gt=0, le=100, unit="mg")
        lin = p.number(form.get("linearity_mg"), "linearity_mg", ge=0, le=100, unit="mg")
        values["accuracy_class"] = p.text(form.get("balance_class"), "balance_class", required=False, max_length=20) or ""
        values["readability"] = d / 1000.0 if d is not None else None
        values["linearity_g"] = lin / 1000.0 if lin is not None else None
    elif kind is not None:
        for name in balance_fields:
            if (form.get(name) or "").strip():
                p.error(name, f"a {kind} has no readability or linearity in mg; leave it blank")
        if kind == "burette" and capacity is not None and capacity not in BURETTE_SIZES_ML:
            p.error("capacity", "runs offer burettes of " + ", ".join(f"{c:g}" for c in BURETTE_SIZES_ML) + " mL")
        cls = p.choice(form.get("accuracy_class") or "", "accuracy_class", ("A", "B", ""), default="")
        tol = p.number(form.get("tolerance_ml"), "tolerance_ml", required=False, gt=0, le=1, unit="mL")
        if tol is None and not p.has_error("tolerance_ml") and capacity is not None and cls is not None:
            tol = inst_mod.class_tolerance(kind, cls, capacity)
            if tol is None:
                p.error(
                    "tolerance_ml",
                    "is required: give the tolerance (± mL) from the marking or the calibration"
                    + (f"; Class {cls} has no listed figure for {capacity:g} mL" if cls else ""),
                )
            else:
                notes.append(f"Tolerance ±{tol:g} mL taken from the Class {cls} table for a {capacity:g} mL {kind}.")
        if tol is not None and capacity is not None and tol > MAX_TOLERANCE_FRACTION * capacity:
            p.error(
                "tolerance_ml", f"±{tol:g} mL is more than {MAX_TOLERANCE_FRACTION * 100:g} % of {capacity:g} mL: check the unit"
            )
        division = p.number(form.get("division_ml"), "division_ml", required=False, gt=0, le=1, unit="mL")
        values.update(accuracy_class=cls or "", tolerance=tol, readability=division)
    values["notes"] = p.text(form.get("notes"), "notes", required=False, max_length=1000) or ""
    calibration = _calibration(p, form, today, kind or "", required=False)
    p.raise_if_errors()
    return values, calibration, notes


def read_calibration(form: Mapping[str, Any], instrument: Instrument, today: dt.date) -> dict[str, Any]:
    """The "record a calibration" form, checked; the new calibration may not be older than the last one."""
    p = forms.parser()
    values = _calibration(p, form, today, instrument.kind, required=True)
    assert values is not None
    if values["calibrated_on"] and instrument.calibrations:
        last = instrument.calibrations[-1].calibrated_on
        if dt.date.fromisoformat(values["calibrated_on"]) < last:
            p.error(
                "calibrated_on",
                f"is before the last calibration on record ({last.isoformat()}); a calibration is recorded in the order made",
            )
    p.raise_if_errors()
    return values


# --------------------------------------------------------------------------------------------- the run form


def run_choices(method: str, on: dt.date) -> list[tuple[str, str, list[tuple[str, str]]]]:
    """The run form's instrument selects: (role, label, [(id, text with the standing on `on`)])."""
    out = []
    for role in inst_mod.ROLES_FOR_METHOD.get(method, ()):
        options = []
        for inst in inst_mod.list_instruments(get_db(), role):
            s = inst_mod.standing(inst, on)
            options.append((str(inst.id), f"{inst.code} · {inst.summary()} · {s.label}"))
        out.append((role, f"{role.capitalize()} used", options))
    return out


def preview_figures(method: str, on: dt.date) -> dict[str, dict[str, float]]:
    """For the run form's live preview: instrument id -> the budget figures it stands for on `on`.

    Keys are the preview API's (balance_readability_g, balance_linearity_g, burette_tolerance_ml,
    pipette_tolerance_ml); the script sends those of the instruments chosen.
    """
    out: dict[str, dict[str, float]] = {}
    for role in inst_mod.ROLES_FOR_METHOD.get(method, ()):
        for inst in inst_mod.list_instruments(get_db(), role):
            f = inst_mod.figures({}, {role: inst}, on)
            if role == "balance":
                out[str(inst.id)] = {
                    "balance_readability_g": f.balance_readability_g,
                    "balance_linearity_g": f.balance_linearity_g,
                }
            elif role == "burette":
                out[str(inst.id)] = {"burette_tolerance_ml": f.burette_tolerance_ml}
            else:
                out[str(inst.id)] = {"pipette_tolerance_ml": f.pipette_tolerance_ml}
    return out


# --------------------------------------------------------------------------------------------- views


def _context() -> dict[str, Any]:
    return {
        "labels": LABELS,
        "kinds": KIND_OPTIONS,
        "classes": CLASS_OPTIONS,
        "outcomes": OUTCOME_OPTIONS,
        # Class A figures by capacity, mL (glassware.py); Class B is shown by the register form's result.
        "class_table": {
            kind: {cap: t.mpe_ml for cap in glassware.capacities(kind) if (t := glassware.lookup(kind, cap, "A")) is not None}
            for kind in glassware.KINDS
        },
    }


@bp.get("/")
def list_instruments() -> str:
    today = lab_today()
    rows = [(i, inst_mod.standing(i, today)) for i in inst_mod.list_instruments(get_db())]
    overdue = [i for i, s in rows if not s.fit_to_certify]
    return render_template("instruments/list.html", rows=rows, today=today, overdue=overdue, soon_days=inst_mod.DUE_SOON_DAYS)


@bp.route("/new", methods=["GET", "POST"])
@require("instrument.register")
@once
def new_instrument() -> Any:
    today = lab_today()
    if request.method != "POST":  # HEAD answers like GET and never writes
        kind = request.args.get("kind", "")
        return render_template(
            "instruments/new.html", values={"kind": kind, "accuracy_class": "A", "outcome": "pass"}, errors={}, **_context()
        )
    try:
        values, calibration, notes = read_instrument(request.form, today)
        user = current_user()
        assert user is not None
        inst = inst_mod.register(get_db(), values, user.username, calibration)
    except InvalidInput as exc:
        return forms.reshow("instruments/new.html", exc, **_context())
    flash(f"Registered {inst.name}.", "ok")
    for note in notes:
        flash(note, "info")
    if calibration is None:
        flash(f"No calibration is on record for {inst.code}: it cannot certify a value until one is recorded.", "warning")
    return redirect(url_for("instruments.show", instrument_id=inst.id), 303)


def _show(inst: Instrument, values: Mapping[str, Any], errors: Mapping[str, str], status: int = 200) -> tuple[str, int]:
    today = lab_today()
    db = get_db()
    from stockroom import recall as recall_mod

    recalls = [rc for rc in recall_mod.list_recalls(db) if rc.subject_kind == "instrument" and rc.subject_id == inst.id]
    return forms.render_form(
        "instruments/show.html",
        inst=inst,
        standing=inst_mod.standing(inst, today),
        today=today,
        runs=inst_mod.runs_using(db, inst.id),
        values=values,
        errors=errors,
        recalls=recalls,
        **_context(),
    ), status


@bp.get("/<int:instrument_id>")
def show(instrument_id: int) -> Any:
    inst = inst_mod.instrument_by_id(get_db(), instrument_id)
    return _show(inst, {"outcome": "pass", "calibrated_on": lab_today().isoformat()}, {})


@bp.post("/<int:instrument_id>/calibrations")
@require("instrument.register")
@once
def calibrate(instrument_id: int) -> Any:
    db = get_db()
    inst = inst_mod.instrument_by_id(db, instrument_id)
    try:
        values = read_calibration(request.form, inst, lab_today())
    except InvalidInput as exc:
        return _show(inst, request.form, exc.fields, 422)
    user = current_user()
    assert user is not None
    inst_mod.record_calibration(db, instrument_id, values, user.username)
    outcome = "passed" if values["outcome"] == "pass" else "FAILED"
    flash(
        f"Calibration {values['certificate_ref']} of {values['calibrated_on']} recorded for {inst.code} ({outcome}).",
        "ok" if values["outcome"] == "pass" else "warning",
    )
    return redirect(url_for("instruments.show", instrument_id=instrument_id), 303)
