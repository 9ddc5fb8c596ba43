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


def release(
    n: int, molarity: float = 0.1002, rid: int = 1, expires: int = 90, interval: int = 14, tol: float = 0.005
) -> ReleaseFact:
    return ReleaseFact(
        id=rid,
        released_on=day(n),
        expires_on=day(expires),
        molarity=molarity,
        u=0.00005,
        U=0.0001,
        k=2.0,
        recheck_interval_days=interval,
        tolerance_rel=tol,
    )


def test_awaiting_until_first_release():
    facts = BatchFacts(prepared_on=day(0), releases=(release(2),))
    assert status_on(facts, day(0)).status is Status.AWAITING
    assert status_on(facts, day(1)).status is Status.AWAITING
    assert status_on(facts, day(2)).status is Status.IN_SERVICE


def test_recheck_due_after_interval_counted_from_last_check():
    facts = BatchFacts(prepared_on=day(0), releases=(release(1, interval=14),), rechecks=(CheckFact(day(10), 0.1001, 0.00005),))
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
    facts = BatchFacts(
        prepared_on=day(-60),
        releases=(release(rel, expires=rel + exp_after),),
        withdrawn_on=day(withdraw) if withdraw is not None else None,
    )
    in_force = release_in_force(facts, day(on))
    if on < rel or on > rel + exp_after or (withdraw is not None and withdraw <= on):
        assert in_force is None
    else:
        assert in_force is not None


@given(offset=st.floats(-0.0049, 0.0049), check_day=st.integers(2, 13))
def test_a_recheck_inside_the_band_never_flags(offset, check_day):
    facts = BatchFacts(
        prepared_on=day(0), releases=(release(1),), rechecks=(CheckFact(day(check_day), 0.1002 * (1 + offset), 5e-5),)
    )
    assert status_on(facts, day(check_day)).status is Status.IN_SERVICE


# ---------------------------------------------------------------- drift in the status (stockroom.drift)

from stockroom.drift import FlagKind  # noqa: E402


def drifting_facts(rel_per_day: float = -1.2e-4, days=(7, 14), expires: int = 90, interval: int = 14) -> BatchFacts:
    """A release on day 0 and re-checks lying exactly on 0.1002·(1 + rel_per_day·t) (invented)."""
    c0 = 0.1002
    return BatchFacts(
        prepared_on=day(-1),
        releases=(release(0, c0, expires=expires, interval=interval),),
        rechecks=tuple(CheckFact(day(d), c0 * (1 + rel_per_day * d), 5e-5) for d in days),
    )


def test_forecast_is_shown_but_does_not_change_the_status_before_its_date():
    # Exact line -0.012 %/day: leaves the ±0.5 % band after 0.005/1.2e-4 = 41.7 days (hand computation).
    facts = drifting_facts()
    report = status_on(facts, day(20))
    assert report.status is Status.IN_SERVICE
    assert report.forecast is not None and report.forecast.date == day(42)
    assert "expected to leave tolerance on 2026-04-12" in report.remarks[0]  # 2026-03-01 + 42 days
    assert report.reasons == ()


def test_predicted_value_outside_the_band_makes_it_drifting_once_that_day_comes():
    facts = drifting_facts(interval=60)
    assert status_on(facts, day(41)).status is Status.IN_SERVICE
    report = status_on(facts, day(42))
    assert report.status is Status.DRIFTING
    assert report.flags[0].kind is FlagKind.PREDICTED_OUTSIDE
    assert f"predicted {0.1002 * (1 - 1.2e-4 * 42):.5f} mol/L on 2026-04-12" in report.reasons[0]


def test_a_recheck_outside_keeps_its_own_reason_first():
    facts = BatchFacts(
        prepared_on=day(0),
        releases=(release(1),),
        rechecks=(CheckFact(day(5), 0.1001, 5e-5), CheckFact(day(9), 0.1000, 5e-5), CheckFact(day(13), 0.09960, 5e-5)),
    )
    report = status_on(facts, day(13))
    assert report.status is Status.DRIFTING
    assert report.reasons[0].startswith("re-check on 2026-03-14 differs")
    assert [f.kind for f in report.flags] == [FlagKind.RECHECK_OUTSIDE]


def test_status_keeps_the_drift_report_of_the_release():
    facts = drifting_facts(days=(7, 14, 21))
    report = status_on(facts, day(22))
    assert report.drift is not None and report.drift.fit is not None and report.drift.fit.n == 4
    assert report.drift.band.certified == 0.1002


checks_inside = st.lists(st.tuples(st.integers(1, 80), st.floats(-0.0049, 0.0049)), min_size=0, max_size=6)


@given(history=checks_inside, new_day=st.integers(1, 89), new_offset=st.floats(-0.0049, 0.0049))
def test_adding_a_recheck_inside_the_band_never_raises_a_flag_that_day(history, new_day, new_offset):
    # Any history of re-checks inside the band, then one more inside the band, looked at on its own day.
    # The re-check's own value decides that day: no tolerance flag, no re-check due, the batch in service.
    # Only a forecast ("expected to leave tolerance on D") may appear: a run of in-band re-checks trending
    # towards an edge is exactly what it is there to announce.
    c0 = 0.1002
    before = tuple(CheckFact(day(d), c0 * (1 + e), 5e-5) for d, e in history if d < new_day)
    base = BatchFacts(prepared_on=day(0), releases=(release(0, c0, expires=90),), rechecks=before)
    added = BatchFacts(
        prepared_on=day(0), releases=base.releases, rechecks=before + (CheckFact(day(new_day), c0 * (1 + new_offset), 5e-5),)
    )
    old, new = status_on(base, day(new_day)), status_on(added, day(new_day))
    raised = {f.kind for f in new.flags} - {f.kind for f in old.flags}
    assert raised <= {FlagKind.EXPECTED_TO_LEAVE}
    assert new.status is Status.IN_SERVICE
    if len(added.rechecks) < 2:  # fewer than 3 points: no trend, so nothing at all can be raised
        assert new.flags == ()
