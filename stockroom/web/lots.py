"""Primary-standard lots: the list with each lot's state, one page per lot, and registering a lot.

    GET      /lots/          every lot: in date or expired (today in the lab's time zone), drying record
    GET/POST /lots/new       register a lot from its certificate, with its drying or storage record
    GET      /lots/<code>    one lot, by its code (STD-KHP-002); /lots/<number> moves there (301)

A drying record that breaks the substance's rule is refused with the rule; a substance that should be
dried but has no drying record is registered with a warning (a run on it warns again).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

from flask import Blueprint, flash, redirect, render_template, request, url_for

from stockroom import chemistry, records
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.web import forms, lab_today
from stockroom.web.access import current_user, require
from stockroom.web.intake import read_percent
from stockroom.web.once import once

bp = Blueprint("lots", __name__, url_prefix="/lots")

# A primary standard assays above 90 %; the upper bound matches the schema's (a certificate may print
# a value a hair above 100 % within its uncertainty).
MIN_ASSAY_PCT, MAX_ASSAY_PCT = 90.0, 100.01
MAX_U_PCT = 2.0  # a certificate U beyond 2 % w/w is no primary standard's: most likely a unit slip
MIN_K, MAX_K = 1.0, 5.0
MIN_DRYING_C, MAX_DRYING_C = 20.0, 400.0
SOON_DAYS = 30  # "expires soon" in the list: a month's notice to order the next lot (common practice)

LOT_LABELS: dict[str, str] = {
    "substance": "Substance",
    "supplier": "Supplier",
    "supplier_lot": "Supplier's lot",
    "assay_pct": "Certificate assay",
    "assay_u_pct": "Certificate expanded uncertainty U",
    "assay_k": "Coverage factor k",
    "expires_on": "Expires on",
    "received_on": "Received on",
    "dried_on": "Dried on",
    "dried_at_c": "Dried at",
    "storage_note": "Storage",
}


# --------------------------------------------------------------------------------------------- views


@bp.get("/")
def list_lots() -> str:
    today = lab_today()
    lots = [describe(lot, today) for lot in records.list_lots(get_db())]
    return render_template("lots/list.html", lots=lots, today=today)


@bp.get("/<int:lot_id>")
def by_number(lot_id: int) -> Any:
    """An old numeric address: moved for good to the lot's code (301), the way every page links it."""
    return redirect(url_for("lots.show", code=records.lot_by_id(get_db(), lot_id)["code"]), code=301)


@bp.get("/<code>")
def show(code: str) -> str:
    today = lab_today()
    lot = describe(records.lot_by_code(get_db(), code), today)
    return render_template("lots/show.html", lot=lot, today=today)


@bp.route("/new", methods=["GET", "POST"])
@require("lot.register")
@once
def new_lot() -> Any:
    today = lab_today()
    context: dict[str, Any] = {"standards": _standard_options(), "rules": _rules(), "labels": LOT_LABELS}
    if request.method != "POST":  # HEAD answers like GET and never writes
        return render_template("lots/new.html", values={"assay_k": "2", "received_on": today.isoformat()}, errors={}, **context)
    try:
        values, warnings = read_lot(request.form, today)
    except InvalidInput as exc:
        return forms.reshow("lots/new.html", exc, **context)
    user = current_user()
    assert user is not None
    row = records.create_lot(get_db(), values, user.username)
    flash(f"Registered standard lot {row['code']} ({chemistry.standard(row['substance']).name}).", "info")
    for warning in warnings:
        flash(warning, "warning")
    return redirect(url_for("lots.show", code=row["code"]), code=303)


# ------------------------------------------------------------------------------------------ helpers


def _standard_options() -> list[tuple[str, str]]:
    def use(s: chemistry.PrimaryStandard) -> str:
        return "standardizes " + ", ".join(t.key for t in chemistry.list_titrants() if chemistry.reacts(t, s))

    return [(s.key, f"{s.name} ({s.key}) — {use(s)}") for s in chemistry.list_standards()]


def _rules() -> list[tuple[str, str]]:
    return [(s.name, s.drying.text) for s in chemistry.list_standards()]


def describe(lot: Mapping[str, Any], today: dt.date) -> dict[str, Any]:
    """A lot row with what the pages show: state on `today`, substance name, drying record and its problems."""
    out = dict(lot)
    std = chemistry.standard(lot["substance"])
    expires = dt.date.fromisoformat(lot["expires_on"])
    days_left = (expires - today).days
    # Expired the day after its expiry date, as workflow.check_lot_usable refuses it.
    if days_left < 0:
        out["state"], out["state_label"] = "expired", f"expired {-days_left} day{'s' if days_left != -1 else ''} ago"
    elif days_left <= SOON_DAYS:
        out["state"], out["state_label"] = "soon", f"in date, expires in {days_left} day{'s' if days_left != 1 else ''}"
    else:
        out["state"], out["state_label"] = "in_date", "in date"
    out["substance_name"] = std.name
    out["rule"] = std.drying.text
    if lot.get("dried_at_c") is not None:
        out["drying_text"] = f"dried {lot.get('dried_on') or '(date not recorded)'} at {lot['dried_at_c']:g} °C"
    else:
        out["drying_text"] = "not oven-dried"
    out["drying_problem"] = chemistry.check_drying(std, lot.get("dried_at_c")) or (
        chemistry.missing_drying_warning(std) if lot.get("dried_at_c") is None else None
    )
    return out


def read_lot(form: Mapping[str, Any], today: dt.date) -> tuple[dict[str, Any], list[str]]:
    """The lot form, checked, as records.create_lot takes it, and the warnings to show.

    form: the posted fields (assay and U in % w/w, k plain, temperature in °C, dates YYYY-MM-DD);
    today: the lab's date. Returns (values with assay and U as mass fractions, warnings).
    Raises InvalidInput naming every bad field.
    """
    p = forms.parser()
    std = None
    raw = form.get("substance")
    if raw is None or not str(raw).strip():
        p.error("substance", "is required: choose the primary standard")
    else:
        try:
            std = chemistry.standard(str(raw))
        except chemistry.UnknownSubstance:
            p.error("substance", f"{str(raw)[:30]!r} is not a primary standard stockroom knows; choose one from the list")
    supplier = p.text(form.get("supplier"), "supplier", max_length=120)
    supplier_lot = p.text(form.get("supplier_lot"), "supplier_lot", max_length=80)
    assay = read_percent(
        p,
        form.get("assay_pct"),
        "assay_pct",
        required=True,
        gt=MIN_ASSAY_PCT,
        le=MAX_ASSAY_PCT,
        why=f"a primary standard assays above {MIN_ASSAY_PCT:g} %",
    )
    u = p.number(form.get("assay_u_pct"), "assay_u_pct", ge=0, le=MAX_U_PCT, unit="% w/w")
    k = p.number(form.get("assay_k") or "2", "assay_k", ge=MIN_K, le=MAX_K)
    expires_on = forms.date(p, form.get("expires_on"), "expires_on")
    received_on = forms.date(p, form.get("received_on"), "received_on", required=False, not_after=today)
    dried_on = forms.date(p, form.get("dried_on"), "dried_on", required=False, not_after=today, not_before=received_on)
    dried_at = p.number(form.get("dried_at_c"), "dried_at_c", required=False, ge=MIN_DRYING_C, le=MAX_DRYING_C, unit="°C")
    storage = p.text(form.get("storage_note"), "storage_note", required=False, max_length=300)
    if dried_at is not None and std is not None:
        broken = chemistry.check_drying(std, dried_at)
        if broken:
            p.error("dried_at_c", f"refused: {broken}")
    if dried_at is not None and dried_on is None and not p.has_error("dried_on"):
        p.error("dried_on", "give the date it was dried with the temperature")
    if dried_on is not None and dried_at is None and not p.has_error("dried_at_c"):
        p.error("dried_at_c", "give the oven temperature with the date it was dried")
    if not p.has_error("dried_on") and not p.has_error("dried_at_c") and dried_at is None and dried_on is None and not storage:
        p.error("storage_note", "record either the drying (date and temperature) or how the lot is kept")
    p.raise_if_errors()
    assert std is not None and assay is not None and u is not None and expires_on is not None
    values = {
        "substance": std.key,
        "supplier": supplier,
        "supplier_lot": supplier_lot,
        "assay": assay / 100.0,
        "assay_expanded_u": u / 100.0,
        "assay_k": k,
        "expires_on": expires_on.isoformat(),
        "received_on": received_on.isoformat() if received_on else None,
        "dried_on": dried_on.isoformat() if dried_on else None,
        "dried_at_c": dried_at,
        "storage_note": storage,
    }
    warnings = []
    if dried_at is None:
        missing = chemistry.missing_drying_warning(std)
        if missing:
            warnings.append(f"Registered, but {missing} Runs on this lot will warn that no drying is recorded.")
    if expires_on < today:
        warnings.append(f"This lot expired on {expires_on.isoformat()}: runs refuse an expired lot.")
    return values, warnings
