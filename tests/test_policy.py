"""Status of a batch as a pure function of its facts and a date."""

from __future__ import annotations

import datetime as dt

from hypothesis import given
from hypothesis import strategies as st

from stockroom.policy import (
    DEFAULT_POLICIES,
    BatchFacts,
    CheckFact,
    ReleaseFact,
    Status,
    expiry_for,
    release_in_force,
    status_on,
)

D0 = dt.date(2026, 3, 1)


def day(n: int) -> dt.date:
    return D0 + dt.timedelta(days=n)


def release(n: int, molarity: float = 0.1002, rid: int = 1, expires: int = 90, interval: int = 14,
            tol: float = 0.005) -> ReleaseFact:
    return ReleaseFact(id=rid, released_on=day(n), expires_on=day(expires), molarity=molarity, u=0.00005,
                       U=0.0001, k=2.0, recheck_interval_days=interval, tolerance_rel=tol)


def test_awaiting_until_first_release():
    facts = BatchFacts(prepared_on=day(0), releases=(release(2),))
    assert status_on(facts, day(0)).status is Status.AWAITING
    assert status_on(facts, day(1)).status is Status.AWAITING
    assert status_on(facts, day(2)).status is Status.IN_SERVICE


def test_recheck_due_after_interval_counted_from_last_check():
    facts = BatchFacts(prepared_on=day(0), releases=(release(1, interval=14),),
                       rechecks=(CheckFact(day(10), 0.1001, 0.00005),))
    assert status_on(facts, day(14)).status is Status.IN_SERVICE  # last check day 10, due day 24
    report = status_on(facts, day(24))
    assert report.status is Status.RECHECK_DUE and report.next_check_due == day(24)
    assert "due today" in report.reasons[0]
    assert "overdue by 3 day" in status_on(facts, day(27)).reasons[0]


def test_drifting_when_recheck_leaves_the_band():
    # 0.1002 certified, tolerance 0.5 %: 0.09969 is -0.509 %, outside; 0.09971 is -0.489 %, inside.
    inside = BatchFacts(prepared_on=day(0), releases=(release(1),), rechecks=(CheckFact(day(8), 0.09971, 5e-5),))
    outside = BatchFacts(prepared_on=day(0), releases=(release(1),), rechecks=(CheckFact(day(8), 0.09969, 5e-5),))
    assert status_on(inside, day(9)).status is Status.IN_SERVICE
    report = status_on(outside, day(9))
    assert report.status is Status.DRIFTING
    assert "-0.51 %" in report.reasons[0]
    # Before that re-check was made, the batch was not known to drift.
    assert status_on(outside, day(7)).status is Status.IN_SERVICE


def test_expiry_and_withdrawal_take_precedence():
    facts = BatchFacts(prepared_on=day(0), releases=(release(1, expires=30, interval=60),))
    assert status_on(facts, day(30)).status is Status.IN_SERVICE  # valid through its expiry date
    assert status_on(facts, day(31)).status is Status.EXPIRED
    withdrawn = BatchFacts(prepared_on=day(0), releases=(release(1),), withdrawn_on=day(5))
    assert status_on(withdrawn, day(4)).status is Status.IN_SERVICE
    assert status_on(withdrawn, day(5)).status is Status.WITHDRAWN


def test_later_release_supersedes_earlier():
    facts = BatchFacts(prepared_on=day(0), releases=(release(1, 0.1002, rid=1), release(20, 0.0998, rid=2)))
    assert release_in_force(facts, day(10)).molarity == 0.1002
    assert release_in_force(facts, day(20)).molarity == 0.0998


def test_expiry_counts_shelf_life_from_preparation():
    naoh = next(p for p in DEFAULT_POLICIES if p.reagent == "NaOH")
    hcl = next(p for p in DEFAULT_POLICIES if p.reagent == "HCl")
    assert expiry_for(day(3), naoh, prepared_on=day(0)) == day(naoh.shelf_life_days)
    # Common practice (see policy.py): NaOH is kept a shorter time and re-checked more often than HCl.
    assert naoh.shelf_life_days < hcl.shelf_life_days
    assert naoh.recheck_interval_days < hcl.recheck_interval_days


days = st.integers(min_value=-50, max_value=200)


@given(rel=days, exp_after=st.integers(1, 150), withdraw=st.one_of(st.none(), days), on=days)
def test_never_in_force_before_release_after_expiry_or_after_withdrawal(rel, exp_after, withdraw, on):
    facts = BatchFacts(prepared_on=day(-60), releases=(release(rel, expires=rel + exp_after),),
                       withdrawn_on=day(withdraw) if withdraw is not None else None)
    in_force = release_in_force(facts, day(on))
    if on < rel or on > rel + exp_after or (withdraw is not None and withdraw <= on):
        assert in_force is None
    else:
        assert in_force is not None


@given(offset=st.floats(-0.0049, 0.0049), check_day=st.integers(2, 13))
def test_a_recheck_inside_the_band_never_flags(offset, check_day):
    facts = BatchFacts(prepared_on=day(0), releases=(release(1),),
                       rechecks=(CheckFact(day(check_day), 0.1002 * (1 + offset), 5e-5),))
    assert status_on(facts, day(check_day)).status is Status.IN_SERVICE
