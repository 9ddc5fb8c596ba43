"""Reagent policy and a batch's status, derived from its recorded facts, its policy and a date.

Status is never stored: it is this function of the history, so "what was true on day D" is the same
call with D, and it can never disagree with the records. Drift (stockroom.drift) is part of it: a
re-check outside the tolerance band, or a significant trend whose line is already outside the band on
the day asked, makes a batch DRIFTING; a trend expected to leave the band later in the batch's life is
a flag shown with the status, and changes it only once that day has come.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field, replace
from enum import StrEnum
from typing import cast

from stockroom import drift
from stockroom.drift import DriftReport, Flag, FlagKind


@dataclass(frozen=True)
class ReagentPolicy:
    """How long a titrant keeps, how often it is re-checked, and what it must meet.

    shelf_life_days and recheck_interval_days in days; tolerance_rel and max_rsd as fractions
    (0.005 = 0.5 %); nominal_molarities in mol/L; container_shelf_life_days: days a container filled
    from a batch may be used from its fill date (None: as long as the batch itself).
    """

    reagent: str
    nominal_molarities: tuple[float, ...]
    shelf_life_days: int
    recheck_interval_days: int
    tolerance_rel: float = 0.005
    max_rsd: float = 0.002
    min_replicates: int = 3
    container_shelf_life_days: int | None = None


# Starting policy, written into a new database by a migration and editable there afterwards.
# The intervals are typical prep-room practice from memory, not a published rule: NaOH and KOH take
# up CO2, so they are re-checked often and kept a few months; mineral acids are stable for months.
# Tolerance 0.5 % and RSD 0.2 % follow the pharmacopoeial general text on volumetric solutions.
DEFAULT_POLICIES: tuple[ReagentPolicy, ...] = (
    ReagentPolicy("HCl", (0.1, 0.5, 1.0), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("H2SO4", (0.05, 0.1, 0.5, 1.0), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("HNO3", (0.1, 1.0), shelf_life_days=180, recheck_interval_days=60),
    ReagentPolicy("HClO4", (0.1,), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("NaOH", (0.1, 0.5, 1.0), shelf_life_days=90, recheck_interval_days=14),
    ReagentPolicy("KOH", (0.1, 0.5, 1.0), shelf_life_days=90, recheck_interval_days=14),
    # Beyond acids and bases (common practice, from memory): permanganate and thiosulfate decompose in
    # light and are re-checked every two weeks; iron(II) is oxidized by air and re-checked weekly; iodine
    # is volatile; dichromate, cerium(IV), edetate and zinc keep for a year.
    ReagentPolicy("KMnO4", (0.02,), shelf_life_days=180, recheck_interval_days=14),
    ReagentPolicy("Na2S2O3", (0.1,), shelf_life_days=90, recheck_interval_days=14),
    ReagentPolicy("I2", (0.05,), shelf_life_days=90, recheck_interval_days=14),
    ReagentPolicy("Ce(SO4)2", (0.1,), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("FAS", (0.1,), shelf_life_days=30, recheck_interval_days=7),
    ReagentPolicy("K2Cr2O7", (0.0167, 0.02), shelf_life_days=365, recheck_interval_days=180),
    ReagentPolicy("AgNO3", (0.1,), shelf_life_days=180, recheck_interval_days=60),
    ReagentPolicy("NH4SCN", (0.1,), shelf_life_days=180, recheck_interval_days=60),
    ReagentPolicy("EDTA", (0.05, 0.1), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("ZnSO4", (0.05, 0.1), shelf_life_days=365, recheck_interval_days=90),
    ReagentPolicy("HClO4-AcOH", (0.1,), shelf_life_days=180, recheck_interval_days=30),
)


class Status(StrEnum):
    """The states a batch can be in on a given date."""

    AWAITING = "awaiting"
    IN_SERVICE = "in_service"
    RECHECK_DUE = "recheck_due"
    DRIFTING = "drifting"
    EXPIRED = "expired"
    WITHDRAWN = "withdrawn"
    REGISTERED_IN_ERROR = "registered_in_error"

    @property
    def label(self) -> str:
        return _LABELS[self]


_LABELS = {
    Status.AWAITING: "Awaiting standardization",
    Status.IN_SERVICE: "In service",
    Status.RECHECK_DUE: "Re-check due",
    Status.DRIFTING: "Drifting",
    Status.EXPIRED: "Expired",
    Status.WITHDRAWN: "Withdrawn",
    Status.REGISTERED_IN_ERROR: "Registered in error",
}

# Most urgent first: the order the dashboard lists batches in.
URGENCY = (
    Status.DRIFTING,
    Status.RECHECK_DUE,
    Status.AWAITING,
    Status.IN_SERVICE,
    Status.EXPIRED,
    Status.WITHDRAWN,
    Status.REGISTERED_IN_ERROR,
)


@dataclass(frozen=True)
class ReleaseFact:
    """A release of a batch: certified molarity (mol/L at the reference temperature) and its terms."""

    id: int
    released_on: dt.date
    expires_on: dt.date
    molarity: float
    u: float
    U: float
    k: float
    recheck_interval_days: int
    tolerance_rel: float


@dataclass(frozen=True)
class CheckFact:
    """A re-check of a released batch: measured molarity and standard uncertainty, mol/L; k dimensionless."""

    performed_on: dt.date
    molarity: float
    u: float
    k: float = 2.0  # coverage factor of the re-check's expanded uncertainty (stockroom's default k)


class ReviewKind(StrEnum):
    """The kind of flag a recall puts on a batch; it travels with drift's flags (drift.FlagKind)."""

    UNDER_REVIEW = "under_review"


# A recall's flag rides in StatusReport.flags beside the drift flags, so every page, list and the lab-day
# JSON that shows flags shows it too. Its kind is ReviewKind's own value, outside drift's vocabulary; the
# cast only tells the type checker that a Flag may carry it (kind.value reads "under_review").
_UNDER_REVIEW = cast(FlagKind, ReviewKind.UNDER_REVIEW)


@dataclass(frozen=True)
class ReviewFact:
    """A recall that puts one release of a batch under review (stockroom.recall finds which).

    recall_id, release_id: record ids; subject: what is suspect, in words ("primary-standard lot
    STD-KHP-001"); suspect_from: the date from which it is suspect; opened_on: the date the recall was
    recorded; cleared_on: the date it was cleared for this batch or as a whole, or None while open.
    """

    recall_id: int
    release_id: int
    subject: str
    suspect_from: dt.date
    opened_on: dt.date
    cleared_on: dt.date | None = None

    def open_on(self, on: dt.date) -> bool:
        """Whether the review stood on date `on`: recorded by then and not yet cleared."""
        return self.opened_on <= on and (self.cleared_on is None or on < self.cleared_on)


@dataclass(frozen=True)
class BatchFacts:
    """What the records say about one batch, in the plain values the status rules need.

    reviews: the recalls that reach any release of the batch (a release made after a recall, on a chain
    free of the suspect item, is not among them: that is how re-standardizing ends a review).
    """

    prepared_on: dt.date
    releases: tuple[ReleaseFact, ...] = ()
    rechecks: tuple[CheckFact, ...] = ()
    withdrawn_on: dt.date | None = None
    reviews: tuple[ReviewFact, ...] = ()
    # The lab date the batch was marked registered in error (a mistaken entry), or None. Once known it
    # holds for every date asked: the registration itself was the mistake, so no day had the batch.
    registered_in_error_on: dt.date | None = None


@dataclass(frozen=True)
class StatusReport:
    """A batch's status on a date, the release in force then, and why, in plain words.

    reasons explain the status; flags are every drift flag raised that day (stockroom.drift.Flag),
    including those that do not set the status (a forecast); drift is the release's drift report.
    """

    status: Status
    on: dt.date
    release: ReleaseFact | None = None
    next_check_due: dt.date | None = None
    last_check: CheckFact | None = None
    reasons: tuple[str, ...] = field(default_factory=tuple)
    flags: tuple[Flag, ...] = field(default_factory=tuple)
    drift: DriftReport | None = None

    @property
    def forecast(self) -> Flag | None:
        """The "expected to leave tolerance on DATE" flag, or None."""
        return next((f for f in self.flags if f.kind is FlagKind.EXPECTED_TO_LEAVE), None)

    @property
    def under_review(self) -> Flag | None:
        """The first "under review" flag of a recall that reaches the release in force, or None."""
        return next((f for f in self.flags if f.kind == ReviewKind.UNDER_REVIEW), None)

    @property
    def attention(self) -> Flag | None:
        """The flag that puts a batch in service on the attention list: a recall's review, else a forecast."""
        return self.under_review or self.forecast

    @property
    def remarks(self) -> tuple[str, ...]:
        """The reasons, then the message of every other flag raised: what a list of batches shows."""
        return self.reasons + tuple(f.message for f in self.flags if f.message not in self.reasons)


def known_by(facts: BatchFacts, known_on: dt.date) -> BatchFacts:
    """The facts as the record held them on `known_on`: everything dated after it left out.

    Releases by release date, re-checks by the date performed, the withdrawal by its date, recalls by
    the date opened (a clearance after `known_on` not yet known). status_on(known_by(f, K), D) is the
    status of day D as someone reading the record on K would have given it; with K = D it is the
    record as it stood that day, equal to status_on(f, D).
    """
    reviews = tuple(
        rv if rv.cleared_on is None or rv.cleared_on <= known_on else replace(rv, cleared_on=None)
        for rv in facts.reviews
        if rv.opened_on <= known_on
    )
    return BatchFacts(
        prepared_on=facts.prepared_on,
        releases=tuple(r for r in facts.releases if r.released_on <= known_on),
        rechecks=tuple(c for c in facts.rechecks if c.performed_on <= known_on),
        withdrawn_on=facts.withdrawn_on if facts.withdrawn_on is not None and facts.withdrawn_on <= known_on else None,
        reviews=reviews,
        registered_in_error_on=facts.registered_in_error_on
        if facts.registered_in_error_on is not None and facts.registered_in_error_on <= known_on
        else None,
    )


def expiry_for(released_on: dt.date, policy: ReagentPolicy, prepared_on: dt.date | None = None) -> dt.date:
    """Expiry of a release: the shelf life counted from preparation (or release when unknown), days."""
    start = prepared_on or released_on
    return start + dt.timedelta(days=policy.shelf_life_days)


def latest_release(facts: BatchFacts, on: dt.date) -> ReleaseFact | None:
    """The newest release made on or before `on`; later ones supersede earlier ones."""
    made = [r for r in facts.releases if r.released_on <= on]
    return max(made, key=lambda r: (r.released_on, r.id)) if made else None


def release_in_force(facts: BatchFacts, on: dt.date) -> ReleaseFact | None:
    """The release whose certified value applies on `on`, or None (not yet released, expired, withdrawn,
    registered in error)."""
    if facts.registered_in_error_on is not None:
        return None
    if facts.withdrawn_on is not None and facts.withdrawn_on <= on:
        return None
    release = latest_release(facts, on)
    if release is None or on > release.expires_on:
        return None
    return release


def release_points(facts: BatchFacts, release: ReleaseFact, until: dt.date) -> tuple[drift.Point, ...]:
    """A release's own certified value and the re-checks made under it up to `until` (mol/L, u in mol/L).

    A re-check belongs to the release in force when it was made: from the release date (inclusive) to the
    next release of the batch (exclusive).
    """
    later = [r.released_on for r in facts.releases if (r.released_on, r.id) > (release.released_on, release.id)]
    end = min(later) if later else None
    points = [drift.Point(release.released_on, release.molarity, release.u, "release", release.k)]
    points += [
        drift.Point(c.performed_on, c.molarity, c.u, "recheck", c.k)
        for c in facts.rechecks
        if release.released_on <= c.performed_on <= until and (end is None or c.performed_on < end)
    ]
    return tuple(points)


def drift_on(facts: BatchFacts, on: dt.date, release: ReleaseFact | None = None) -> DriftReport | None:
    """The drift report of a release (the newest made by `on` unless given) as it stands on date `on`.

    Only standardizations made by `on` count. Returns None when nothing has been released by `on`.
    """
    release = release or latest_release(facts, on)
    if release is None:
        return None
    band = drift.Band(release.molarity, release.tolerance_rel)
    return drift.assess(
        release_points(facts, release, on), band, release.released_on, release.expires_on, release.recheck_interval_days, on
    )


def review_flags(facts: BatchFacts, release: ReleaseFact, on: dt.date) -> tuple[Flag, ...]:
    """The "under review" flags of the recalls open on `on` that reach `release` (dates as dates)."""
    return tuple(
        Flag(
            _UNDER_REVIEW,
            f"under review since {rv.opened_on.isoformat()}: its certified value rests on "
            f"{rv.subject}, suspect from {rv.suspect_from.isoformat()} (recall {rv.recall_id})",
            rv.opened_on,
        )
        for rv in facts.reviews
        if rv.release_id == release.id and rv.open_on(on)
    )


_DRIFTING_KINDS = (FlagKind.RECHECK_OUTSIDE, FlagKind.PREDICTED_OUTSIDE)
_DUE_KINDS = (FlagKind.RECHECK_DUE, FlagKind.RECHECK_OVERDUE)


def status_on(facts: BatchFacts, on: dt.date) -> StatusReport:
    """Derive a batch's status on date `on` from its facts alone (standardizations made after `on` unseen)."""
    if facts.registered_in_error_on is not None:
        return StatusReport(
            Status.REGISTERED_IN_ERROR,
            on,
            reasons=(f"marked registered in error on {facts.registered_in_error_on.isoformat()}: never in use",),
        )
    if facts.withdrawn_on is not None and facts.withdrawn_on <= on:
        return StatusReport(Status.WITHDRAWN, on, reasons=(f"withdrawn on {facts.withdrawn_on.isoformat()}",))
    release = latest_release(facts, on)
    if release is None:
        return StatusReport(Status.AWAITING, on, reasons=("no accepted standardization yet",))
    report = drift_on(facts, on, release)
    assert report is not None
    if on > release.expires_on:
        return StatusReport(
            Status.EXPIRED,
            on,
            release=release,
            reasons=(f"expired on {release.expires_on.isoformat()}",),
            flags=report.flags,
            drift=report,
        )
    checks = sorted(
        (c for c in facts.rechecks if release.released_on <= c.performed_on <= on),
        key=lambda c: c.performed_on,
    )
    last = checks[-1] if checks else None
    drifting = tuple(f.message for f in report.flags if f.kind in _DRIFTING_KINDS)
    due = tuple(f.message for f in report.flags if f.kind in _DUE_KINDS)
    status, reasons = (Status.DRIFTING, drifting) if drifting else (Status.RECHECK_DUE, due) if due else (Status.IN_SERVICE, ())
    return StatusReport(
        status,
        on,
        release=release,
        next_check_due=report.next_check_due,
        last_check=last,
        reasons=reasons,
        flags=report.flags + review_flags(facts, release, on),
        drift=report,
    )
