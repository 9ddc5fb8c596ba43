"""The prep room's actions: record a run, exclude a replicate, accept or reject, withdraw.

Each action composes the pure science core (standardization, policy) with the record layer, so the
web forms, the CSV import and the demo loader all go through the same path and store the same thing.

A run may name the instruments it used (stockroom.instruments): their figures replace the settings'
defaults in the uncertainty budget, they are stored with the run, and a certifying run made with an
instrument past its calibration due date (or failed, or never calibrated) cannot be accepted; a
re-check is recorded with a warning.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from stockroom import chemistry, readmodel, records, standardization, stats
from stockroom import db as dbmod
from stockroom import instruments as inst_mod
from stockroom.errors import Conflict, FieldError, InvalidInput, StockroomError
from stockroom.policy import ReagentPolicy, expiry_for, release_in_force
from stockroom.run_input import RunInput
from stockroom.standardization import StandardizationResult
from stockroom.uncertainty import InputQuantity


def snapshot(result: StandardizationResult) -> dict[str, Any]:
    """A JSON-ready dict of a computed run (stored with the run; the same body the preview API returns)."""
    return standardization.result_as_dict(result)


def rule_for(policy: ReagentPolicy) -> stats.AcceptanceRule:
    """The acceptance rule of a reagent's policy."""
    return stats.AcceptanceRule(min_n=policy.min_replicates, max_rsd=policy.max_rsd)


def _purity(lot: Mapping[str, Any]) -> InputQuantity:
    return InputQuantity.expanded(
        "purity",
        float(lot["assay"]),
        float(lot["assay_expanded_u"]),
        float(lot["assay_k"]),
        derivation=f"lot {lot['code']} certificate: U = {lot['assay_expanded_u']} (k = {lot['assay_k']:g})",
    )


def compute_primary(
    config: Mapping[str, Any],
    batch: Mapping[str, Any],
    lot: Mapping[str, Any],
    replicates: Sequence[Mapping[str, Any]],
    excluded: Mapping[int, str],
    policy: ReagentPolicy,
    burette_capacity_ml: float | None = None,
    figures: standardization.Instruments | None = None,
    overrides: Mapping[str, str] | None = None,
) -> StandardizationResult:
    """Compute a primary run from stored-form replicate dicts (1-based positions in `excluded`).

    figures: the instrument figures of the run (instruments.figures); None takes the settings' defaults.
    overrides: check code -> reason for going ahead despite it (standardization.OVERRIDABLE_CHECKS).
    The batch's titrant (its expansion model and plausibility ceiling) enters the computation.
    """
    spec = standardization.standard_spec(batch["reagent"], lot["substance"])
    titrant = chemistry.titrant(batch["reagent"])
    alternatives = tuple(
        standardization.standard_spec(titrant.key, s.key) for s in chemistry.list_standards(titrant) if s.key != spec.key
    )
    reps = tuple(
        standardization.Replicate(
            volume_ml=float(r["volume_ml"]),
            mass_g=r.get("mass_g") if r.get("mass_gross_g") is None else None,
            gross_g=r.get("mass_gross_g"),
            tare_g=r.get("mass_tare_g"),
            blank_ml=float(r.get("blank_ml") or 0.0),
            temperature_c=r.get("temperature_c"),
            endpoint_u_ml=r.get("endpoint_u_ml"),
            endpoint_method=r.get("endpoint_method"),
        )
        for r in replicates
    )
    run = standardization.PrimaryRun(
        standard=spec,
        replicates=reps,
        purity=_purity(lot),
        purity_value=float(lot["assay"]),
        nominal_molarity=float(batch["nominal_molarity"]),
        exclusions=tuple(standardization.Exclusion(p - 1, why) for p, why in sorted(excluded.items())),
        burette_capacity_ml=burette_capacity_ml,
        alternatives=alternatives,
        titrant=titrant,
        overrides=dict(overrides or {}),
    )
    result = standardization.standardize_primary(
        run, figures or standardization.Instruments.from_settings(config), rule_for(policy)
    )
    found = chemistry.pair_for(titrant, chemistry.standard(lot["substance"]))
    if found is not None and found[0].blank and not any(r.blank_ml for r in reps):
        # The pair's method asks for a blank (iodometric: iodine freed by the reagents themselves).
        result = dataclasses.replace(result, warnings=(*result.warnings, f"no blank was recorded. {found[0].blank}."))
    return result


def compute_secondary(
    config: Mapping[str, Any],
    batch: Mapping[str, Any],
    reference_batch: Mapping[str, Any],
    reference_molarity: float,
    reference_u: float,
    replicates: Sequence[Mapping[str, Any]],
    excluded: Mapping[int, str],
    policy: ReagentPolicy,
    burette_capacity_ml: float | None = None,
    figures: standardization.Instruments | None = None,
    overrides: Mapping[str, str] | None = None,
) -> StandardizationResult:
    """Compute a secondary run: aliquots of this batch titrated with a certified reference batch.

    figures: the instrument figures of the run (instruments.figures); None takes the settings' defaults.
    overrides as for compute_primary. Both titrants' expansion models refer the volumes to 20 °C.
    """
    titrant = chemistry.titrant(batch["reagent"])
    ref_titrant = chemistry.titrant(reference_batch["reagent"])
    nu = chemistry.stoichiometric_factor(titrant, ref_titrant)
    reps = tuple(
        standardization.AliquotReplicate(
            aliquot_ml=float(r["aliquot_ml"]),
            volume_ml=float(r["volume_ml"]),
            blank_ml=float(r.get("blank_ml") or 0.0),
            temperature_c=r.get("temperature_c"),
            endpoint_u_ml=r.get("endpoint_u_ml"),
            endpoint_method=r.get("endpoint_method"),
        )
        for r in replicates
    )
    run = standardization.SecondaryRun(
        reference=standardization.Reference(
            reference_molarity, reference_u, name=reference_batch["code"], expansion=ref_titrant.expansion
        ),
        nu=nu,
        replicates=reps,
        nominal_molarity=float(batch["nominal_molarity"]),
        exclusions=tuple(standardization.Exclusion(p - 1, why) for p, why in sorted(excluded.items())),
        burette_capacity_ml=burette_capacity_ml,
        titrant=titrant,
        overrides=dict(overrides or {}),
    )
    return standardization.standardize_secondary(
        run, figures or standardization.Instruments.from_settings(config), rule_for(policy)
    )


def _replicate_rows(replicates: Sequence[Mapping[str, Any]], result: StandardizationResult) -> list[dict[str, Any]]:
    rows = []
    for i, (r, res) in enumerate(zip(replicates, result.replicates, strict=True), start=1):
        row = dict(r)
        row["position"] = i
        if row.get("mass_gross_g") is not None and row.get("mass_tare_g") is not None:
            row["mass_g"] = row["mass_gross_g"] - row["mass_tare_g"]
        row["molarity"] = res.molarity
        rows.append(row)
    return rows


def check_lot_usable(lot: Mapping[str, Any], on: dt.date) -> list[str]:
    """Refuse an expired lot; return warnings (e.g. a drying record missing) for a usable one."""
    if dt.date.fromisoformat(lot["expires_on"]) < on:
        raise InvalidInput(
            [FieldError("standard_lot_id", f"lot {lot['code']} expired on {lot['expires_on']}; use a lot in date")]
        )
    warnings = []
    broken = chemistry.check_drying(lot["substance"], lot.get("dried_at_c"))
    if broken:
        warnings.append(f"lot {lot['code']}: {broken}")
    elif lot.get("dried_at_c") is None:
        missing = chemistry.missing_drying_warning(lot["substance"])
        if missing:
            warnings.append(f"lot {lot['code']}: {missing}")
    return warnings


def run_figures(
    config: Mapping[str, Any], chosen: Mapping[str, inst_mod.Instrument], on: dt.date
) -> standardization.Instruments | None:
    """The budget's figures for a run that named instruments (role -> Instrument), or None for the defaults."""
    return inst_mod.figures(config, chosen, on) if chosen else None


def _stored_result(
    result: StandardizationResult,
    chosen: Mapping[str, inst_mod.Instrument],
    on: dt.date,
    purpose: str,
    overridden_by: str | None = None,
) -> dict[str, Any]:
    """The snapshot stored with a run, with the warnings about its instruments added.

    overridden_by: who gave the run's overrides (the recorder), stored beside them when there are any.
    """
    body = snapshot(result)
    extra = inst_mod.warnings_for(chosen, on, purpose)
    if extra:
        body["warnings"] = list(body.get("warnings") or []) + extra
    if overridden_by and result.overrides:
        body["overridden_by"] = overridden_by
    return body


def stored_overrides(run: Mapping[str, Any]) -> dict[str, str]:
    """The overrides a stored run was recorded with (check code -> reason), carried by its current result."""
    body = (run.get("current") or {}).get("result") or {}
    given = body.get("overrides") or {}
    return {str(k): str(v) for k, v in given.items()} if isinstance(given, Mapping) else {}


def _record(
    db: sqlite_utils.Database,
    run: dict[str, Any],
    replicates: Sequence[Mapping[str, Any]],
    result: StandardizationResult,
    actor: str,
    excluded: Mapping[int, str],
    chosen: Mapping[str, inst_mod.Instrument],
    on: dt.date,
) -> int:
    """Store a run and the instruments it named in one write."""
    with dbmod.write(db):
        run_id = records.record_run(
            db,
            run,
            _replicate_rows(replicates, result),
            _stored_result(result, chosen, on, str(run["purpose"]), overridden_by=actor),
            actor,
            exclusions=sorted(excluded.items()),
        )
        inst_mod.link_run(db, run_id, run["batch_id"], chosen, on, actor)
    return run_id


@dataclass(frozen=True)
class Partner:
    """What a run is measured against, resolved from the records: a lot of primary standard, or a
    certified batch with its release in force that day."""

    lot: Mapping[str, Any] | None = None
    reference: Mapping[str, Any] | None = None
    release: Any = None


def check_not_withdrawn(db: sqlite_utils.Database, batch: Mapping[str, Any]) -> None:
    """Refuse (Conflict) any run on a withdrawn batch (out of use for good) or one registered in error."""
    if records.withdrawal_of(db, batch["id"]) is not None:
        raise Conflict(f"batch {batch['code']} is withdrawn; no run can be recorded for it")
    if records.registration_in_error_of(db, batch["id"]) is not None:
        raise Conflict(f"batch {batch['code']} is marked registered in error; it cannot be standardized or released")


def _condition_errors(titrant: chemistry.Titrant, standard: chemistry.PrimaryStandard, run: RunInput) -> list[FieldError]:
    """The pair's own conditions a run breaks: a pair titrated hot needs the solution's temperature."""
    found = chemistry.pair_for(titrant, standard)
    if found is None or found[0].hot_min_c is None:
        return []
    need = found[0].hot_min_c
    t = run.titration_temperature_c
    why = f"{titrant.name} against {standard.name} is titrated hot, at {need:g} °C or more (common practice)"
    if t is None:
        return [FieldError("titration_temperature_c", f"is required: {why}; give the solution's temperature in °C")]
    if t < need:
        return [FieldError("titration_temperature_c", f"{t:g} °C is too cool: {why}; warm the solution and titrate again")]
    return []


def _resolve(
    db: sqlite_utils.Database, batch: Mapping[str, Any], run: RunInput
) -> tuple[Partner, dict[str, inst_mod.Instrument]]:
    """Check a run against the records (every rule the form has); return its partner and instruments.

    Raises Conflict for a withdrawn batch and InvalidInput naming every other broken rule by its
    request path (standard_lot_id, reference_batch, purpose, burette_id...).
    """
    check_not_withdrawn(db, batch)
    errors: list[FieldError] = []
    on = run.performed_on
    if on < dt.date.fromisoformat(str(batch["prepared_on"])):
        errors.append(FieldError("performed_on", f"cannot be before {batch['prepared_on']}, when the batch was prepared"))
    titrant = chemistry.titrant(batch["reagent"])
    partner = Partner()
    if run.method == "primary":
        try:
            lot = records.lot_by_id(db, int(run.standard_lot_id or 0))
            chemistry.stoichiometric_factor(titrant, chemistry.standard(lot["substance"]))
            check_lot_usable(lot, on)
            partner = Partner(lot=lot)
            errors.extend(_condition_errors(titrant, chemistry.standard(lot["substance"]), run))
        except InvalidInput as exc:
            errors.extend(exc.errors)
        except StockroomError as exc:
            errors.append(FieldError("standard_lot_id", exc.message))
    else:
        try:
            ref_batch = records.batch_by_code(db, str(run.reference_batch))
            if ref_batch["id"] == batch["id"]:
                raise InvalidInput([FieldError("reference_batch", "a batch cannot be its own reference")])
            chemistry.stoichiometric_factor(titrant, chemistry.titrant(ref_batch["reagent"]))
            partner = Partner(reference=ref_batch, release=reference_in_force(db, ref_batch, on))
        except InvalidInput as exc:
            errors.extend(exc.errors)
        except StockroomError as exc:
            errors.append(FieldError("reference_batch", exc.message))
    if run.purpose == "recheck" and release_in_force(readmodel.batch_facts(db, batch["id"]), on) is None:
        errors.append(FieldError("purpose", "a re-check needs a certified value in force that day; record a standardization"))
    chosen: dict[str, inst_mod.Instrument] = {}
    for role, iid in run.instruments.items():
        name = f"{role}_id"
        try:
            inst = inst_mod.instrument_by_id(db, iid)
        except StockroomError:
            errors.append(FieldError(name, "no such instrument: choose one from the list"))
            continue
        if inst.kind != role:
            errors.append(FieldError(name, f"{inst.code} is a {inst.kind}, not a {role}"))
        elif role == "burette" and inst.capacity != run.burette_capacity_ml:
            errors.append(
                FieldError(
                    name,
                    f"{inst.code} is a {inst.capacity:g} mL burette but the run says {run.burette_capacity_ml:g} mL: "
                    "choose the matching size",
                )
            )
        else:
            chosen[role] = inst
    if errors:
        raise InvalidInput(errors)
    return partner, chosen


def _compute_resolved(
    db: sqlite_utils.Database,
    config: Mapping[str, Any],
    batch: Mapping[str, Any],
    run: RunInput,
    partner: Partner,
    chosen: Mapping[str, inst_mod.Instrument],
) -> StandardizationResult:
    on = run.performed_on
    policy = records.policy_for(db, batch["reagent"], on)
    reps = [r.stored() for r in run.replicates]
    figures = run_figures(config, chosen, on)
    excluded = dict(run.exclusions)
    overrides = dict(run.overrides)
    if partner.lot is not None:
        return compute_primary(config, batch, partner.lot, reps, excluded, policy, run.burette_capacity_ml, figures, overrides)
    assert partner.reference is not None and partner.release is not None
    rel = partner.release
    return compute_secondary(
        config, batch, partner.reference, rel.molarity, rel.u, reps, excluded, policy, run.burette_capacity_ml, figures, overrides
    )


def compute_run(
    db: sqlite_utils.Database, config: Mapping[str, Any], batch: Mapping[str, Any], run: RunInput
) -> StandardizationResult:
    """Check a run as record_run does and compute it, storing nothing (the form's "Compute")."""
    partner, chosen = _resolve(db, batch, run)
    return _compute_resolved(db, config, batch, run, partner, chosen)


def record_run(
    db: sqlite_utils.Database, config: Mapping[str, Any], batch: Mapping[str, Any], run: RunInput, actor: str
) -> tuple[int, StandardizationResult]:
    """Check, compute and store a run (and the instruments it names) in one write; return its id and result.

    Every door (form, CSV import, JSON API, demo loader) records through here, so the same run is
    refused or stored the same way whichever door it came by. The named instruments' figures enter
    the budget; a certifying run with an instrument out of calibration is stored but cannot release.
    """
    partner, chosen = _resolve(db, batch, run)
    result = _compute_resolved(db, config, batch, run, partner, chosen)
    row = run.meta()
    row.update({"batch_id": batch["id"], "method": run.method})
    if partner.lot is not None:
        row["standard_lot_id"] = partner.lot["id"]
    else:
        assert partner.reference is not None
        row.update({"reference_batch_id": partner.reference["id"], "reference_release_id": partner.release.id})
    reps = [r.stored() for r in run.replicates]
    return _record(db, row, reps, result, actor, dict(run.exclusions), chosen, run.performed_on), result


def reference_in_force(db: sqlite_utils.Database, reference_batch: Mapping[str, Any], on: dt.date) -> Any:
    """The reference batch's release in force on `on`; InvalidInput naming reference_batch when it has none."""
    release = release_in_force(readmodel.batch_facts(db, reference_batch["id"]), on)
    if release is None:
        raise InvalidInput(
            [
                FieldError(
                    "reference_batch",
                    f"batch {reference_batch['code']} has no certified "
                    f"value in force on {on.isoformat()}; it cannot serve as a reference",
                )
            ]
        )
    return release


def recompute(
    db: sqlite_utils.Database, config: Mapping[str, Any], run: Mapping[str, Any], excluded: Mapping[int, str]
) -> StandardizationResult:
    """Compute a stored run again with a given set of exclusions (1-based positions)."""
    batch = records.batch_by_id(db, run["batch_id"])
    performed_on = dt.date.fromisoformat(run["performed_on"])
    policy = records.policy_for(db, batch["reagent"], performed_on)
    figures = run_figures(config, inst_mod.instruments_of_run(db, run["id"]), performed_on)
    # The overrides the run was recorded with hold for every recomputation of it.
    overrides = stored_overrides(run)
    if run["method"] == "primary":
        lot = records.lot_by_id(db, run["standard_lot_id"])
        return compute_primary(
            config, batch, lot, run["replicates"], excluded, policy, run["burette_capacity_ml"], figures, overrides
        )
    ref_batch = records.batch_by_id(db, run["reference_batch_id"])
    ref = next(r for r in readmodel.batch_facts(db, ref_batch["id"]).releases if r.id == run["reference_release_id"])
    return compute_secondary(
        config,
        batch,
        ref_batch,
        ref.molarity,
        ref.u,
        run["replicates"],
        excluded,
        policy,
        run["burette_capacity_ml"],
        figures,
        overrides,
    )


def exclude(
    db: sqlite_utils.Database, config: Mapping[str, Any], run_id: int, position: int, reason: str, actor: str
) -> StandardizationResult:
    """Leave one replicate of an undecided run out, with a reason; store the recomputed result.

    The exclusions are read and the result recomputed inside the write lock, so two people leaving
    out different replicates at once both count: the second computes from the first's exclusion.
    """
    with dbmod.write(db):
        run = records.run_by_id(db, run_id)
        excluded = {e["position"]: e["reason"] for e in run["exclusions"]}
        if position in excluded:
            raise Conflict(f"replicate {position} is already excluded")
        excluded[position] = reason
        result = recompute(db, config, run, excluded)
        body = _stored_result(
            result,
            inst_mod.instruments_of_run(db, run_id),
            dt.date.fromisoformat(run["performed_on"]),
            run["purpose"],
            overridden_by=run["recorded_by"],  # the overrides were given when the run was recorded
        )
        records.exclude_replicate(db, run_id, position, reason, body, actor)
    return result


def check_version(db: sqlite_utils.Database, run: Mapping[str, Any], shown_version: int | None) -> None:
    """Refuse (Conflict) a decision taken on a result that is no longer the run's current one.

    shown_version: the id of the result the deciding page (or API client) saw; None skips the check.
    """
    current = run["current"]
    if shown_version is None or current is None or int(current["id"]) == shown_version:
        return
    newer = dbmod.query(
        db,
        "SELECT cause, recorded_by, recorded_at FROM run_results WHERE run_id = ? AND id > ? ORDER BY id",
        [run["id"], shown_version],
    )
    by_position = {f"exclusion of replicate {e['position']}": e for e in run["exclusions"]}
    changes = []
    for r in newer:
        e = by_position.get(r["cause"])
        if e is not None:
            changes.append(f"Replicate {e['position']} was left out by {e['recorded_by']} at {e['recorded_at']}")
        else:
            changes.append(f"{r['cause']} by {r['recorded_by']} at {r['recorded_at']}")
    what = "; ".join(changes) or "the result you saw is not one of this run's results"
    raise Conflict(f"the result changed since you opened the page: {what}; review the new result")


def accept(
    db: sqlite_utils.Database,
    run_id: int,
    actor: str,
    released_on: dt.date | None = None,
    reason: str = "",
    shown_version: int | None = None,
) -> int | None:
    """Accept a run. A certifying run releases the batch with its current result; return the release id.

    shown_version: the id of the result the person saw (the run page's form carries it); when given
    and no longer current, Conflict and nothing written. Everything is read inside the write lock,
    so the release carries the result computed from every exclusion stored before it.
    """
    with dbmod.write(db):
        return _accept_locked(db, run_id, actor, released_on, reason, shown_version)


def _accept_locked(
    db: sqlite_utils.Database,
    run_id: int,
    actor: str,
    released_on: dt.date | None,
    reason: str,
    shown_version: int | None,
) -> int | None:
    run = records.run_by_id(db, run_id)
    if run["decisions"]:
        raise Conflict("this run has already been decided")
    check_version(db, run, shown_version)
    current = run["current"]
    if not current["accepted_by_rule"]:
        why = "; ".join(current["result"].get("reasons", [])) or "it does not meet the acceptance rule"
        raise Conflict(f"this run cannot be accepted: {why}. Exclude a replicate with a reason, or reject the run")
    if run["purpose"] == "certify":
        used_on = dt.date.fromisoformat(run["performed_on"])
        problems = [
            p
            for inst in inst_mod.instruments_of_run(db, run_id).values()
            if (p := inst_mod.problem_for_release(inst, used_on)) is not None
        ]
        if problems:
            raise Conflict(
                "this run cannot release the batch: " + "; ".join(problems) + ". Recalibrate the "
                "instrument and repeat the standardization; a re-check may still be recorded with it"
            )
    if run["purpose"] != "certify":
        return records.decide_run(db, run_id, "accept", reason, actor)
    batch = records.batch_by_id(db, run["batch_id"])
    check_not_withdrawn(db, batch)  # nor registered in error since the run was recorded
    released_on = released_on or dt.date.fromisoformat(run["performed_on"])
    in_force = release_in_force(readmodel.batch_facts(db, batch["id"]), released_on)
    if in_force is not None and not reason.strip():
        # Replacing a value labels and lab days already use is a correction of the record: it says why.
        raise InvalidInput(
            [
                FieldError(
                    "reason",
                    f"is required: this release replaces the certified value in force since {in_force.released_on.isoformat()}; "
                    "say why the new value supersedes it",
                )
            ]
        )
    policy = records.policy_for(db, batch["reagent"], released_on)
    prepared_on = dt.date.fromisoformat(batch["prepared_on"])
    expires_on = expiry_for(released_on, policy, prepared_on=prepared_on)
    if expires_on < released_on:
        raise Conflict(f"this batch passed its shelf life on {expires_on.isoformat()}; it cannot be released")
    release = {
        "molarity": current["molarity"],
        "u": current["u"],
        "U": current["expanded_u"],
        "k": current["k"],
        "reference_temperature_c": standardization.REFERENCE_TEMPERATURE_C,
        "released_on": released_on.isoformat(),
        "expires_on": expires_on.isoformat(),
        "recheck_interval_days": policy.recheck_interval_days,
        "tolerance_rel": policy.tolerance_rel,
    }
    return records.decide_run(db, run_id, "accept", reason, actor, release=release)


def reject(db: sqlite_utils.Database, run_id: int, reason: str, actor: str) -> None:
    """Reject a run with the reason; nothing is released."""
    records.decide_run(db, run_id, "reject", reason, actor)
