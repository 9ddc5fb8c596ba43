"""The instrument register: balances, burettes and pipettes, their calibrations, and the runs that used them.

Reads and appends of the records (every write one atomic, attributed entry plus its audit event, through
db.write and records.append_event), and the plain rules about an instrument on a date:

* the calibration in force on a day is the newest one made on or before it;
* an instrument is fit to certify a value on a day when that calibration passed and its next due date
  is not before the day; otherwise a release resting on it is refused, and a re-check goes ahead with a
  warning (common practice: a re-check confirms a value, it does not certify one);
* its figures feed the uncertainty budget in place of the settings' defaults: a balance's readability
  and linearity, a burette's tolerance and capacity, a pipette's tolerance (standardization.Instruments).
  A calibration may state a new tolerance or linearity, which then holds from that calibration on.

Units: g for balances (capacity, readability, linearity), mL for glassware (capacity, tolerance, scale
division); dates are calendar dates in the lab's time zone.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections import defaultdict
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from stockroom import db as dbmod
from stockroom import glassware, records, standardization
from stockroom.errors import Conflict, FieldError, InvalidInput, NotFound

KINDS = ("balance", "burette", "pipette")
KIND_LABELS = {"balance": "balance", "burette": "burette", "pipette": "pipette"}
# The instruments each kind of run names: a primary run weighs and titrates, a secondary run pipettes
# an aliquot and titrates.
ROLES_FOR_METHOD = {"primary": ("balance", "burette"), "secondary": ("burette", "pipette")}
DUE_SOON_DAYS = 30  # a month's notice to book the next calibration (common practice)


def class_tolerance(kind: str, accuracy_class: str, capacity: float) -> float | None:
    """The tolerance (± mL) of Class A or B glassware of a listed capacity (mL), or None when not listed.

    The figures are glassware.py's (ISO 385 burettes, ISO 648 one-mark pipettes); an unknown kind or
    class gives None, as an unlisted capacity does.
    """
    if kind not in glassware.KINDS or accuracy_class.strip().upper() not in glassware.CLASSES:
        return None
    listed = glassware.lookup(kind, float(capacity), accuracy_class)
    return None if listed is None else listed.mpe_ml


# ---------------------------------------------------------------------------------------------------------
# The register as values


@dataclass(frozen=True)
class Calibration:
    """One calibration of an instrument: dates, outcome ("pass" or "fail"), certificate reference.

    tolerance (± mL or g) and linearity_g (± g): figures the certificate states, which hold from this
    calibration on; None keeps the register's.
    """

    id: int
    instrument_id: int
    calibrated_on: dt.date
    next_due_on: dt.date
    outcome: str
    certificate_ref: str
    calibrated_by: str = ""
    tolerance: float | None = None
    linearity_g: float | None = None
    notes: str = ""
    recorded_at: str = ""
    recorded_by: str = ""

    @classmethod
    def from_row(cls, r: Mapping[str, Any]) -> Calibration:
        return cls(
            id=int(r["id"]),
            instrument_id=int(r["instrument_id"]),
            calibrated_on=dt.date.fromisoformat(r["calibrated_on"]),
            next_due_on=dt.date.fromisoformat(r["next_due_on"]),
            outcome=r["outcome"],
            certificate_ref=r["certificate_ref"],
            calibrated_by=r["calibrated_by"] or "",
            tolerance=r["tolerance"],
            linearity_g=r["linearity_g"],
            notes=r["notes"] or "",
            recorded_at=r["recorded_at"],
            recorded_by=r["recorded_by"],
        )


@dataclass(frozen=True)
class Instrument:
    """A registered instrument with its calibration history (oldest first).

    capacity: g (balance) or mL; tolerance: ± mL (glassware) or ± g (a balance's, shown only);
    readability: g (a balance's last digit d) or mL (the scale division); linearity_g: ± g (balances).
    """

    id: int
    code: str
    kind: str
    capacity: float
    accuracy_class: str = ""
    tolerance: float | None = None
    readability: float | None = None
    linearity_g: float | None = None
    description: str = ""
    notes: str = ""
    recorded_at: str = ""
    recorded_by: str = ""
    calibrations: tuple[Calibration, ...] = ()

    @classmethod
    def from_row(cls, r: Mapping[str, Any], calibrations: Iterable[Calibration] = ()) -> Instrument:
        return cls(
            id=int(r["id"]),
            code=r["code"],
            kind=r["kind"],
            capacity=float(r["capacity"]),
            accuracy_class=r["accuracy_class"] or "",
            tolerance=r["tolerance"],
            readability=r["readability"],
            linearity_g=r["linearity_g"],
            description=r["description"] or "",
            notes=r["notes"] or "",
            recorded_at=r["recorded_at"],
            recorded_by=r["recorded_by"],
            calibrations=tuple(sorted(calibrations, key=lambda c: (c.calibrated_on, c.id))),
        )

    @property
    def unit(self) -> str:
        """The unit of its capacity and figures: g for a balance, mL for glassware."""
        return "g" if self.kind == "balance" else "mL"

    @property
    def name(self) -> str:
        """ID and kind in words, e.g. "burette BUR-07"."""
        return f"{KIND_LABELS.get(self.kind, self.kind)} {self.code}"

    def calibration_on(self, on: dt.date) -> Calibration | None:
        """The calibration in force on `on`: the newest made on or before it, or None."""
        made = [c for c in self.calibrations if c.calibrated_on <= on]
        return made[-1] if made else None

    def tolerance_on(self, on: dt.date) -> float | None:
        """Tolerance (± mL or g) on `on`: the calibration's stated figure, else the register's."""
        cal = self.calibration_on(on)
        return cal.tolerance if cal is not None and cal.tolerance is not None else self.tolerance

    def linearity_on(self, on: dt.date) -> float | None:
        """Linearity (± g, balances) on `on`: the calibration's stated figure, else the register's."""
        cal = self.calibration_on(on)
        return cal.linearity_g if cal is not None and cal.linearity_g is not None else self.linearity_g

    def summary(self) -> str:
        """Size and accuracy in a few words, e.g. "50 mL, Class A ±0.05 mL" or "220 g, d 0.1 mg, linearity ±0.2 mg"."""
        if self.kind == "balance":
            parts = [f"{self.capacity:g} g"]
            if self.readability is not None:
                parts.append(f"d {self.readability * 1000:g} mg")
            if self.linearity_g is not None:
                parts.append(f"linearity ±{self.linearity_g * 1000:g} mg")
            return ", ".join(parts)
        cls = f"Class {self.accuracy_class} " if self.accuracy_class else ""
        tol = f"±{self.tolerance:g} mL" if self.tolerance is not None else "tolerance not stated"
        return f"{self.capacity:g} mL, {cls}{tol}"


@dataclass(frozen=True)
class Standing:
    """Where an instrument stands on a date.

    state: "in_calibration", "due_soon", "overdue", "failed" or "never"; label: the same in plain
    words with the dates; calibration: the one in force (or None); due_on: its next due date;
    fit_to_certify: whether a release may rest on a use that day.
    """

    state: str
    label: str
    calibration: Calibration | None
    due_on: dt.date | None
    fit_to_certify: bool


def standing(instrument: Instrument, on: dt.date) -> Standing:
    """An instrument's calibration standing on `on` (see the module docstring for the rules)."""
    cal = instrument.calibration_on(on)
    if cal is None:
        return Standing("never", f"no calibration on record by {on.isoformat()}", None, None, False)
    if cal.outcome != "pass":
        return Standing(
            "failed",
            f"failed its calibration of {cal.calibrated_on.isoformat()} (certificate {cal.certificate_ref})",
            cal,
            cal.next_due_on,
            False,
        )
    days = (cal.next_due_on - on).days
    if days < 0:
        return Standing(
            "overdue",
            f"OVERDUE: calibration was due on {cal.next_due_on.isoformat()} ({-days} day{'s' if days != -1 else ''} ago)",
            cal,
            cal.next_due_on,
            False,
        )
    if days <= DUE_SOON_DAYS:
        return Standing(
            "due_soon",
            f"due on {cal.next_due_on.isoformat()} (in {days} day{'s' if days != 1 else ''})",
            cal,
            cal.next_due_on,
            True,
        )
    return Standing("in_calibration", f"in calibration until {cal.next_due_on.isoformat()}", cal, cal.next_due_on, True)


def problem_for_release(instrument: Instrument, on: dt.date) -> str | None:
    """Why a value certified with this instrument on `on` may not be released, or None when it may."""
    s = standing(instrument, on)
    if s.fit_to_certify:
        return None
    if s.state == "overdue":
        assert s.due_on is not None
        return (
            f"{instrument.name} was past its calibration due date ({s.due_on.isoformat()}) when the run was made "
            f"on {on.isoformat()}"
        )
    if s.state == "failed":
        assert s.calibration is not None
        return f"{instrument.name} had failed its calibration of {s.calibration.calibrated_on.isoformat()}"
    return f"{instrument.name} had no calibration on record on {on.isoformat()}"


def figures(config: Mapping[str, Any], chosen: Mapping[str, Instrument], on: dt.date) -> standardization.Instruments:
    """The budget's instrument figures: the settings' defaults, replaced by those of the instruments chosen.

    config: a settings mapping; chosen: role ("balance", "burette", "pipette") -> Instrument; on: the
    run's date (picks the calibration whose stated figures hold). Returns standardization.Instruments.
    """
    base = standardization.Instruments.from_settings(config)
    changes: dict[str, Any] = {}
    balance = chosen.get("balance")
    if balance is not None:
        if balance.readability is not None:
            changes["balance_readability_g"] = balance.readability
        linearity = balance.linearity_on(on)
        if linearity is not None:
            changes["balance_linearity_g"] = linearity
    # Glassware: the register's (or its calibration's) tolerance wins; failing that, the table's figure
    # for its size in its own class, else in the settings' class (BURETTE_CLASS, PIPETTE_CLASS).
    burette = chosen.get("burette")
    if burette is not None:
        changes["burette_capacity_ml"] = burette.capacity
        if burette.accuracy_class.strip().upper() in glassware.CLASSES:
            changes["burette_class"] = burette.accuracy_class.strip().upper()
        tol = burette.tolerance_on(on)
        if tol is None:
            tol = class_tolerance("burette", changes.get("burette_class", base.burette_class), burette.capacity)
        if tol is not None:
            changes["burette_tolerance_ml"] = tol
    pipette = chosen.get("pipette")
    if pipette is not None:
        changes["pipette_capacity_ml"] = pipette.capacity
        if pipette.accuracy_class.strip().upper() in glassware.CLASSES:
            changes["pipette_class"] = pipette.accuracy_class.strip().upper()
        tol = pipette.tolerance_on(on)
        if tol is None:
            tol = class_tolerance("pipette", changes.get("pipette_class", base.pipette_class), pipette.capacity)
        if tol is not None:
            changes["pipette_tolerance_ml"] = tol
    return dataclasses.replace(base, **changes) if changes else base


def warnings_for(chosen: Mapping[str, Instrument], on: dt.date, purpose: str) -> list[str]:
    """Warnings to store with a run about the instruments it used (a certifying run: why it cannot be released)."""
    out = []
    for role in KINDS:
        inst = chosen.get(role)
        if inst is None:
            continue
        problem = problem_for_release(inst, on)
        if problem is None:
            continue
        if purpose == "certify":
            out.append(f"{problem}: this run cannot release the batch; recalibrate and repeat it")
        else:
            out.append(f"{problem}; the re-check is recorded, but confirm the instrument before relying on it")
    return out


# ---------------------------------------------------------------------------------------------------------
# Reads


def _calibrations(db: sqlite_utils.Database, instrument_ids: list[int] | None) -> dict[int, list[Calibration]]:
    sql, params = "SELECT * FROM calibrations", []
    if instrument_ids is not None:
        if not instrument_ids:
            return {}
        sql += f" WHERE instrument_id IN ({','.join('?' * len(instrument_ids))})"
        params = instrument_ids
    out: dict[int, list[Calibration]] = defaultdict(list)
    for r in dbmod.query(db, sql + " ORDER BY calibrated_on, id", params):
        out[int(r["instrument_id"])].append(Calibration.from_row(r))
    return out


def list_instruments(db: sqlite_utils.Database, kind: str | None = None) -> list[Instrument]:
    """Every instrument (of one kind when given) with its calibrations, by kind then ID; two queries."""
    sql, params = "SELECT * FROM instruments", []
    if kind:
        sql += " WHERE kind = ?"
        params.append(kind)
    rows = dbmod.query(db, sql + " ORDER BY kind, code COLLATE NOCASE", params)
    cals = _calibrations(db, [r["id"] for r in rows] if kind else None)
    return [Instrument.from_row(r, cals.get(r["id"], ())) for r in rows]


def instruments_by_id(db: sqlite_utils.Database, ids: Iterable[int]) -> dict[int, Instrument]:
    """Instruments by record id (those that exist), with their calibrations."""
    wanted = sorted({int(i) for i in ids})
    if not wanted:
        return {}
    rows = dbmod.query(db, f"SELECT * FROM instruments WHERE id IN ({','.join('?' * len(wanted))})", wanted)
    cals = _calibrations(db, [r["id"] for r in rows])
    return {int(r["id"]): Instrument.from_row(r, cals.get(r["id"], ())) for r in rows}


def instrument_by_id(db: sqlite_utils.Database, instrument_id: int) -> Instrument:
    """One instrument with its calibrations; NotFound if none."""
    found = instruments_by_id(db, [instrument_id])
    if instrument_id not in found:
        raise NotFound(f"no instrument with id {instrument_id}")
    return found[instrument_id]


def instruments_of_runs(db: sqlite_utils.Database, run_ids: Iterable[int]) -> dict[int, dict[str, tuple[Instrument, int | None]]]:
    """For each run, role -> (instrument, calibration id in force that day or None)."""
    ids = sorted({int(i) for i in run_ids})
    if not ids:
        return {}
    rows = dbmod.query(db, f"SELECT * FROM run_instruments WHERE run_id IN ({','.join('?' * len(ids))})", ids)
    insts = instruments_by_id(db, [r["instrument_id"] for r in rows])
    out: dict[int, dict[str, tuple[Instrument, int | None]]] = defaultdict(dict)
    for r in rows:
        out[int(r["run_id"])][r["role"]] = (insts[int(r["instrument_id"])], r["calibration_id"])
    return out


def instruments_of_run(db: sqlite_utils.Database, run_id: int) -> dict[str, Instrument]:
    """The instruments a run named: role -> Instrument (empty when it named none)."""
    return {role: inst for role, (inst, _) in instruments_of_runs(db, [run_id]).get(run_id, {}).items()}


def runs_using(db: sqlite_utils.Database, instrument_id: int, limit: int = 200) -> list[dict[str, Any]]:
    """The runs that used an instrument, newest first: run id, date, purpose, role, batch code, release id."""
    return dbmod.query(
        db,
        "SELECT ri.run_id, ri.role, ri.calibration_id, r.performed_on, r.purpose, b.code AS batch_code, "
        "(SELECT d.decision FROM decisions d WHERE d.run_id = r.id ORDER BY d.id DESC LIMIT 1) "
        "AS decision, (SELECT rl.id FROM releases rl WHERE rl.run_id = r.id) AS release_id "
        "FROM run_instruments ri JOIN runs r ON r.id = ri.run_id JOIN batches b ON b.id = r.batch_id "
        "WHERE ri.instrument_id = ? ORDER BY r.performed_on DESC, r.id DESC LIMIT ?",
        [instrument_id, limit],
    )


# ---------------------------------------------------------------------------------------------------------
# Appends

INSTRUMENT_FIELDS = (
    "code",
    "kind",
    "description",
    "capacity",
    "accuracy_class",
    "tolerance",
    "readability",
    "linearity_g",
    "notes",
)
CALIBRATION_FIELDS = (
    "calibrated_on",
    "next_due_on",
    "outcome",
    "certificate_ref",
    "calibrated_by",
    "tolerance",
    "linearity_g",
    "notes",
)


def register(
    db: sqlite_utils.Database, values: Mapping[str, Any], actor: str, calibration: Mapping[str, Any] | None = None
) -> Instrument:
    """Register an instrument (values already checked), with its calibration on record if given; one write.

    values: INSTRUMENT_FIELDS (units as in the module docstring); calibration: CALIBRATION_FIELDS with
    ISO dates. Raises InvalidInput("code") when the ID is taken (IDs compare without regard to case).
    """
    with dbmod.write(db):
        taken = db.execute("SELECT 1 FROM instruments WHERE code = ? COLLATE NOCASE", [values["code"]]).fetchone()
        if taken:
            raise InvalidInput([FieldError("code", f"{values['code']} is already registered; give the instrument's own ID")])
        row = {k: values.get(k) for k in INSTRUMENT_FIELDS}
        for k in ("description", "accuracy_class", "notes"):
            row[k] = row[k] or ""
        row["recorded_at"] = dbmod.utc_now()
        row["recorded_by"] = actor
        iid = records.record_row(
            db,
            "instruments",
            row,
            actor=actor,
            action_code="instrument.register",
            detail={
                "code": row["code"],
                "kind": row["kind"],
                "capacity": row["capacity"],
                "tolerance": row["tolerance"],
                "readability": row["readability"],
                "linearity_g": row["linearity_g"],
            },
        )
        if calibration is not None:
            record_calibration(db, iid, calibration, actor)
    return instrument_by_id(db, iid)


def record_calibration(db: sqlite_utils.Database, instrument_id: int, values: Mapping[str, Any], actor: str) -> int:
    """Append a calibration (values already checked; ISO dates) to an instrument's history; return its id."""
    with dbmod.write(db):
        inst = instrument_by_id(db, instrument_id)
        row = {k: values.get(k) for k in CALIBRATION_FIELDS}
        for k in ("calibrated_by", "notes"):
            row[k] = row[k] or ""
        if inst.kind != "balance":
            row["linearity_g"] = None
        if any(
            c.calibrated_on.isoformat() == row["calibrated_on"] and c.certificate_ref == row["certificate_ref"]
            for c in inst.calibrations
        ):
            raise Conflict(f"{inst.name} already has the calibration {row['certificate_ref']} of {row['calibrated_on']}")
        row["instrument_id"] = instrument_id
        row["recorded_at"] = dbmod.utc_now()
        row["recorded_by"] = actor
        cid = records.record_row(
            db,
            "calibrations",
            row,
            actor=actor,
            action_code="instrument.calibrate",
            detail={
                "instrument": inst.code,
                "calibrated_on": row["calibrated_on"],
                "next_due_on": row["next_due_on"],
                "outcome": row["outcome"],
                "certificate_ref": row["certificate_ref"],
            },
        )
    return cid


def link_run(
    db: sqlite_utils.Database, run_id: int, batch_id: int, chosen: Mapping[str, Instrument], on: dt.date, actor: str
) -> None:
    """Store which instruments a run used (role -> Instrument), with the calibration in force on `on`."""
    if not chosen:
        return
    with dbmod.write(db):
        detail = {}
        for role in KINDS:
            inst = chosen.get(role)
            if inst is None:
                continue
            if inst.kind != role:
                raise InvalidInput([FieldError(f"{role}_id", f"{inst.code} is a {inst.kind}, not a {role}")])
            cal = inst.calibration_on(on)
            dbmod.insert_row(
                db,
                "run_instruments",
                {"run_id": run_id, "instrument_id": inst.id, "role": role, "calibration_id": cal.id if cal else None},
            )
            detail[role] = inst.code
        records.append_event(db, actor, "run.instruments", entity="runs", entity_id=run_id, batch_id=batch_id, detail=detail)
