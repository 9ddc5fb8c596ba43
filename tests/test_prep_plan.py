"""The prep plan's arithmetic on invented cases, figures worked by hand (litres add and subtract exactly).

First-expiry, first-out drawing is common practice in stock rooms; the status rules are stockroom's
policy.status_on (a batch is usable on a day only when it is in service that day).
"""

from __future__ import annotations

import datetime as dt

import pytest

from stockroom import prep_plan
from stockroom.policy import BatchFacts, CheckFact, ReleaseFact, ReviewFact

D = dt.date


def _release(rid: int, on: dt.date, expires: dt.date, interval: int = 180) -> ReleaseFact:
    return ReleaseFact(rid, on, expires, 0.1003, 0.0001, 0.0002, 2.0, interval, 0.005)


def _supply(code: str, remaining: float, facts: BatchFacts, reagent: str = "NaOH", nominal: float = 0.1) -> prep_plan.Supply:
    return prep_plan.Supply(code, reagent, nominal, remaining, facts)


def _demand(sid: int, on: dt.date, litres: float, reagent: str = "NaOH", nominal: float = 0.1) -> prep_plan.Demand:
    return prep_plan.Demand(sid, on, "CHM 110", "A", "214", reagent, nominal, litres)


A = BatchFacts(prepared_on=D(2026, 1, 2), releases=(_release(1, D(2026, 1, 5), D(2026, 3, 1)),))
B = BatchFacts(prepared_on=D(2026, 1, 8), releases=(_release(2, D(2026, 1, 10), D(2026, 6, 1)),))
TODAY = D(2026, 1, 12)


def _four_sessions() -> list[prep_plan.Demand]:
    return [
        _demand(1, D(2026, 1, 20), 4.0),
        _demand(2, D(2026, 2, 10), 4.0),
        _demand(3, D(2026, 3, 5), 4.0),
        _demand(4, D(2026, 3, 20), 3.0),
    ]


def test_first_expiry_first_out_then_expiry_then_shortfall():
    # A (10 L, expires 2026-03-01) serves the first two sessions: 10 - 4 - 4 = 2 L, then expires;
    # B (5 L) serves 2026-03-05: 5 - 4 = 1 L; 2026-03-20 needs 3 L and finds 1 L: short by 2 L.
    p = prep_plan.plan(
        [_supply("A", 10.0, A), _supply("B", 5.0, B)], _four_sessions(), today=TODAY, start=TODAY, end=D(2026, 4, 30), lead_days=5
    )
    (t,) = p.titrants
    assert (t.reagent, t.nominal_molarity) == ("NaOH", 0.1)
    assert [line.in_force_l for line in t.lines] == pytest.approx([15.0, 11.0, 5.0, 1.0])
    assert [[(d.code, d.volume_l) for d in line.draws] for line in t.lines] == [
        [("A", 4.0)],
        [("A", 4.0)],
        [("B", 4.0)],
        [("B", pytest.approx(1.0))],
    ]
    assert [line.short_l for line in t.lines] == pytest.approx([0.0, 0.0, 0.0, 2.0])
    assert t.in_force_now_l == pytest.approx(15.0)
    assert t.demand_l == pytest.approx(15.0)
    assert t.shortfall_on == D(2026, 3, 20)
    assert t.short_by_l == pytest.approx(2.0)
    assert t.make_by == D(2026, 3, 15)  # 2026-03-20 less 5 days of lead time
    assert not t.late


def test_a_batch_is_in_force_on_its_expiry_day_and_not_after():
    # policy.status_on: expired only when the date is after expires_on.
    on_day = prep_plan.plan(
        [_supply("A", 1.0, A)], [_demand(1, D(2026, 3, 1), 1.0)], today=TODAY, start=TODAY, end=D(2026, 3, 2), lead_days=0
    )
    after = prep_plan.plan(
        [_supply("A", 1.0, A)], [_demand(1, D(2026, 3, 2), 1.0)], today=TODAY, start=TODAY, end=D(2026, 3, 2), lead_days=0
    )
    assert on_day.titrants[0].shortfall_on is None
    assert after.titrants[0].shortfall_on == D(2026, 3, 2)
    assert after.titrants[0].lines[0].in_force_l == 0.0


def test_a_batch_due_for_recheck_does_not_count():
    # Re-check interval 30 days from 2026-01-05: due 2026-02-04, so on 2026-02-10 the batch is not in service.
    due = BatchFacts(prepared_on=D(2026, 1, 2), releases=(_release(1, D(2026, 1, 5), D(2026, 6, 1), interval=30),))
    p = prep_plan.plan(
        [_supply("C", 8.0, due)], [_demand(1, D(2026, 2, 10), 1.0)], today=TODAY, start=TODAY, end=D(2026, 3, 1), lead_days=3
    )
    t = p.titrants[0]
    assert t.in_force_now_l == pytest.approx(8.0)
    assert t.shortfall_on == D(2026, 2, 10) and t.short_by_l == pytest.approx(1.0)
    assert t.make_by == D(2026, 2, 7)
    assert t.unusable == ("C: 8.00 L left, re-check due on 2026-02-10",)
    # A re-check on 2026-02-01 within tolerance keeps it in service past 2026-02-10 (next due 2026-03-03).
    checked = BatchFacts(prepared_on=due.prepared_on, releases=due.releases, rechecks=(CheckFact(D(2026, 2, 1), 0.1003, 0.0001),))
    p2 = prep_plan.plan(
        [_supply("C", 8.0, checked)], [_demand(1, D(2026, 2, 10), 1.0)], today=TODAY, start=TODAY, end=D(2026, 3, 1), lead_days=3
    )
    assert p2.titrants[0].shortfall_on is None


def test_a_batch_under_review_and_a_batch_awaiting_do_not_count():
    review = ReviewFact(recall_id=9, release_id=2, subject="lot X", suspect_from=D(2026, 1, 1), opened_on=D(2026, 1, 11))
    held = BatchFacts(prepared_on=B.prepared_on, releases=B.releases, reviews=(review,))
    waiting = BatchFacts(prepared_on=D(2026, 1, 11))
    p = prep_plan.plan(
        [_supply("B", 5.0, held), _supply("W", 12.0, waiting)],
        [_demand(1, D(2026, 1, 20), 1.0)],
        today=TODAY,
        start=TODAY,
        end=D(2026, 2, 1),
        lead_days=5,
    )
    t = p.titrants[0]
    assert t.in_force_now_l == 0.0
    assert t.pending_l == pytest.approx(12.0)
    assert t.shortfall_on == D(2026, 1, 20)
    assert t.make_by == D(2026, 1, 15)
    assert not t.late
    # With a lead time of 10 days the new batch should have been started on 2026-01-10, before today.
    assert (
        prep_plan.plan(
            [_supply("B", 5.0, held)],
            [_demand(1, D(2026, 1, 20), 1.0)],
            today=TODAY,
            start=TODAY,
            end=D(2026, 2, 1),
            lead_days=10,
        )
        .titrants[0]
        .late
    )


def test_titrants_are_planned_apart_and_past_sessions_are_ignored():
    hcl = BatchFacts(prepared_on=D(2026, 1, 2), releases=(_release(3, D(2026, 1, 5), D(2026, 6, 1)),))
    supplies = [_supply("A", 10.0, A), _supply("H", 2.0, hcl, reagent="HCl")]
    demands = [
        _demand(1, D(2026, 1, 10), 50.0),  # before today: already dispensed, not demand
        _demand(2, D(2026, 1, 20), 3.0),
        _demand(3, D(2026, 1, 21), 2.5, reagent="HCl"),
        _demand(4, D(2026, 1, 22), 1.0, nominal=0.5),  # 0.5 mol/L NaOH: no batch at all
    ]
    p = prep_plan.plan(supplies, demands, today=TODAY, start=TODAY, end=D(2026, 2, 28), lead_days=2)
    keys = [(t.reagent, t.nominal_molarity) for t in p.titrants]
    assert keys == [("HCl", 0.1), ("NaOH", 0.1), ("NaOH", 0.5)]
    hcl_plan, naoh, strong = p.titrants
    assert hcl_plan.shortfall_on == D(2026, 1, 21) and hcl_plan.short_by_l == pytest.approx(0.5)
    assert naoh.shortfall_on is None and naoh.lines[0].in_force_l == pytest.approx(10.0)
    assert strong.in_force_now_l == 0.0 and strong.shortfall_on == D(2026, 1, 22)
    # Low stock: shortfalls within the lead time (2 days: up to 2026-01-14) plus the notice days.
    assert p.low_stock(0) == ()
    assert p.low_stock(6) == ()  # horizon 2026-01-20
    assert [t.reagent for t in p.low_stock(7)] == ["HCl"]  # horizon 2026-01-21 reaches the HCl shortfall only
    assert [(t.reagent, t.nominal_molarity) for t in p.low_stock(8)] == [("HCl", 0.1), ("NaOH", 0.5)]


def test_sessions_before_the_window_draw_first_but_are_not_listed():
    p = prep_plan.plan(
        [_supply("A", 10.0, A)],
        [_demand(1, D(2026, 1, 15), 6.0), _demand(2, D(2026, 2, 2), 6.0)],
        today=TODAY,
        start=D(2026, 2, 1),
        end=D(2026, 2, 28),
        lead_days=4,
    )
    t = p.titrants[0]
    assert t.earlier_demand_l == pytest.approx(6.0)
    assert len(t.lines) == 1 and t.lines[0].in_force_l == pytest.approx(4.0)
    assert t.lines[0].short_l == pytest.approx(2.0)
    assert t.shortfall_on == D(2026, 2, 2) and t.make_by == D(2026, 1, 29)
