"""Reagent policies: one row per policy from a date; the newest row in force on a date wins."""

from __future__ import annotations

import datetime as dt
import json
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom.errors import FieldError, InvalidInput, NotFound
from stockroom.policy import ReagentPolicy
from stockroom.records.audit import record_row


def add_policy(db: sqlite_utils.Database, policy: ReagentPolicy, effective_from: dt.date, reason: str, actor: str) -> int:
    """Record a new policy for a reagent from a date; earlier policy rows stay as they were written."""
    if not reason.strip():
        raise InvalidInput([FieldError("reason", "give the reason for the change of policy")])
    return record_row(
        db,
        "reagent_policies",
        {
            "reagent": policy.reagent,
            "nominal_molarities": json.dumps(list(policy.nominal_molarities)),
            "shelf_life_days": policy.shelf_life_days,
            "recheck_interval_days": policy.recheck_interval_days,
            "tolerance_rel": policy.tolerance_rel,
            "max_rsd": policy.max_rsd,
            "min_replicates": policy.min_replicates,
            "container_shelf_life_days": policy.container_shelf_life_days,
            "effective_from": effective_from.isoformat(),
            "recorded_at": dbmod.utc_now(),
            "recorded_by": actor,
            "reason": reason.strip(),
        },
        actor=actor,
        action_code="policy.change",
        reason=reason.strip(),
        detail={
            "reagent": policy.reagent,
            "effective_from": effective_from.isoformat(),
            "shelf_life_days": policy.shelf_life_days,
            "recheck_interval_days": policy.recheck_interval_days,
            "tolerance_rel": policy.tolerance_rel,
            "max_rsd": policy.max_rsd,
            "min_replicates": policy.min_replicates,
            "container_shelf_life_days": policy.container_shelf_life_days,
        },
    )


def policy_history(db: sqlite_utils.Database) -> list[dict[str, Any]]:
    """Every policy row ever recorded, newest first."""
    return dbmod.query(db, "SELECT * FROM reagent_policies ORDER BY id DESC")


def _policy_from_row(r: dict[str, Any]) -> ReagentPolicy:
    return ReagentPolicy(
        reagent=r["reagent"],
        nominal_molarities=tuple(json.loads(r["nominal_molarities"])),
        shelf_life_days=r["shelf_life_days"],
        recheck_interval_days=r["recheck_interval_days"],
        tolerance_rel=r["tolerance_rel"],
        max_rsd=r["max_rsd"],
        min_replicates=r["min_replicates"],
        container_shelf_life_days=r.get("container_shelf_life_days"),
    )


def policies(db: sqlite_utils.Database, on: dt.date | None = None) -> dict[str, ReagentPolicy]:
    """The policy in force for every reagent on a date (today when None)."""
    day = (on or dt.date.today()).isoformat()
    rows = dbmod.query(db, "SELECT * FROM reagent_policies WHERE effective_from <= ? ORDER BY reagent, effective_from, id", [day])
    out: dict[str, ReagentPolicy] = {}
    for r in rows:
        out[r["reagent"]] = _policy_from_row(r)  # later rows overwrite earlier: newest wins
    return out


def policy_for(db: sqlite_utils.Database, reagent: str, on: dt.date | None = None) -> ReagentPolicy:
    """The policy in force for one reagent; NotFound when the reagent has none."""
    found = policies(db, on).get(reagent)
    if found is None:
        raise NotFound(f"no policy is recorded for reagent {reagent!r}")
    return found
