"""The prep plan: each titrant's scheduled demand against the volume that will still be in force.

For each titrant (reagent and nominal molarity) the lab sessions from today to the end of the window
draw, in date order, on the batches that will be usable on each session's date: status "in service"
that day by the policy's own status function (so not expired, not due for re-check, not drifting, not
withdrawn) and not under a recall's review. A session draws from the batch that expires first
(first-expiry, first-out: common practice), then the next. The first session that finds less in force
than it needs is the shortfall; "make a new batch by" is that date less the lead time (preparation
plus standardization days).

Pure: numbers, dates and frozen dataclasses in and out; volumes in litres, dates the lab's dates.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from stockroom.policy import BatchFacts, Status, status_on

# Volumes closer than this (L, a microlitre) are equal: sums of decimal litres are not exact in binary.
EPSILON_L = 1e-6


def titrant_key(reagent: str, nominal_molarity: float) -> tuple[str, float]:
    """The key a titrant is planned under: catalogue key and nominal molarity (mol/L, to 6 decimals)."""
    return reagent, round(float(nominal_molarity), 6)


@dataclass(frozen=True)
class Supply:
    """One batch as the plan sees it: its code, titrant, litres remaining now and its recorded facts."""

    code: str
    reagent: str
    nominal_molarity: float
    remaining_l: float
    facts: BatchFacts


@dataclass(frozen=True)
class Demand:
    """One scheduled (not cancelled) lab session: id, date, destination, titrant and litres needed."""

    session_id: int
    on: dt.date
    course: str
    section: str
    room: str
    reagent: str
    nominal_molarity: float
    volume_l: float


@dataclass(frozen=True)
class Draw:
    """Litres a session is planned to take from one batch."""

    code: str
    volume_l: float


@dataclass(frozen=True)
class SessionLine:
    """One session in the plan: litres in force before it draws, what it draws, and what it lacks (L)."""

    demand: Demand
    in_force_l: float
    draws: tuple[Draw, ...]
    short_l: float

    @property
    def covered(self) -> bool:
        return self.short_l <= EPSILON_L


@dataclass(frozen=True)
class TitrantPlan:
    """One titrant's plan over the window.

    in_force_now_l: litres usable today; pending_l: litres in batches still awaiting standardization
    (not counted: they are not in force until released); earlier_demand_l: litres sessions between
    today and the window's start take first; shortfall_on: the first session date that lacks volume
    (None: enough); short_by_l: litres lacking over the whole plan; make_by: the shortfall date less
    the lead time; late: make_by is before today.
    """

    reagent: str
    nominal_molarity: float
    lines: tuple[SessionLine, ...]
    in_force_now_l: float
    pending_l: float
    demand_l: float
    earlier_demand_l: float
    shortfall_on: dt.date | None
    short_by_l: float
    make_by: dt.date | None
    late: bool
    # At the shortfall date, the batches that still hold solution but cannot be drawn on, in words.
    unusable: tuple[str, ...] = ()

    @property
    def short(self) -> bool:
        return self.shortfall_on is not None


@dataclass(frozen=True)
class Plan:
    """The prep plan: the window, the day it was made, the lead time (days) and each titrant's plan."""

    start: dt.date
    end: dt.date
    today: dt.date
    lead_days: int
    titrants: tuple[TitrantPlan, ...] = field(default_factory=tuple)

    def low_stock(self, notice_days: int = 0) -> tuple[TitrantPlan, ...]:
        """Titrants whose first shortfall falls within the lead time (plus notice_days) of today."""
        horizon = self.today + dt.timedelta(days=self.lead_days + max(0, notice_days))
        return tuple(t for t in self.titrants if t.shortfall_on is not None and t.shortfall_on <= horizon)


def usable_on(facts: BatchFacts, on: dt.date) -> dt.date | None:
    """The expiry of the release a batch could be drawn from on a date, or None when it cannot be.

    Usable means in service that day (policy.status_on) and not under a recall's review.
    """
    report = status_on(facts, on)
    if report.status is not Status.IN_SERVICE or report.under_review is not None or report.release is None:
        return None
    return report.release.expires_on


def plan(
    supplies: Iterable[Supply],
    demands: Iterable[Demand],
    *,
    today: dt.date,
    start: dt.date,
    end: dt.date,
    lead_days: int,
) -> Plan:
    """The prep plan for sessions dated start..end, drawn on the supplies from today on.

    supplies: every batch that might serve (remaining litres as of today); demands: scheduled sessions
    (those before today are ignored: what they took is already in the batches' remaining volume);
    today, start, end: dates; lead_days: preparation plus standardization days.
    """
    by_key: dict[tuple[str, float], list[Supply]] = {}
    for s in supplies:
        by_key.setdefault(titrant_key(s.reagent, s.nominal_molarity), []).append(s)
    wanted: dict[tuple[str, float], list[Demand]] = {}
    for d in demands:
        if today <= d.on <= end:
            wanted.setdefault(titrant_key(d.reagent, d.nominal_molarity), []).append(d)
    out = [
        _titrant_plan(key, by_key.get(key, []), sorted(ds, key=lambda d: (d.on, d.session_id)), today, start, lead_days)
        for key, ds in sorted(wanted.items(), key=lambda kv: (kv[0][0].lower(), kv[0][1]))
    ]
    return Plan(start=start, end=end, today=today, lead_days=lead_days, titrants=tuple(out))


def _titrant_plan(
    key: tuple[str, float], supplies: Sequence[Supply], demands: Sequence[Demand], today: dt.date, start: dt.date, lead_days: int
) -> TitrantPlan:
    left = {s.code: max(0.0, s.remaining_l) for s in supplies}
    expiry_cache: dict[tuple[str, dt.date], dt.date | None] = {}

    def usable(s: Supply, on: dt.date) -> dt.date | None:
        k = (s.code, on)
        if k not in expiry_cache:
            expiry_cache[k] = usable_on(s.facts, on)
        return expiry_cache[k]

    in_force_now = sum(left[s.code] for s in supplies if usable(s, today) is not None)
    pending = sum(left[s.code] for s in supplies if status_on(s.facts, today).status is Status.AWAITING)
    lines: list[SessionLine] = []
    shortfall_on: dt.date | None = None
    short_total = 0.0
    earlier = 0.0
    for d in demands:
        # First expiry first; a batch with nothing left is passed over.
        order = sorted(
            ((exp, s.code) for s in supplies if (exp := usable(s, d.on)) is not None and left[s.code] > EPSILON_L),
        )
        available = sum(left[code] for _, code in order)
        need = d.volume_l
        draws: list[Draw] = []
        for _, code in order:
            if need <= EPSILON_L:
                break
            take = min(left[code], need)
            left[code] -= take
            need -= take
            draws.append(Draw(code, take))
        short = need if need > EPSILON_L else 0.0
        if short and shortfall_on is None:
            shortfall_on = d.on
        short_total += short
        if d.on < start:
            earlier += d.volume_l
            continue
        lines.append(SessionLine(demand=d, in_force_l=available, draws=tuple(draws), short_l=short))
    make_by = shortfall_on - dt.timedelta(days=lead_days) if shortfall_on is not None else None
    unusable: list[str] = []
    if shortfall_on is not None:
        # What still holds solution on the shortfall date but cannot be drawn on, so a person sees whether a
        # re-check (rather than a new batch) would close the gap.
        for s in supplies:
            if left[s.code] > EPSILON_L and usable(s, shortfall_on) is None:
                report = status_on(s.facts, shortfall_on)
                why = report.status.label.lower() if report.under_review is None else "under review"
                unusable.append(f"{s.code}: {left[s.code]:.2f} L left, {why} on {shortfall_on.isoformat()}")
    return TitrantPlan(
        reagent=key[0],
        nominal_molarity=key[1],
        lines=tuple(lines),
        in_force_now_l=in_force_now,
        pending_l=pending,
        demand_l=sum(line.demand.volume_l for line in lines),
        earlier_demand_l=earlier,
        shortfall_on=shortfall_on,
        short_by_l=short_total,
        make_by=make_by,
        late=make_by is not None and make_by < today,
        unusable=tuple(unusable),
    )
