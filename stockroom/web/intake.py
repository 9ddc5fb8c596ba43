"""Registering a batch (with its preparation calculator), the adjustment calculator, and withdrawing a batch.

    GET/POST /batches/new              the register form; action=plan works out amounts and stores nothing
    GET      /batches/<code>/adjust    water or concentrate to bring a standardized batch to nominal
    GET/POST /batches/<code>/withdraw  take a batch out of use from a date, with the reason
    POST     /api/v1/preparation/plan  the calculator as JSON (the form's live update; stores nothing)

Reading and checking the fields lives in the functions below the views; the views only route.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
import re
from collections.abc import Mapping
from typing import Any

import sqlite_utils
from flask import Blueprint, current_app, flash, jsonify, redirect, render_template, request, url_for

from stockroom import chemistry, preparation, readmodel, records
from stockroom.chemistry import BASE
from stockroom.db import get_db
from stockroom.errors import Conflict, FieldError, InvalidInput
from stockroom.formatting import molarity, percent
from stockroom.formatting import significant as sig
from stockroom.policy import ReagentPolicy, Status, release_in_force, status_on
from stockroom.web import forms, lab_today, read_json_body
from stockroom.web.access import anonymous_response, current_user, login_required, public, refuse, require
from stockroom.web.formatting import on_screen
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("intake", __name__)
# The JSON calculator sits in its own blueprint so that it alone is exempt from the CSRF check:
# it stores nothing, like the other /api/v1 reads.
api_bp = Blueprint("intake_api", __name__, url_prefix="/api/v1")

LIQUID, SOLID = preparation.LIQUID, preparation.SOLID
SOURCE_FORMS: tuple[tuple[str, str], ...] = (
    (LIQUID, "a liquid concentrate, diluted"),
    (SOLID, "a solid, weighed and dissolved (pellets of NaOH or KOH; the salts of the other classes)"),
)
# Offered in the water field's list; any other description may be typed.
WATER_GRADES: tuple[str, ...] = (
    "deionized, Type II",
    "boiled, CO2-free deionized",
    "distilled",
    "ultrapure, Type I",
)
_CO2_FREE = re.compile(r"(co2|co₂|carbon dioxide|carbonate)[\s-]*free", re.IGNORECASE)

MIN_VOLUME_L, MAX_VOLUME_L = 0.1, 50.0
# An amount measured: at most what any batch up to 50 L of 2 mol/L could need (about 6 L of a 37 %
# concentrate, or 6 kg of pellets), so a slip of units is caught; beyond 10 % from the calculator's
# figure a warning says so (the standardization still finds the real strength).
MAX_MEASURED = {"mL": 10_000.0, "g": 10_000.0}
MEASURED_WARN_REL = 0.10
MAX_NOMINAL_MOL_L = 2.0  # above every nominal in the starting policies; catches mmol/L typed as mol/L
# Aqueous concentrates lie between water and about 1.9 g/mL (sulfuric acid): the same wide bounds the
# preparation module applies, here so a bad density is reported at registration too.
MIN_DENSITY_G_ML, MAX_DENSITY_G_ML = 0.8, 2.5

BATCH_LABELS: dict[str, str] = {
    "reagent": "Reagent",
    "nominal_molarity": "Nominal molarity",
    "volume_l": "Volume made up",
    "source_form": "Made from",
    "concentrate_lot": "Concentrate lot",
    "concentrate_assay_pct": "Assay",
    "concentrate_density_g_ml": "Density",
    "measured_amount": "Amount measured",
    "prepared_on": "Prepared on",
    "prepared_by": "Prepared by",
    "water_grade": "Water",
    "container": "Container",
    "notes": "Notes",
}
# preparation_plan's argument names -> the form's field names, so its messages land beside the field.
_PLAN_TO_FORM = {
    "reagent": "reagent",
    "target_molarity_mol_l": "nominal_molarity",
    "final_volume_l": "volume_l",
    "assay_w_w": "concentrate_assay_pct",
    "density_g_ml": "concentrate_density_g_ml",
    "form": "source_form",
}
_ADJUST_TO_FORM = {
    "current_volume_l": "volume_l",
    "concentrate_assay_w_w": "concentrate_assay_pct",
    "concentrate_density_g_ml": "concentrate_density_g_ml",
    "concentrate_molarity_mol_l": "concentrate_assay_pct",
    "measured_molarity_mol_l": "basis",
    "target_molarity_mol_l": "basis",
}
PLAN_KEYS = frozenset(
    {"reagent", "nominal_molarity", "volume_l", "source_form", "concentrate_assay_pct", "concentrate_density_g_ml", "water_grade"}
)


# --------------------------------------------------------------------------------------------- views


@bp.route("/batches/new", methods=["GET", "POST"])
@require("batch.register")
@once
def new_batch() -> Any:
    db = get_db()
    today = lab_today()
    pols = records.policies(db, today)
    user = current_user()
    assert user is not None
    if request.method != "POST":  # HEAD answers like GET and never writes
        defaults = {"prepared_on": today.isoformat(), "prepared_by": user.display_name, "source_form": LIQUID}
        return _batch_page(pols, defaults)
    if request.form.get("action") == "plan":
        try:
            plan, warnings = work_out_plan(request.form, pols)
        except InvalidInput as exc:
            return forms.reshow("intake/new.html", exc, **_batch_context(pols, request.form))
        return _batch_page(pols, request.form, plan=plan, warnings=warnings)
    try:
        values, warnings = read_batch(request.form, pols, today, decimal_comma=True)
    except InvalidInput as exc:
        return forms.reshow("intake/new.html", exc, **_batch_context(pols, request.form, plan=_quiet_plan(pols)))
    row = records.create_batch(db, values, user.username)
    flash(
        f"Registered batch {row['code']}: it awaits standardization and is not for use until released. "
        f"Write {row['code']} on the container's label.",
        "info",
    )
    for warning in warnings:
        flash(warning, "warning")
    return redirect(url_for("batches.show", code=row["code"]), code=303)


@api_bp.post("/preparation/plan")
@public
def plan_api() -> Any:
    # Storing nothing, it is a read in all but method: open exactly when reads are open.
    if not current_app.config.get("OPEN_READS", True) and current_user() is None:
        return anonymous_response()
    data = read_json_body()  # content type, size, depth and characters, as at every JSON endpoint
    try:
        pols = records.policies(get_db(), lab_today())
        plan, warnings = work_out_plan(data, pols, strict_keys=True, decimal_comma=forms.from_form_page())
    except InvalidInput as exc:
        return jsonify({"errors": [e.as_dict() for e in exc.errors]}), 422
    return jsonify(plan_json(plan, warnings))


@bp.get("/batches/<code>/adjust")
@login_required
def adjust(code: str) -> Any:
    user = current_user()
    assert user is not None
    if not (user.can("batch.register") or user.can("run.record")):
        refuse(user, "batch.register")
    db = get_db()
    today = lab_today()
    batch = records.batch_by_code(db, code)
    status = status_on(readmodel.batch_facts(db, batch["id"]), today).status
    # A withdrawn batch is out of use for good: nothing is worked out for it.
    bases = [] if status is Status.WITHDRAWN else adjustment_bases(db, batch, today)
    context: dict[str, Any] = {
        "batch": batch,
        "bases": bases,
        "titrant": chemistry.titrant(batch["reagent"]),
        "status": status,
        "basis_options": [(b["key"], b["label"]) for b in bases],
        "cautions": preparation.cautions_for(batch["reagent"]),
        "labels": ADJUST_LABELS,
    }
    if "volume_l" not in request.args:
        defaults = _adjust_defaults(batch, bases)
        return render_template("intake/adjust.html", values=defaults, errors={}, adjustment=None, **context)
    try:
        chosen, result = work_out_adjustment(request.args, batch, bases)
    except InvalidInput as exc:
        return forms.render_form("intake/adjust.html", values=request.args, errors=exc.fields, adjustment=None, **context), 422
    return render_template("intake/adjust.html", values=request.args, errors={}, adjustment=result, basis=chosen, **context)


@bp.route("/batches/<code>/withdraw", methods=["GET", "POST"])
@require("batch.withdraw")
@once
def withdraw(code: str) -> Any:
    db = get_db()
    today = lab_today()
    batch = records.batch_by_code(db, code)
    existing = records.withdrawal_of(db, batch["id"])
    context: dict[str, Any] = {"batch": batch, "existing": existing, "labels": WITHDRAW_LABELS}
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("intake/withdraw.html", values={"withdrawn_on": today.isoformat()}, errors={}, **context)
    user = current_user()
    assert user is not None
    try:
        if existing is not None:  # said before any field check: no input can make a second withdrawal right
            raise Conflict("this batch is already withdrawn")
        withdrawn_on, reason = read_withdrawal(request.form, batch, today)
        records.withdraw_batch(db, batch["id"], withdrawn_on, reason, user.username)
    except InvalidInput as exc:
        return forms.reshow("intake/withdraw.html", exc, **context)
    except Conflict as exc:  # also when another withdrawal landed between the read above and this write
        context["existing"] = records.withdrawal_of(db, batch["id"])
        return render_template("intake/withdraw.html", values=request.form, errors={}, conflict=exc.message, **context), 409
    flash(
        f"Batch {batch['code']} is withdrawn from {withdrawn_on.isoformat()}: it shows as withdrawn "
        f"from that day and cannot be released again.",
        "info",
    )
    return redirect(url_for("batches.show", code=batch["code"]), code=303)


IN_ERROR_LABELS: dict[str, str] = {"reason": "What was registered by mistake"}


@bp.route("/batches/<code>/registered-in-error", methods=["GET", "POST"])
@require("batch.withdraw")
@once
def registered_in_error(code: str) -> Any:
    """Mark a batch registered by mistake, with the reason: a new record; the batch's rows stay as written."""
    db = get_db()
    batch = records.batch_by_code(db, code)
    context: dict[str, Any] = {
        "batch": batch,
        "existing": records.registration_in_error_of(db, batch["id"]),
        "withdrawal": records.withdrawal_of(db, batch["id"]),
        "released": bool(readmodel.batch_facts(db, batch["id"]).releases),
        "labels": IN_ERROR_LABELS,
    }
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("intake/registered_in_error.html", values={}, errors={}, **context)
    user = current_user()
    assert user is not None
    try:
        p = forms.parser()
        reason = p.text(request.form.get("reason"), "reason", required=False, max_length=1000)
        if reason is None and not p.has_error("reason"):
            p.error("reason", "is required: say what was registered by mistake (a second entry, the wrong reagent…)")
        p.raise_if_errors()
        assert reason is not None
        records.mark_registered_in_error(db, batch["id"], lab_today(), reason, user.username)
    except InvalidInput as exc:
        return forms.reshow("intake/registered_in_error.html", exc, **context)
    except Conflict as exc:
        context["existing"] = records.registration_in_error_of(db, batch["id"])
        page = render_template("intake/registered_in_error.html", values=request.form, errors={}, conflict=exc.message, **context)
        return page, 409
    flash(
        f"Batch {batch['code']} is marked registered in error: it cannot be standardized, released or "
        "offered for a lab day. Its entries stay on record.",
        "info",
    )
    return redirect(url_for("batches.show", code=batch["code"]), code=303)


# ------------------------------------------------------------------------------------ page context


def _catalogue(pols: Mapping[str, ReagentPolicy]) -> dict[str, Any]:
    """What the form's script needs per reagent: role, usual nominals, typical concentrates, cautions."""
    out = {}
    for t in chemistry.list_titrants():
        if t.key not in pols:
            continue
        out[t.key] = {
            "name": t.name,
            "role": t.role,
            "solid": preparation.solid_allowed(t),
            "nominals": [f"{n:g}" for n in pols[t.key].nominal_molarities],
            "typical": on_screen(_typical_hint(t.key)),
            "cautions": [on_screen(c) for c in preparation.cautions_for(t.key)],
        }
    return out


def _typical_hint(reagent: str) -> str:
    parts = []
    for c in preparation.concentrates_for(reagent):
        if c.density_g_ml is None:
            parts.append(f"{c.name}, about {c.assay_w_w * 100:g} %")
        else:
            parts.append(f"{c.name} at {c.density_g_ml:g} g/mL")
    if not parts:
        return ""
    return "Typical: " + "; ".join(parts) + f" ({preparation.VERIFY})."


def _batch_context(
    pols: Mapping[str, ReagentPolicy], values: Mapping[str, Any], plan: Any = None, warnings: list[str] | None = None
) -> dict[str, Any]:
    catalogue = _catalogue(pols)
    chosen = values.get("reagent") if values.get("reagent") in catalogue else None
    if chosen:
        nominals = catalogue[chosen]["nominals"]
        cautions = tuple(catalogue[chosen]["cautions"])
    else:
        nominals = sorted({f"{n:g}" for p in pols.values() for n in p.nominal_molarities}, key=float)
        cautions = preparation.CAUTIONS
    return {
        "reagents": [(key, f"{entry['name']} ({key})") for key, entry in catalogue.items()],
        "unregistrable": [t.key for t in chemistry.list_titrants() if t.key not in pols],
        "catalogue": catalogue,
        "chosen": chosen,
        "nominals": nominals,
        "cautions": cautions,
        "source_forms": SOURCE_FORMS,
        "water_grades": WATER_GRADES,
        "labels": BATCH_LABELS,
        "plan": plan_display(plan) if plan is not None else None,
        "plan_warnings": warnings or [],
        "limits": {"volume": (MIN_VOLUME_L, MAX_VOLUME_L)},
    }


def _batch_page(pols: Mapping[str, ReagentPolicy], values: Mapping[str, Any], **extra: Any) -> str:
    return render_template("intake/new.html", values=values, errors={}, **_batch_context(pols, values, **extra))


def _quiet_plan(pols: Mapping[str, ReagentPolicy]) -> Any:
    """The plan for the fields as posted, or None: shown beside a refused registration when it can be."""
    try:
        return work_out_plan(request.form, pols)[0]
    except InvalidInput:
        return None


# ------------------------------------------------------------------------- reading the batch fields


def _reagent(p: Parser, raw: Any, pols: Mapping[str, ReagentPolicy]) -> chemistry.Titrant | None:
    if raw is None or (isinstance(raw, str) and not raw.strip()):
        p.error("reagent", "is required: choose the titrant this batch is")
        return None
    try:
        t = chemistry.titrant(str(raw))
    except chemistry.UnknownSubstance:
        p.error("reagent", f"{str(raw)[:30]!r} is not a titrant stockroom knows; choose one from the list")
        return None
    if t.key not in pols:
        p.error(
            "reagent",
            f"no reagent policy is recorded for {t.name}, so its batches cannot be released; an administrator must add one first",
        )
        return None
    return t


def read_percent(p: Parser, raw: Any, field: str, *, required: bool, gt: float, le: float, why: str = "") -> float | None:
    """A percentage typed as such (37 for 37 %), above gt and at most le, or None with an error recorded.

    A value of 1 or less is refused as a likely mass fraction, with the percentage to type instead;
    why: an optional clause saying why the range is what it is. Returns the value in %.
    """
    value = p.number(raw, field, required=required)
    if value is None:
        return None
    if 0 < value <= 1:
        p.error(field, f"is in percent: {value:g} looks like a mass fraction; for {value * 100:g} % type {value * 100:g}")
        return None
    if not gt < value <= le:
        p.error(field, f"must be greater than {gt:g} % and at most {le:g} %" + (f": {why}" if why else ""))
        return None
    return value


def _read_plan_fields(
    p: Parser, data: Mapping[str, Any], pols: Mapping[str, ReagentPolicy], need_concentrate: bool
) -> dict[str, Any]:
    """The calculator's fields, checked; keys as the form names them, the assay as a mass fraction."""
    t = _reagent(p, data.get("reagent"), pols)
    nominal = p.number(data.get("nominal_molarity"), "nominal_molarity", gt=0, le=MAX_NOMINAL_MOL_L, unit="mol/L")
    volume = p.number(data.get("volume_l"), "volume_l", ge=MIN_VOLUME_L, le=MAX_VOLUME_L, unit="L")
    form = p.choice(data.get("source_form"), "source_form", [k for k, _ in SOURCE_FORMS], default=LIQUID)
    if form == SOLID and t is not None and not preparation.solid_allowed(t):
        p.error("source_form", f"{t.name} is made from a liquid concentrate: choose the concentrate")
        form = None
    pct = read_percent(p, data.get("concentrate_assay_pct"), "concentrate_assay_pct", required=need_concentrate, gt=1, le=100)
    density = None
    if form != SOLID:  # a solid's density is meaningless here; the form disables that field for solids
        density = p.number(
            data.get("concentrate_density_g_ml"),
            "concentrate_density_g_ml",
            required=need_concentrate and form == LIQUID,
            ge=MIN_DENSITY_G_ML,
            le=MAX_DENSITY_G_ML,
            unit="g/mL",
        )
        if density is not None and pct is None and not p.has_error("concentrate_assay_pct"):
            p.error("concentrate_assay_pct", "is needed with the density: give the assay from the certificate")
    return {
        "reagent": t,
        "nominal_molarity": nominal,
        "volume_l": volume,
        "source_form": form,
        "assay_w_w": None if pct is None else pct / 100.0,
        "density_g_ml": density,
    }


def _remap(exc: InvalidInput, mapping: Mapping[str, str]) -> InvalidInput:
    return InvalidInput([FieldError(mapping.get(e.field, e.field), e.message) for e in exc.errors])


def water_warning(t: chemistry.Titrant, water_grade: str | None) -> str | None:
    """A warning when a base is made up with water not described as CO2-free, else None."""
    if t.role != BASE or (water_grade and _CO2_FREE.search(water_grade)):
        return None
    said = f"“{water_grade}”" if water_grade else "no water grade"
    return (
        f"{t.name} takes up carbon dioxide as carbonate, which shifts its end point: it should be made "
        f"with boiled, CO2-free water, and {said} was given (common practice). Check the water, or note it."
    )


def work_out_plan(
    data: Mapping[str, Any], pols: Mapping[str, ReagentPolicy], strict_keys: bool = False, decimal_comma: bool | None = None
) -> tuple[preparation.PreparationPlan, list[str]]:
    """The preparation plan for the calculator's fields (form or JSON values), with warnings.

    data: field name -> raw value (strings or JSON numbers); nominal in mol/L, volume in L, assay in
    % w/w, density in g/mL at 20 °C. Returns (plan, warnings). Raises InvalidInput naming form fields.
    """
    # The form reads "0,1" as 0.1; the JSON API refuses a comma unless the form page's script asks.
    p = Parser(decimal_comma=not strict_keys if decimal_comma is None else decimal_comma)
    if strict_keys:
        p.known_keys(data, PLAN_KEYS)
    fields = _read_plan_fields(p, data, pols, need_concentrate=True)
    p.raise_if_errors()
    t = fields["reagent"]
    try:
        plan = preparation.preparation_plan(
            t,
            fields["nominal_molarity"],
            fields["volume_l"],
            fields["assay_w_w"],
            fields["density_g_ml"],
            form=fields["source_form"],
        )
    except InvalidInput as exc:
        raise _remap(exc, _PLAN_TO_FORM) from None
    warnings = [w for w in (water_warning(t, _text_or_none(data.get("water_grade"))),) if w]
    return plan, warnings


def _text_or_none(raw: Any) -> str | None:
    return raw.strip() if isinstance(raw, str) and raw.strip() else None


def read_batch(
    form: Mapping[str, Any], pols: Mapping[str, ReagentPolicy], today: dt.date, *, decimal_comma: bool = False
) -> tuple[dict[str, Any], list[str]]:
    """The register form, checked, as records.create_batch takes it, and the warnings to show.

    form: the posted fields; today: the lab's date (prepared_on may not be later). Returns
    (values, warnings): nominal in mol/L, volume in L, assay as a mass fraction, density in g/mL.
    Raises InvalidInput naming every bad field. decimal_comma: True at the form's door (not the API's).
    """
    p = Parser(decimal_comma=decimal_comma)
    fields = _read_plan_fields(p, form, pols, need_concentrate=False)
    prepared_on = forms.date(p, form.get("prepared_on"), "prepared_on", not_after=today)
    prepared_by = p.text(form.get("prepared_by"), "prepared_by", max_length=80)
    lot = p.text(form.get("concentrate_lot"), "concentrate_lot", required=False, max_length=80)
    water = p.text(form.get("water_grade"), "water_grade", required=False, max_length=80)
    container = p.text(form.get("container"), "container", required=False, max_length=80)
    notes = p.text(form.get("notes"), "notes", required=False, max_length=2000)
    unit = "g" if fields["source_form"] == SOLID else "mL"
    measured = p.number(
        form.get("measured_amount") or None, "measured_amount", required=False, gt=0, le=MAX_MEASURED[unit], unit=unit
    )
    p.raise_if_errors()
    t = fields["reagent"]
    values = {
        "reagent": t.key,
        "nominal_molarity": fields["nominal_molarity"],
        "volume_l": fields["volume_l"],
        "prepared_on": prepared_on,
        "prepared_by": prepared_by,
        "concentrate_lot": lot,
        "concentrate_assay_w_w": fields["assay_w_w"],
        "concentrate_density_g_ml": fields["density_g_ml"],
        "water_grade": water,
        "container": container,
        "notes": notes,
    }
    suggested = _suggested_amount(fields)
    values["preparation"] = {
        "source_form": fields["source_form"] or LIQUID,
        "measured_amount": measured,
        "measured_unit": unit,
        "suggested_amount": suggested,
    }
    warnings = []
    if measured is not None and suggested is not None and abs(measured - suggested) > MEASURED_WARN_REL * suggested:
        warnings.append(
            f"{sig(measured)} {unit} was measured where the calculator gives {sig(suggested)} {unit} "
            f"({(measured - suggested) / suggested * 100:+.0f} %): recorded as done; the standardization finds the real strength."
        )
    usual = pols[t.key].nominal_molarities
    if not any(math.isclose(fields["nominal_molarity"], n, rel_tol=1e-9) for n in usual):
        warnings.append(
            f"{fields['nominal_molarity']:g} mol/L is not one of the usual strengths in the {t.key} "
            f"policy ({', '.join(f'{n:g}' for n in usual)} mol/L); it is recorded as typed."
        )
    warning = water_warning(t, water)
    if warning:
        warnings.append(warning)
    return values, warnings


def _suggested_amount(fields: Mapping[str, Any]) -> float | None:
    """What the calculator gives for the checked fields: mL of liquid concentrate or g of pellets; None
    when the fields do not make a plan (no assay, say)."""
    if fields["assay_w_w"] is None or (fields["source_form"] != SOLID and fields["density_g_ml"] is None):
        return None
    try:
        plan = preparation.preparation_plan(
            fields["reagent"],
            fields["nominal_molarity"],
            fields["volume_l"],
            fields["assay_w_w"],
            fields["density_g_ml"],
            form=fields["source_form"],
        )
    except InvalidInput:
        return None
    return plan.concentrate_mass_g if plan.form == SOLID else plan.concentrate_volume_ml


# ------------------------------------------------------------------------------- showing a plan


def plan_display(plan: preparation.PreparationPlan) -> dict[str, Any]:
    """The plan's figures as the page and the script show them: (label, amount, detail) rows and the steps."""
    figures = []
    if plan.form == LIQUID:
        assert plan.concentrate_volume_ml is not None and plan.concentrate_molarity_mol_l is not None
        figures.append(
            {
                "label": "Concentrate to measure",
                "value": f"{sig(plan.concentrate_volume_ml)} mL",
                "detail": f"or weigh {sig(plan.concentrate_mass_g)} g of it",
            }
        )
        figures.append(
            {
                "label": "Water, roughly",
                "value": f"{sig(plan.water_approx_l, 3)} L",
                "detail": f"make up to the {sig(plan.final_volume_l, 3)} L mark; do not measure the water",
            }
        )
        figures.append(
            {
                "label": "Concentrate strength",
                "value": f"{sig(plan.concentrate_molarity_mol_l)} mol/L",
                "detail": f"from {percent(plan.assay_w_w, None)} w/w and {plan.density_g_ml:g} g/mL",
            }
        )
    else:
        figures.append(
            {
                "label": "Pellets to weigh",
                "value": f"{sig(plan.concentrate_mass_g)} g",
                "detail": f"{sig(plan.reagent_mass_g)} g of {plan.reagent} at {percent(plan.assay_w_w, None)} assay",
            }
        )
        figures.append(
            {"label": "Water", "value": f"{sig(plan.final_volume_l, 3)} L", "detail": "dissolve, cool, then make up to the mark"}
        )
    return {
        "figures": figures,
        "instructions": [on_screen(t) for t in plan.instructions],
        "notes": [on_screen(t) for t in plan.notes],
        "cautions": [on_screen(t) for t in plan.cautions],
        "summary": f"{sig(plan.final_volume_l, 3)} L of {plan.target_molarity_mol_l:g} mol/L {plan.reagent}",
    }


def plan_json(plan: preparation.PreparationPlan, warnings: list[str]) -> dict[str, Any]:
    """The JSON answer of the calculator: every figure of the plan (units in the key names) and its display."""
    return {"plan": dataclasses.asdict(plan), "display": plan_display(plan), "warnings": warnings}


# ------------------------------------------------------------------------------------ adjustment

ADJUST_LABELS: dict[str, str] = {
    "basis": "Adjust from",
    "volume_l": "Volume left in the container",
    "concentrate_assay_pct": "Concentrate assay",
    "concentrate_density_g_ml": "Concentrate density",
}


def adjustment_bases(db: sqlite_utils.Database, batch: Mapping[str, Any], today: dt.date) -> list[dict[str, Any]]:
    """The measured values an adjustment can start from: the certified value in force, then a later run.

    Returns dicts with key ("certified" or "latest"), molarity (mol/L), tolerance_rel, and a label.
    """
    facts = readmodel.batch_facts(db, batch["id"])
    bases: list[dict[str, Any]] = []
    release = release_in_force(facts, today)
    tolerance = records.policy_for(db, batch["reagent"], today).tolerance_rel
    release_run_id = None
    history = readmodel.batch_history(db, batch["id"])
    if release is not None:
        row = next((r for r in history["releases"] if r["id"] == release.id), None)
        release_run_id = row["run_id"] if row else None
        bases.append(
            {
                "key": "certified",
                "molarity": release.molarity,
                "tolerance_rel": release.tolerance_rel,
                "label": f"the certified value in force (released {release.released_on.isoformat()}), "
                f"{molarity(release.molarity, release.U, release.k)}",
            }
        )
        tolerance = release.tolerance_rel
    runs = [
        r for r in history["runs"] if r["current"] is not None and not (r["decision"] and r["decision"]["decision"] == "reject")
    ]
    if runs:
        last = runs[-1]  # history lists runs by date performed
        if last["id"] != release_run_id:
            state = "accepted" if last["decision"] else "not yet decided"
            kind = "re-check" if last["purpose"] == "recheck" else "standardization"
            bases.append(
                {
                    "key": "latest",
                    "molarity": last["current"]["molarity"],
                    "tolerance_rel": tolerance,
                    "label": f"the mean of the latest {kind} ({last['performed_on']}, {state}), "
                    f"{molarity(last['current']['molarity'], last['current']['expanded_u'], last['current']['k'])}",
                }
            )
    return bases


def _adjust_defaults(batch: Mapping[str, Any], bases: list[dict[str, Any]]) -> dict[str, Any]:
    values: dict[str, Any] = {"basis": bases[0]["key"] if bases else ""}
    if batch.get("concentrate_assay_w_w") and batch.get("concentrate_density_g_ml"):
        values["concentrate_assay_pct"] = f"{batch['concentrate_assay_w_w'] * 100:g}"
        values["concentrate_density_g_ml"] = f"{batch['concentrate_density_g_ml']:g}"
    return values


def work_out_adjustment(
    args: Mapping[str, Any], batch: Mapping[str, Any], bases: list[dict[str, Any]]
) -> tuple[dict[str, Any], preparation.AdjustmentPlan]:
    """The adjustment for the typed volume left (L) and optional concentrate (% w/w, g/mL).

    Returns (basis used, plan). Raises InvalidInput naming the form's fields.
    """
    p = forms.parser()
    if not bases:
        raise InvalidInput([FieldError("basis", "this batch has no standardization yet: there is nothing to adjust from")])
    key = p.choice(args.get("basis"), "basis", [b["key"] for b in bases], default=bases[0]["key"])
    volume = p.number(args.get("volume_l"), "volume_l", gt=0, le=MAX_VOLUME_L * 1.2, unit="L")
    pct = read_percent(p, args.get("concentrate_assay_pct"), "concentrate_assay_pct", required=False, gt=1, le=100)
    density = p.number(
        args.get("concentrate_density_g_ml"),
        "concentrate_density_g_ml",
        required=False,
        ge=MIN_DENSITY_G_ML,
        le=MAX_DENSITY_G_ML,
        unit="g/mL",
    )
    if (pct is None) != (density is None) and p.ok:
        missing = "concentrate_density_g_ml" if density is None else "concentrate_assay_pct"
        p.error(missing, "give the concentrate's assay and density together")
    p.raise_if_errors()
    assert volume is not None
    basis = next(b for b in bases if b["key"] == key)
    target = float(batch["nominal_molarity"])
    weak = basis["molarity"] / target - 1.0 < -basis["tolerance_rel"]
    if weak and pct is None:
        raise InvalidInput(
            [
                FieldError(
                    "concentrate_assay_pct",
                    "the batch is weak: raising it needs a concentrate; "
                    "give the assay and density of the concentrate you will add",
                )
            ]
        )
    try:
        plan = preparation.adjustment_plan(
            batch["reagent"],
            basis["molarity"],
            target,
            volume,
            tolerance_rel=basis["tolerance_rel"],
            concentrate_assay_w_w=None if pct is None or not weak else pct / 100.0,
            concentrate_density_g_ml=density if weak else None,
        )
    except InvalidInput as exc:
        raise _remap(exc, _ADJUST_TO_FORM) from None
    return basis, plan


# ------------------------------------------------------------------------------------- withdrawal

WITHDRAW_LABELS: dict[str, str] = {"withdrawn_on": "Withdrawn from", "reason": "Reason"}


def read_withdrawal(form: Mapping[str, Any], batch: Mapping[str, Any], today: dt.date) -> tuple[dt.date, str]:
    """The withdrawal date (not before preparation, not after today) and the reason, checked."""
    p = Parser()
    prepared = dt.date.fromisoformat(batch["prepared_on"])
    raw_date = form.get("withdrawn_on") or today.isoformat()
    on = forms.date(p, raw_date, "withdrawn_on", not_after=today, not_before=prepared)
    reason = p.text(form.get("reason"), "reason", required=False, max_length=1000)
    if reason is None and not p.has_error("reason"):
        p.error("reason", "is required: say why the batch is taken out of use")
    p.raise_if_errors()
    assert on is not None and reason is not None
    return on, reason
