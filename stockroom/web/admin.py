"""Administration: accounts, reagent policy, and the settings in force (read-only)."""

from __future__ import annotations

import datetime as dt
from typing import Any

from flask import Blueprint, current_app, flash, redirect, render_template, request, url_for

from stockroom import accounts, chemistry, records, settings
from stockroom.db import get_db
from stockroom.errors import InvalidInput
from stockroom.policy import ReagentPolicy
from stockroom.web import forms, lab_today
from stockroom.web.access import current_user, require
from stockroom.web.forms import date as form_date
from stockroom.web.inputs import Parser
from stockroom.web.once import once

bp = Blueprint("admin", __name__, url_prefix="/admin")


def _actor() -> str:
    user = current_user()
    return user.username if user else "?"


@bp.route("/users", methods=["GET", "POST"])
@require("users.manage")
@once
def users() -> Any:
    db = get_db()
    errors: dict[str, str] = {}
    status = 200
    if request.method == "POST":
        try:
            user = accounts.create_user(
                db,
                request.form.get("username", "").strip(),
                request.form.get("display_name", "").strip(),
                request.form.get("role", ""),
                request.form.get("password", ""),
                _actor(),
            )
        except InvalidInput as exc:
            errors, status = exc.fields, 422
        else:
            flash(f"Account {user.username} ({user.role_label}) created.", "ok")
            return redirect(url_for("admin.users"), 303)
    values = {k: v for k, v in request.form.items() if k != "password"}
    return forms.render_form(
        "admin/users.html",
        users=accounts.list_users(db),
        roles=accounts.ROLES,
        role_labels=accounts.ROLE_LABELS,
        errors=errors,
        values=values,
    ), status


@bp.post("/users/<username>/disable")
@require("users.manage")
@once
def disable(username: str) -> Any:
    reason = (request.form.get("reason") or "").strip()
    if not reason:
        raise InvalidInput("give the reason for disabling the account", field="reason")
    accounts.disable_user(get_db(), username, _actor(), reason)
    flash(f"Account {username} disabled; its sessions and tokens no longer work.", "ok")
    return redirect(url_for("admin.users"), 303)


def _policy_form(p: Parser, form: Any) -> tuple[ReagentPolicy | None, dt.date | None, str | None]:
    reagent = p.choice(form.get("reagent") or None, "reagent", [t.key for t in chemistry.list_titrants()])
    nominal_raw = (form.get("nominal_molarities") or "").replace(";", ",")
    nominals = []
    for part in [x.strip() for x in nominal_raw.split(",") if x.strip()]:
        value = p.number(part, "nominal_molarities", gt=0, le=20, unit="mol/L")
        if value is not None:
            nominals.append(value)
    if not nominal_raw.strip():
        p.error("nominal_molarities", "list the strengths offered, e.g. 0.1, 0.5, 1")
    shelf = p.integer(form.get("shelf_life_days") or None, "shelf_life_days", ge=1, le=3650)
    interval = p.integer(form.get("recheck_interval_days") or None, "recheck_interval_days", ge=1, le=3650)
    tol = p.number(form.get("tolerance_pct") or None, "tolerance_pct", gt=0, le=10, unit="%")
    rsd = p.number(form.get("max_rsd_pct") or None, "max_rsd_pct", gt=0, le=5, unit="%")
    min_n = p.integer(form.get("min_replicates") or None, "min_replicates", ge=1, le=50)
    # Optional: empty keeps containers to the batch's own expiry.
    container_days = p.integer(
        form.get("container_shelf_life_days") or None, "container_shelf_life_days", required=False, ge=1, le=3650
    )
    since = form_date(p, form.get("effective_from"), "effective_from")
    reason = p.text(form.get("reason") or None, "reason", max_length=500)
    if shelf and interval and interval > shelf:
        p.error("recheck_interval_days", "cannot be longer than the shelf life")
    if shelf and container_days and container_days > shelf:
        p.error("container_shelf_life_days", "cannot be longer than the shelf life (a container never outlasts its batch)")
    if not p.ok or reagent is None:
        return None, None, None
    assert shelf is not None and interval is not None and tol is not None and rsd is not None and min_n is not None
    return (
        ReagentPolicy(reagent, tuple(sorted(set(nominals))), shelf, interval, tol / 100, rsd / 100, min_n, container_days),
        since,
        reason,
    )


def _policy_start(in_force: list[ReagentPolicy], reagent: str | None, today: dt.date) -> dict[str, str]:
    """The policy form's first values: the policy in force for `reagent` (else the first one), to be changed."""
    chosen = next((p for p in in_force if p.reagent == reagent), in_force[0] if in_force else None)
    values = {"effective_from": today.isoformat()}
    if chosen is not None:
        values |= {
            "reagent": chosen.reagent,
            "nominal_molarities": ", ".join(f"{m:g}" for m in chosen.nominal_molarities),
            "shelf_life_days": str(chosen.shelf_life_days),
            "recheck_interval_days": str(chosen.recheck_interval_days),
            "tolerance_pct": f"{chosen.tolerance_rel * 100:g}",
            "max_rsd_pct": f"{chosen.max_rsd * 100:g}",
            "min_replicates": str(chosen.min_replicates),
            "container_shelf_life_days": str(chosen.container_shelf_life_days or ""),
        }
    return values


@bp.route("/policy", methods=["GET", "POST"])
@require("policy.edit")
@once
def policy() -> Any:
    db = get_db()
    errors: dict[str, str] = {}
    status = 200
    if request.method == "POST":
        p = forms.parser()
        new, since, reason = _policy_form(p, request.form)
        if p.ok and new is not None and since is not None and reason is not None:
            records.add_policy(db, new, since, reason, _actor())
            flash(
                f"{new.reagent} policy recorded, in force from {since.isoformat()}. Releases made before "
                "keep the expiry and re-check interval they were given.",
                "ok",
            )
            return redirect(url_for("admin.policy"), 303)
        errors, status = InvalidInput(p.errors).fields, 422
    today = lab_today()
    in_force = sorted(records.policies(db, today).values(), key=lambda x: x.reagent)
    return forms.render_form(
        "admin/policy.html",
        in_force=in_force,
        history=records.policy_history(db),
        errors=errors,
        values=request.form if request.method == "POST" else _policy_start(in_force, request.args.get("reagent"), today),
        reagent_options=[(t.key, f"{t.key} ({t.name})") for t in chemistry.list_titrants()],
    ), status


@bp.get("/settings")
@require("settings.edit")
def settings_page() -> Any:
    rows = []
    for name, default, help_text in settings.describe():
        value = current_app.config.get(name)
        shown = "(set; not shown)" if name == "SECRET_KEY" else value
        rows.append(
            {
                "name": name,
                "value": shown,
                "default": default,
                "help": help_text,
                "changed": name != "SECRET_KEY" and value != default,
            }
        )
    return render_template("admin/settings.html", rows=rows)
