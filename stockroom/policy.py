"""Reagent policy and a batch's status, derived from its recorded facts, its policy and a date.

Status is never stored: it is this function of the history, so "what was true on day D" is the same
call with D, and it can never disagree with the records.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from enum import StrEnum


@dataclass(frozen=True)
class ReagentPolicy:
    """How long a titrant keeps, how often it is re-checked, and what it must meet.

    shelf_life_days and recheck_interval_days in days; tolerance_rel and max_rsd as fractions
    (0.005 = 0.5 %); nominal_molarities in mol/L.
    """

    reagent: str
    nominal_molarities: tuple[float, ...]
    shelf_life_days: int
    recheck_interval_days: int
    tolerance_rel: float = 0.005
    max_rsd: float = 0.002
    min_replicates: int = 3


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
)


class Status(StrEnum):
    """The states a batch can be in on a given date."""

    AWAITING = "awaiting"
    IN_SERVICE = "in_service"
    RECHECK_DUE = "recheck_due"
    DRIFTING = "drifting"
    EXPIRED = "expired"
    WITHDRAWN = "withdrawn"

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
}

# Most urgent first: the order the dashboard lists batches in.
URGENCY = (
    Status.DRIFTING,
    Status.RECHECK_DUE,
    Status.AWAITING,
    Status.IN_SERVICE,
    Status.EXPIRED,
    Status.WITHDRAWN,
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
    """A re-check of a released batch: measured molarity and standard uncertainty, mol/L."""

    performed_on: dt.date
    molarity: float
    u: float


@dataclass(frozen=True)
class BatchFacts:
    """What the records say about one batch, in the plain values the status rules need."""

    prepared_on: dt.date
    releases: tuple[ReleaseFact, ...] = ()
    rechecks: tuple[CheckFact, ...] = ()
    withdrawn_on: dt.date | None = None


@dataclass(frozen=True)
class StatusReport:
    """A batch's status on a date, the release in force then, and why, in plain words."""

    status: Status
    on: dt.date
    release: ReleaseFact | None = None
    next_check_due: dt.date | None = None
    last_check: CheckFact | None = None
    reasons: tuple[str, ...] = field(default_factory=tuple)


def expiry_for(released_on: dt.date, policy: ReagentPolicy, prepared_on: dt.date | None = None) -> dt.date:
    """Expiry of a release: the shelf life counted from preparation (or release when unknown), days."""
    start = prepared_on or released_on
    return start + dt.timedelta(days=policy.shelf_life_days)


def latest_release(facts: BatchFacts, on: dt.date) -> ReleaseFact | None:
    """The newest release made on or before `on`; later ones supersede earlier ones."""
    made = [r for r in facts.releases if r.released_on <= on]
    return max(made, key=lambda r: (r.released_on, r.id)) if made else None


def release_in_force(facts: BatchFacts, on: dt.date) -> ReleaseFact | None:
    """The release whose certified value applies on `on`, or None (not yet released, expired, withdrawn)."""
    if facts.withdrawn_on is not None and facts.withdrawn_on <= on:
        return None
    release = latest_release(facts, on)
    if release is None or on > release.expires_on:
        return None
    return release


def status_on(facts: BatchFacts, on: dt.date) -> StatusReport:
    """Derive a batch's status on date `on` from its facts alone."""
    if facts.withdrawn_on is not None and facts.withdrawn_on <= on:
        return StatusReport(Status.WITHDRAWN, on, reasons=(f"withdrawn on {facts.withdrawn_on.isoformat()}",))
    release = latest_release(facts, on)
    if release is None:
        return StatusReport(Status.AWAITING, on, reasons=("no accepted standardization yet",))
    if on > release.expires_on:
        return StatusReport(Status.EXPIRED, on, release=release,
                            reasons=(f"expired on {release.expires_on.isoformat()}",))
    checks = sorted(
        (c for c in facts.rechecks if release.released_on <= c.performed_on <= on),
        key=lambda c: c.performed_on,
    )
    last = checks[-1] if checks else None
    last_date = last.performed_on if last else release.released_on
    due = min(last_date + dt.timedelta(days=release.recheck_interval_days), release.expires_on)
    if last is not None:
        deviation = (last.molarity - release.molarity) / release.molarity
        if abs(deviation) > release.tolerance_rel:
            return StatusReport(
                Status.DRIFTING, on, release=release, next_check_due=due, last_check=last,
                reasons=(f"re-check on {last.performed_on.isoformat()} differs from the certified value by "
                         f"{deviation * 100:+.2f} % (tolerance ±{release.tolerance_rel * 100:.2f} %)",),
            )
    if on >= due and due < release.expires_on:
        overdue = (on - due).days
        why = "re-check due today" if overdue == 0 else f"re-check overdue by {overdue} day(s)"
        return StatusReport(Status.RECHECK_DUE, on, release=release, next_check_due=due, last_check=last,
                            reasons=(why,))
    return StatusReport(Status.IN_SERVICE, on, release=release, next_check_due=due, last_check=last)
