"""The lab-day look-up and the class-data correction.

Pure composition: batch facts and a date in, the batches in force that day with the molarity to use,
and a class's titration results recomputed with it, out. No web or database import.

"In force" on a day D is policy.release_in_force: the newest release made on or before D, unless the
batch had expired or been withdrawn by D. The certified value is at 20 °C; at the bench temperature
T it is c(T) = c(20 °C)·ρ(T)/ρ(20 °C) by the titrant's density model (corrections.molarity_at; with an
explicit α, the linear c(20 °C)·[1 − α(T − 20 °C)] of EURACHEM/CITAC QUAM:2012), the value to use with
burette readings taken at T.

A batch in force on D is **on hold** when, as known today, it was beyond tolerance that day (policy:
a re-check outside the band or a trend already outside it), is under a recall's review, or a re-check
of the same release made after D, or the trend through the fuller record, puts D beyond tolerance.
A batch on hold has no value to use (LabDayEntry.use_molarity is None); its certified value, latest
re-check and prediction are shown for reference only.

A past day's answer is the record as it stood that day (status, flags and the trend through the
standardizations made up to D) and, beside it, what was learnt later, each with its date: a
withdrawal and its reason, recalls opened or cleared, re-checks beyond tolerance, the fuller trend.
Both come from one pure function, standing(batch, D, cut-off): "as known on D" is the cut-off D,
"as known today" the cut-off today (policy.known_by drops what is dated after the cut-off). For a
future day the trend is extrapolated from the standardizations made up to today.

Class-data sheet (CSV, UTF-8, header row, columns in any order, `#` lines ignored, decimal point):

    group,aliquot_ml,titrant_ml,ratio,analyte_per_titrant,reported_molarity,notes

group: the bench or student group (text). aliquot_ml: volume of the analyte solution titrated, mL.
titrant_ml: titrant delivered to the end point, mL. The stoichiometry as either `ratio`, written
titrant:analyte in moles (NaOH titrating H2SO4 is 2:1), or `analyte_per_titrant`, moles of analyte per
mole of titrant (0.5 for the same case) — one of the two per row. reported_molarity (optional): the
analyte concentration the group reported, mol/L. notes (optional): text. Each result is

    c_analyte = c_titrant · V_titrant · (analyte per titrant) / V_aliquot      (mol/L; volumes in mL)

once with the titrant's nominal strength (the bottle's label) and once with the molarity in force
that day; the relative error is (nominal result − corrected result) / corrected result.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from enum import StrEnum

from stockroom import chemistry, corrections, drift
from stockroom.csvsafe import SafeCsv
from stockroom.drift import Flag
from stockroom.errors import FieldError, InvalidInput
from stockroom.policy import (
    BatchFacts,
    ReleaseFact,
    Status,
    StatusReport,
    known_by,
    release_in_force,
    release_points,
    status_on,
)

BENCH_MIN_C = 5.0
BENCH_MAX_C = 40.0
REFERENCE_TEMPERATURE_C = corrections.REFERENCE_TEMPERATURE_C


# ---------------------------------------------------------------------------------------------------------
# The look-up


@dataclass(frozen=True)
class BatchRecord:
    """One batch as the look-up needs it: its readable ID, titrant key, nominal molarity (mol/L), facts.

    withdrawal_reason: the words recorded with its withdrawal (BatchFacts carries only the date), or None.
    """

    code: str
    reagent: str
    nominal_molarity: float
    facts: BatchFacts
    id: int = 0
    withdrawal_reason: str | None = None


class Later(StrEnum):
    """What the record learnt about a lab day after it."""

    WITHDRAWN = "withdrawn"
    RECHECK_OUTSIDE = "recheck_outside"
    TREND_OUTSIDE = "trend_outside"
    UNDER_REVIEW = "under_review"
    REVIEW_CLEARED = "review_cleared"


# What, learnt after the day, puts the day's value on hold: a measurement of the same release beyond
# tolerance, or the trend through the fuller record. A withdrawal alone does not (a bottle used up or
# broken says nothing about its strength); it is shown with its reason for the reader to judge.
_HOLDING = (Later.RECHECK_OUTSIDE, Later.TREND_OUTSIDE)


@dataclass(frozen=True)
class Learnt:
    """One thing recorded after the lab day that concerns it: its date, its kind, and it in words with the date."""

    on: dt.date
    kind: Later
    what: str


@dataclass(frozen=True)
class Standing:
    """A batch on lab day `on` as the record stood on `known_on` (the knowledge cut-off).

    release: the release in force on `on`; status: policy.status_on of the facts known by `known_on`;
    later: what was recorded after `on` up to `known_on` (always empty when known_on <= on);
    holds: why no value of it is to be used, in words (empty: none); latest_recheck: the newest re-check
    of the release known by `known_on` (mol/L), or None. "As known on D" is standing(b, D, D) and "as
    known today" standing(b, D, today): one function, two cut-offs.
    """

    on: dt.date
    known_on: dt.date
    release: ReleaseFact
    status: StatusReport
    later: tuple[Learnt, ...]
    holds: tuple[str, ...]
    latest_recheck: drift.Point | None

    @property
    def hold(self) -> str | None:
        """The reasons for the hold as one sentence, or None when the batch is not on hold."""
        if not self.holds:
            return None
        return _capitalized("; ".join(self.holds))


def _tolerance(release: ReleaseFact) -> str:
    return f"tolerance ±{release.tolerance_rel * 100:.2f} %"


def standing(batch: BatchRecord, on: dt.date, known_on: dt.date) -> Standing | None:
    """The standing of one batch on lab day `on` as known on `known_on`, or None if nothing was in force.

    Pure: the batch's facts and two dates in. Facts dated after `known_on` are unseen (policy.known_by);
    the status is that of the day itself; what is dated after `on` (up to `known_on`) is reported as
    learnt later, each item with its date.
    """
    facts = known_by(batch.facts, known_on)
    release = release_in_force(facts, on)
    if release is None:
        return None
    status = status_on(facts, on)
    band = drift.Band(release.molarity, release.tolerance_rel)
    tol = _tolerance(release)
    points = release_points(facts, release, known_on)
    checks = [p for p in points if p.kind == "recheck"]
    later: list[Learnt] = []
    if on < known_on:
        if facts.withdrawn_on is not None and on < facts.withdrawn_on:
            why = f": {batch.withdrawal_reason.strip()}" if batch.withdrawal_reason else ""
            later.append(Learnt(facts.withdrawn_on, Later.WITHDRAWN, f"withdrawn on {facts.withdrawn_on.isoformat()}{why}"))
        for c in checks:
            if c.on > on and not band.contains(c.molarity):
                later.append(
                    Learnt(
                        c.on,
                        Later.RECHECK_OUTSIDE,
                        f"a re-check on {c.on.isoformat()} found {c.molarity:.5f} mol/L, "
                        f"{band.deviation(c.molarity) * 100:+.2f} % from the certified value ({tol})",
                    )
                )
        for rv in facts.reviews:
            if rv.release_id != release.id:
                continue
            if on < rv.opened_on:
                later.append(
                    Learnt(
                        rv.opened_on,
                        Later.UNDER_REVIEW,
                        f"put under recall review on {rv.opened_on.isoformat()}: its certified value rests on "
                        f"{rv.subject}, suspect from {rv.suspect_from.isoformat()} (recall {rv.recall_id})",
                    )
                )
            if rv.cleared_on is not None and on < rv.cleared_on:
                later.append(
                    Learnt(rv.cleared_on, Later.REVIEW_CLEARED, f"recall {rv.recall_id} cleared on {rv.cleared_on.isoformat()}")
                )
        fit, _ = drift.fit_line(points, release.released_on)
        if fit is not None and fit.significant and fit.last_on > on and status.status is not Status.DRIFTING:
            p = drift.predict(fit, on)
            if not band.contains(p.molarity):
                later.append(
                    Learnt(
                        fit.last_on,
                        Later.TREND_OUTSIDE,
                        f"the trend through the {fit.n} standardizations up to {fit.last_on.isoformat()} puts "
                        f"{on.isoformat()} at {p.molarity:.5f} mol/L ({band.deviation(p.molarity) * 100:+.2f} %, {tol}): "
                        "probably outside tolerance that day",
                    )
                )
    later.sort(key=lambda item: item.on)
    holds: list[str] = []
    if status.status is Status.DRIFTING:
        holds += [f"beyond tolerance: {r}" for r in status.reasons]
    holds += [
        f"under recall review since {rv.opened_on.isoformat()}: its certified value rests on {rv.subject}, "
        f"suspect from {rv.suspect_from.isoformat()} (recall {rv.recall_id})"
        for rv in facts.reviews
        if rv.release_id == release.id and rv.open_on(known_on)
    ]
    holds += [item.what for item in later if item.kind in _HOLDING]
    return Standing(
        on=on,
        known_on=known_on,
        release=release,
        status=status,
        later=tuple(later),
        holds=tuple(holds),
        latest_recheck=checks[-1] if checks else None,
    )


@dataclass(frozen=True)
class LabDayEntry:
    """A batch in force on the day, with the molarity to use (or why none) and what to know about it.

    Molarities in mol/L (certified ones at 20 °C); bench_temperature_c in °C; dates as dates.
    known_on: the date the record is read on (today). that_day: the record as it stood on the day
    (standing with the cut-off min(on, known_on)); current: as known on known_on, with what was learnt
    later and the hold. status and flags are the day's own. fit/prediction use the standardizations
    made up to trend_through = min(on, known_on): the trend as it stood that day.
    """

    batch: BatchRecord
    on: dt.date
    known_on: dt.date
    that_day: Standing
    current: Standing
    fit: drift.Fit | None
    fit_note: str | None
    prediction: drift.Prediction | None
    bench_temperature_c: float | None
    molarity_at_bench: float | None
    predicted_at_bench: float | None

    @property
    def release(self) -> ReleaseFact:
        """The release in force that day."""
        return self.that_day.release

    @property
    def status(self) -> StatusReport:
        """The batch's status as it stood that day."""
        return self.that_day.status

    @property
    def flags(self) -> tuple[Flag, ...]:
        """The day's flags (drift and recall review), as they stood that day."""
        return self.that_day.status.flags

    @property
    def trend_through(self) -> dt.date:
        """The last date whose standardizations the trend uses: the day, or today for a future day."""
        return min(self.on, self.known_on)

    @property
    def hold(self) -> str | None:
        """Why no value of this batch is to be used for the day, as known today, or None."""
        return self.current.hold

    @property
    def learnt_later(self) -> tuple[Learnt, ...]:
        """What was recorded after the day, up to known_on, that concerns it (oldest first)."""
        return self.current.later

    @property
    def latest_recheck(self) -> drift.Point | None:
        """The newest re-check of the release known today (mol/L), for reference."""
        return self.current.latest_recheck

    @property
    def use_molarity(self) -> float | None:
        """The molarity to use, mol/L: at the bench temperature when one was given, else the certified
        value at 20 °C; None when the batch is on hold."""
        if self.hold is not None:
            return None
        return self.molarity_at_bench if self.molarity_at_bench is not None else self.release.molarity

    @property
    def use_temperature_c(self) -> float:
        """The temperature use_molarity applies at, °C."""
        if self.molarity_at_bench is not None and self.bench_temperature_c is not None:
            return self.bench_temperature_c
        return REFERENCE_TEMPERATURE_C

    @property
    def U(self) -> float:
        """Expanded uncertainty of the certified value, mol/L (k as released)."""
        return self.release.U

    @property
    def decimals(self) -> int:
        """Decimals to show this batch's molarities with: U to two significant figures, as on every page."""
        U = self.release.U
        return max(0, 1 - math.floor(math.log10(U))) if U > 0 and math.isfinite(U) else 5

    @property
    def plain(self) -> tuple[str, ...]:
        """Every flag of the day as a sentence for a person; empty when nothing needs saying."""
        return tuple(_sentence(f) for f in self.flags)

    @property
    def later_plain(self) -> tuple[str, ...]:
        """What was learnt later, each as a sentence with its date."""
        return tuple(_capitalized(item.what) for item in self.learnt_later)

    @property
    def advice(self) -> str | None:
        """What the answer means for whoever uses the titrant that day, or None when nothing needs saying."""
        if self.hold is not None:
            return "On hold: no value of this batch is to be used for this day. Ask the prep room for another batch."
        if any(item.kind is Later.WITHDRAWN for item in self.learnt_later):
            return (
                "Withdrawn after this day: ask the prep room whether its value still held on "
                f"{self.on.isoformat()} before correcting results with it."
            )
        return ADVICE.get(self.status.status)


ADVICE = {
    Status.RECHECK_DUE: "The certified value stands until the prep room re-checks it.",
}


@dataclass(frozen=True)
class LabDay:
    """The answer for one day: entries in force (may be empty), and when empty the reason in plain words.

    reason is the whole answer as one text; headline and detail are its two parts (for a page or sheet).
    known_on: the date the record was read on; future: the day is after it; past: before it.
    """

    on: dt.date
    titrant: str | None
    bench_temperature_c: float | None
    entries: tuple[LabDayEntry, ...]
    headline: str | None = None
    detail: str | None = None
    future: bool = False
    known_on: dt.date | None = None

    @property
    def past(self) -> bool:
        """Whether the day is before the date the record was read on."""
        return self.known_on is not None and self.on < self.known_on

    @property
    def reason(self) -> str | None:
        """Why nothing was in force, in plain words; None when something was."""
        if self.headline is None:
            return None
        return self.headline + (f" {self.detail}" if self.detail else "")


def _capitalized(text: str) -> str:
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")


def _sentence(flag: Flag) -> str:
    return _capitalized(flag.message)


def check_bench_temperature(value: float | None) -> float | None:
    """The bench temperature if within 5–40 °C (the range the linear expansion model is used in), °C."""
    if value is None:
        return None
    if not (isinstance(value, int | float) and math.isfinite(value) and BENCH_MIN_C <= value <= BENCH_MAX_C):
        raise InvalidInput([FieldError("bench_temperature_c", f"must be between {BENCH_MIN_C:g} and {BENCH_MAX_C:g} °C")])
    return float(value)


def _at_bench(batch: BatchRecord, c20: float, bench_c: float, alpha_per_k: float | None) -> float:
    """A 20 °C molarity moved to the bench temperature, mol/L: by α when given, else by the titrant's model."""
    if alpha_per_k is not None:
        return corrections.molarity_at_temperature(c20, REFERENCE_TEMPERATURE_C, bench_c, alpha_per_k)
    try:
        model = chemistry.titrant(batch.reagent).expansion
    except chemistry.UnknownSubstance:
        model = corrections.WATER_LIKE
    return corrections.molarity_at(model, c20, bench_c)


def entry_for(
    batch: BatchRecord,
    on: dt.date,
    known_on: dt.date,
    bench_temperature_c: float | None = None,
    alpha_per_k: float | None = None,
) -> LabDayEntry | None:
    """The lab-day entry of one batch, or None when no release of it was in force on `on`.

    on: the lab day; known_on: the date the record is read on (today); what is dated after `on` up to
    it is reported as learnt later and can put the batch on hold; the trend uses the standardizations
    made up to min(on, known_on). bench_temperature_c in °C or None; alpha_per_k in 1/K for the linear
    model, or None (the default) for the titrant's own density model from the catalogue
    (chemistry.Titrant.expansion: water's density for dilute titrants, the solution's above 0.2 mol/L).
    """
    through = min(on, known_on)
    that_day = standing(batch, on, through)
    current = standing(batch, on, known_on)
    if that_day is None or current is None:
        return None
    bench = check_bench_temperature(bench_temperature_c)
    release = that_day.release
    fit, note = drift.fit_line(release_points(batch.facts, release, through), release.released_on)
    prediction = drift.predict(fit, on) if fit is not None else None
    at_bench = predicted_bench = None
    if bench is not None:
        at_bench = _at_bench(batch, release.molarity, bench, alpha_per_k)
        if prediction is not None:
            predicted_bench = _at_bench(batch, prediction.molarity, bench, alpha_per_k)
    return LabDayEntry(
        batch=batch,
        on=on,
        known_on=known_on,
        that_day=that_day,
        current=current,
        fit=fit,
        fit_note=note,
        prediction=prediction,
        bench_temperature_c=bench,
        molarity_at_bench=at_bench,
        predicted_at_bench=predicted_bench,
    )


def _why_not(batch: BatchRecord, on: dt.date) -> str:
    """Why one batch was not in force on `on`, in a few words."""
    facts = batch.facts
    if facts.prepared_on > on:
        return f"{batch.code} was prepared later, on {facts.prepared_on.isoformat()}"
    report = status_on(facts, on)
    if report.status is Status.AWAITING:
        first = min((r.released_on for r in facts.releases), default=None)
        later = f" (first released {first.isoformat()})" if first else ""
        return f"{batch.code} was not yet standardized{later}"
    if report.status is Status.REGISTERED_IN_ERROR:
        return f"{batch.code} was registered in error"
    if report.status is Status.WITHDRAWN and facts.withdrawn_on is not None:
        return f"{batch.code} had been withdrawn on {facts.withdrawn_on.isoformat()}"
    if report.status is Status.EXPIRED and report.release is not None:
        return f"{batch.code} had expired on {report.release.expires_on.isoformat()}"
    return f"{batch.code} was not in force"


def lab_day(
    batches: Iterable[BatchRecord],
    on: dt.date,
    known_on: dt.date,
    titrant: str | None = None,
    bench_temperature_c: float | None = None,
    alpha_per_k: float | None = None,
) -> LabDay:
    """Every batch of a titrant (all titrants when None) in force on `on`, most urgent flags first.

    batches: BatchRecords (any titrants; those of other titrants are ignored); on: the lab day;
    known_on: the date the record is read on (today); titrant: catalogue key; bench_temperature_c in °C
    (5–40) or None; alpha_per_k in 1/K, or None for each titrant's own density model. Returns a LabDay;
    an empty one carries the reason.
    """
    bench = check_bench_temperature(bench_temperature_c)
    key = chemistry.titrant(titrant).key if titrant else None
    mine = [b for b in batches if key is None or b.reagent == key]
    entries = [e for e in (entry_for(b, on, known_on, bench, alpha_per_k) for b in mine) if e is not None]
    order = {s: i for i, s in enumerate((Status.DRIFTING, Status.RECHECK_DUE, Status.IN_SERVICE))}
    entries.sort(
        key=lambda e: (e.batch.reagent, e.batch.nominal_molarity, e.hold is None, order.get(e.status.status, 9), e.batch.code)
    )
    headline = detail = None
    if not entries:
        what = f"{key} batch" if key else "titrant batch"
        headline = f"No {what} was in force on {on.isoformat()}."
        if not mine:
            detail = f"None is recorded{' for ' + key if key else ''}."
        else:
            why = [_why_not(b, on) for b in sorted(mine, key=lambda b: b.code)]
            detail = "; ".join(why[:6]) + ("; …" if len(why) > 6 else "")
            detail = detail[:1].upper() + detail[1:] + "."
    return LabDay(
        on=on,
        titrant=key,
        bench_temperature_c=bench,
        entries=tuple(entries),
        headline=headline,
        detail=detail,
        future=on > known_on,
        known_on=known_on,
    )


# ---------------------------------------------------------------------------------------------------------
# Cautions for a sheet posted at the bench


# Titrants beyond acids and bases at the bench (common practice; each label carries its own statements).
BENCH_CAUTIONS: dict[str, str] = {
    "KMnO4": "Potassium permanganate stains skin and clothes brown and is titrated hot: handle the hot flask with "
    "tongs or a cloth, and collect waste as the instructor says (common practice).",
    "K2Cr2O7": "Potassium dichromate is a chromium(VI) solution that may cause cancer: gloves on, no splashes, every "
    "drop of waste into the chromium waste bottle (common practice).",
    "AgNO3": "Silver nitrate stains skin black and harms the eyes; its waste goes into the silver residue bottle, "
    "never down the drain (common practice).",
    "I2": "Iodine solution stains skin and clothes; wipe spills with a little thiosulfate solution (common practice).",
    "HClO4-AcOH": "Perchloric acid in acetic acid is flammable and corrosive: no flames or hot plates near it, burettes "
    "filled in the fume hood, and any splash rinsed off at once with plenty of water (common practice).",
}


@dataclass(frozen=True)
class Received:
    """A container a destination had in use on the day: its code, the batch it was filled from, when, litres."""

    container: str
    batch_code: str
    filled_on: dt.date
    volume_l: float


@dataclass(frozen=True)
class DestinationAnswer:
    """The lab day as one destination saw it: the day narrowed to the batches it received, and why, in words.

    received: whether anything of the titrant dispensed to the destination was in use that day; when not,
    `day` is the whole answer (every batch in force) and `note` says so.
    """

    day: LabDay
    destination: str
    received: tuple[Received, ...]
    note: str

    @property
    def found(self) -> bool:
        return bool(self.received)


def for_destination(day: LabDay, received: Sequence[Received], destination: str) -> DestinationAnswer:
    """Narrow a lab day's answer to the batches a destination received (containers in use that day).

    day: the answer for every batch in force; received: the destination's containers in use that day
    (of the titrant asked, newest fill first); destination: how a person reads it ("CHM 110 · section B").
    When nothing was received the whole answer stands, with a note saying so; a received batch with
    no value in force that day is named in the note and leaves no entry.
    """
    what = day.titrant or "titrant"
    on = day.on.isoformat()
    if not received:
        note = (
            f"No {what} dispensed to {destination} was in use on {on}, so the answer cannot say which batch it used: "
            "every batch in force that day is listed."
        )
        return DestinationAnswer(day, destination, (), note)
    codes = list(dict.fromkeys(r.batch_code for r in received))
    bottles = "; ".join(f"{r.container} (filled {r.filled_on.isoformat()} from {r.batch_code})" for r in received)
    note = f"{destination} had in use on {on}: {bottles}."
    in_force = {e.batch.code for e in day.entries}
    absent = [c for c in codes if c not in in_force]
    if absent:
        note += (
            f" {', '.join(absent)} had no value in force that day: the results made with it cannot be corrected with "
            "a certified value; ask the prep room."
        )
    chosen = tuple(e for e in day.entries if e.batch.code in codes)
    if not chosen:
        narrowed = replace(
            day,
            entries=(),
            headline=f"{destination} received {', '.join(codes)}, which had no value in force on {on}.",
            detail=day.reason,
        )
        return DestinationAnswer(narrowed, destination, tuple(received), note)
    return DestinationAnswer(replace(day, entries=chosen), destination, tuple(received), note)


def cautions(entries: Sequence[LabDayEntry]) -> tuple[str, ...]:
    """The usual cautions for handling the titrants listed (common practice), deferring to the local rules."""
    lines = [
        "Wear eye protection, gloves and a lab coat when filling burettes; rinse any splash from skin or "
        "eyes at once with plenty of water and tell the instructor (common practice)."
    ]
    strong = sorted(
        {
            f"{e.batch.reagent} {e.batch.nominal_molarity:g} mol/L"
            for e in entries
            if chemistry.titrant(e.batch.reagent).role == chemistry.BASE
            and e.batch.nominal_molarity >= 0.5
            or chemistry.titrant(e.batch.reagent).role == chemistry.ACID
            and e.batch.nominal_molarity >= 1.0
        }
    )
    if strong:
        lines.append(
            ", ".join(strong) + ": at this strength the solution can burn skin and damage eyes; fill "
            "burettes below eye level with a funnel (common practice; check the bottle's label)."
        )
    on_bench = {e.batch.reagent for e in entries}
    lines.extend(line for key, line in BENCH_CAUTIONS.items() if key in on_bench)
    lines.append(
        "These are the usual cautions only: the label, the safety data sheet, local regulations and the "
        "institution's chemical hygiene plan take precedence."
    )
    return tuple(lines)


# ---------------------------------------------------------------------------------------------------------
# Class-data correction

CLASS_COLUMNS = ("group", "aliquot_ml", "titrant_ml", "ratio", "analyte_per_titrant", "reported_molarity", "notes")
_REQUIRED = ("group", "aliquot_ml", "titrant_ml")
_PLAIN = re.compile(r"[+]?(?:\d+\.?\d*|\.\d+)")
MAX_VOLUME_ML = 1000.0
MAX_RATIO = 10.0
MAX_GROUP_LENGTH = 60


@dataclass(frozen=True)
class ClassRow:
    """One group's titration: line in the file, volumes in mL, moles of analyte per mole of titrant.

    reported_molarity in mol/L or None; ratio_text the stoichiometry as written in the file.
    """

    line: int
    group: str
    aliquot_ml: float
    titrant_ml: float
    analyte_per_titrant: float
    ratio_text: str = ""
    reported_molarity: float | None = None
    notes: str = ""


@dataclass(frozen=True)
class ClassSheet:
    """A read class-data sheet: the good rows and the problems by line (line 0: the file as a whole)."""

    rows: tuple[ClassRow, ...] = ()
    problems: tuple[tuple[int, str], ...] = field(default_factory=tuple)

    @property
    def ok(self) -> bool:
        return not self.problems and bool(self.rows)


def _positive(text: str, column: str, upper: float, unit: str) -> tuple[float | None, str | None]:
    t = text.strip()
    if "," in t and _PLAIN.fullmatch(t.replace(",", ".")):
        return None, f"{column}: use a point, not a comma, for the decimal sign ({t.replace(',', '.')})"
    if not _PLAIN.fullmatch(t):
        return None, f"{column}: {t!r} is not a plain decimal number"
    v = float(t)
    if not (0 < v <= upper):
        return None, f"{column}: must be above 0 and at most {upper:g}{(' ' + unit) if unit else ''} (got {t})"
    return v, None


def _ratio(text: str) -> tuple[float | None, str | None]:
    parts = text.strip().split(":")
    if len(parts) != 2:
        return None, (
            f"ratio: write it titrant:analyte in moles, e.g. 2:1 (got {text.strip()!r}); a spreadsheet "
            "may have turned it into a time — use analyte_per_titrant instead"
        )
    (t, p1), (a, p2) = (_positive(parts[0], "ratio", 1000, ""), _positive(parts[1], "ratio", 1000, ""))
    if p1 or p2:
        return None, p1 or p2
    assert t is not None and a is not None
    value = a / t
    if value > MAX_RATIO:
        return None, f"ratio: {text.strip()} means {value:g} mol of analyte per mol of titrant, more than {MAX_RATIO:g}"
    return value, None


def read_class_sheet(text: str, max_rows: int) -> ClassSheet:
    """Read a class-data CSV (layout in the module docstring); every problem is reported with its line.

    text: the file's text; max_rows: most data rows accepted. Returns a ClassSheet; rows with a problem
    are left out of rows and named in problems.
    """
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = [(i, line) for i, line in enumerate(text.splitlines(), start=1) if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        return ClassSheet(problems=((0, "the file has no header row and no data"),))
    reader = csv.reader([line for _, line in lines])
    header_line = lines[0][0]
    try:
        header = [h.strip().lower() for h in next(reader)]
    except csv.Error as exc:
        return ClassSheet(problems=((header_line, f"the header row cannot be read: {exc}"),))
    problems: list[tuple[int, str]] = []
    unknown = [h for h in header if h not in CLASS_COLUMNS]
    if unknown:
        problems.append(
            (
                header_line,
                "unknown column(s) " + ", ".join(repr(h) for h in unknown) + "; the columns are " + ", ".join(CLASS_COLUMNS),
            )
        )
    if len(set(header)) != len(header):
        problems.append((header_line, "a column name appears twice in the header"))
    missing = [c for c in _REQUIRED if c not in header]
    if missing:
        problems.append((header_line, "the header lacks " + ", ".join(missing)))
    if "ratio" not in header and "analyte_per_titrant" not in header:
        problems.append((header_line, "the header needs a ratio (titrant:analyte) or an analyte_per_titrant column"))
    if problems:
        return ClassSheet(problems=tuple(problems))
    data = lines[1:]
    if len(data) > max_rows:
        return ClassSheet(problems=((0, f"the file has {len(data)} data rows; at most {max_rows} are accepted"),))
    rows: list[ClassRow] = []
    try:
        cells_list = list(reader)
    except csv.Error as exc:
        return ClassSheet(problems=((0, f"the file cannot be read as CSV: {exc}"),))
    for (line_no, _), cells in zip(data, cells_list, strict=False):
        if len(cells) != len(header):
            problems.append((line_no, f"has {len(cells)} cells; the header has {len(header)}"))
            continue
        v = {h: c.strip() for h, c in zip(header, cells, strict=True)}
        errs: list[str] = []
        group = v.get("group", "")
        if not group:
            errs.append("group: is required")
        elif len(group) > MAX_GROUP_LENGTH:
            errs.append(f"group: at most {MAX_GROUP_LENGTH} characters")
        nums: dict[str, float | None] = {}
        for col in ("aliquot_ml", "titrant_ml"):
            if not v.get(col):
                errs.append(f"{col}: is required")
                nums[col] = None
            else:
                nums[col], why = _positive(v[col], col, MAX_VOLUME_ML, "mL")
                if why:
                    errs.append(why)
        ratio_text, per = v.get("ratio", ""), v.get("analyte_per_titrant", "")
        apt: float | None = None
        if ratio_text and per:
            errs.append("give the stoichiometry once: ratio or analyte_per_titrant, not both")
        elif ratio_text:
            apt, why = _ratio(ratio_text)
            if why:
                errs.append(why)
        elif per:
            apt, why = _positive(per, "analyte_per_titrant", MAX_RATIO, "")
            if why:
                errs.append(why)
        else:
            errs.append("the stoichiometry is missing: fill ratio (titrant:analyte) or analyte_per_titrant")
        reported = None
        if v.get("reported_molarity"):
            reported, why = _positive(v["reported_molarity"], "reported_molarity", 100.0, "mol/L")
            if why:
                errs.append(why)
        if errs:
            problems.extend((line_no, e) for e in errs)
            continue
        assert nums["aliquot_ml"] is not None and nums["titrant_ml"] is not None and apt is not None
        rows.append(
            ClassRow(
                line=line_no,
                group=group,
                aliquot_ml=nums["aliquot_ml"],
                titrant_ml=nums["titrant_ml"],
                analyte_per_titrant=apt,
                ratio_text=ratio_text,
                reported_molarity=reported,
                notes=v.get("notes", ""),
            )
        )
    if not rows and not problems:
        problems.append((0, "the file has a header but no data rows"))
    return ClassSheet(rows=tuple(rows), problems=tuple(problems))


def analyte_molarity(titrant_molarity: float, titrant_ml: float, analyte_per_titrant: float, aliquot_ml: float) -> float:
    """Analyte concentration from a titration, mol/L.

    titrant_molarity in mol/L; titrant_ml and aliquot_ml in mL (their unit cancels); analyte_per_titrant
    in mol/mol. Returns c_titrant·V_titrant·ratio/V_aliquot.
    """
    return titrant_molarity * titrant_ml * analyte_per_titrant / aliquot_ml


@dataclass(frozen=True)
class ClassResult:
    """One row recomputed: analyte molarities (mol/L) with the nominal and the in-force titrant strength.

    relative_error: (nominal − corrected)/corrected, a fraction; reported_error likewise for the
    group's own reported value (None when not given).
    """

    row: ClassRow
    with_nominal: float
    corrected: float
    relative_error: float
    reported_error: float | None


def correct_class(rows: Sequence[ClassRow], molarity_used: float, nominal_molarity: float) -> tuple[ClassResult, ...]:
    """Each row's result with the titrant molarity in force (mol/L) beside the nominal one (mol/L)."""
    out = []
    for r in rows:
        nominal = analyte_molarity(nominal_molarity, r.titrant_ml, r.analyte_per_titrant, r.aliquot_ml)
        corrected = analyte_molarity(molarity_used, r.titrant_ml, r.analyte_per_titrant, r.aliquot_ml)
        reported = (r.reported_molarity - corrected) / corrected if r.reported_molarity is not None else None
        out.append(
            ClassResult(
                row=r,
                with_nominal=nominal,
                corrected=corrected,
                relative_error=(nominal - corrected) / corrected,
                reported_error=reported,
            )
        )
    return tuple(out)


_STORED = ("line", "group", "aliquot_ml", "titrant_ml", "analyte_per_titrant", "ratio", "reported_molarity", "notes")


def _g(value: float | None) -> str:
    return "" if value is None else f"{value:.10g}"


def rows_to_csv(rows: Sequence[ClassRow]) -> str:
    """The rows as read, as CSV text: the copy of the upload kept with a correction."""
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(_STORED)
    for r in rows:
        w.writerow(
            [
                r.line,
                r.group,
                _g(r.aliquot_ml),
                _g(r.titrant_ml),
                repr(r.analyte_per_titrant),
                r.ratio_text,
                _g(r.reported_molarity),
                r.notes,
            ]
        )
    return out.getvalue()


def rows_from_csv(text: str) -> tuple[ClassRow, ...]:
    """Rows back from rows_to_csv's text (stockroom's own stored copy)."""
    rows = []
    for d in csv.DictReader(io.StringIO(text)):
        rows.append(
            ClassRow(
                line=int(d["line"]),
                group=d["group"],
                aliquot_ml=float(d["aliquot_ml"]),
                titrant_ml=float(d["titrant_ml"]),
                analyte_per_titrant=float(d["analyte_per_titrant"]),
                ratio_text=d["ratio"],
                reported_molarity=float(d["reported_molarity"]) if d["reported_molarity"] else None,
                notes=d["notes"],
            )
        )
    return tuple(rows)


RESULT_COLUMNS = (
    "line",
    "group",
    "aliquot_ml",
    "titrant_ml",
    "analyte_per_titrant",
    "result_nominal_mol_l",
    "result_corrected_mol_l",
    "relative_error_percent",
    "reported_mol_l",
    "reported_error_percent",
    "notes",
)


def results_to_csv(results: Sequence[ClassResult], about: Mapping[str, str]) -> str:
    """The corrected results as CSV text, preceded by `# key: value` lines saying how they were made."""
    out = SafeCsv()
    for k, v in about.items():
        out.comment(f"{k}: {v}")
    out.row(RESULT_COLUMNS)
    for res in results:
        r = res.row
        out.row(
            [
                r.line,
                r.group,
                _g(r.aliquot_ml),
                _g(r.titrant_ml),
                f"{r.analyte_per_titrant:.6g}",
                f"{res.with_nominal:.6f}",
                f"{res.corrected:.6f}",
                f"{res.relative_error * 100:.3f}",
                _g(r.reported_molarity),
                "" if res.reported_error is None else f"{res.reported_error * 100:.3f}",
                r.notes,
            ]
        )
    return out.text()
