"""The lab-day look-up and the class-data correction: composition, numbers, JSON, pages, sheet and records."""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import io
import json
import re

import pytest
from hypothesis import given
from hypothesis import strategies as st
from pypdf import PdfReader

from stockroom import accounts, create_app, labday
from stockroom import db as dbmod
from stockroom.demo import build_demo
from stockroom.errors import InvalidInput
from stockroom.policy import BatchFacts, CheckFact, ReleaseFact, ReviewFact, Status, known_by, status_on

D0 = dt.date(2026, 3, 1)


def day(n: int) -> dt.date:
    return D0 + dt.timedelta(days=n)


def rel(n: int, molarity: float = 0.1002, rid: int = 1, expires: int = 90, interval: int = 14) -> ReleaseFact:
    return ReleaseFact(
        id=rid,
        released_on=day(n),
        expires_on=day(expires),
        molarity=molarity,
        u=5e-5,
        U=1e-4,
        k=2.0,
        recheck_interval_days=interval,
        tolerance_rel=0.005,
    )


def record(code="NAOH-2603-01", reagent="NaOH", nominal=0.1, **facts) -> labday.BatchRecord:
    facts.setdefault("prepared_on", day(-1))
    return labday.BatchRecord(code=code, reagent=reagent, nominal_molarity=nominal, facts=BatchFacts(**facts), id=1)


# ---------------------------------------------------------------- in force

days = st.integers(-30, 200)


@given(
    first=st.integers(0, 60),
    second=st.one_of(st.none(), st.integers(1, 80)),
    life=st.integers(10, 150),
    withdraw=st.one_of(st.none(), days),
    on=days,
)
def test_a_batch_is_never_in_force_before_release_after_expiry_or_after_withdrawal(first, second, life, withdraw, on):
    releases = [rel(first, 0.1002, rid=1, expires=first + life)]
    if second is not None:  # a re-standardization later supersedes the first release
        releases.append(rel(first + second, 0.1000, rid=2, expires=first + life))
    b = record(releases=tuple(releases), withdrawn_on=day(withdraw) if withdraw is not None else None)
    answer = labday.lab_day([b], day(on), day(on), "NaOH")
    made = [r for r in releases if r.released_on <= day(on)]
    if answer.entries:
        entry = answer.entries[0]
        assert entry.release.released_on <= day(on) <= entry.release.expires_on
        assert withdraw is None or day(on) < day(withdraw)
        assert entry.release == max(made, key=lambda r: r.released_on)  # never a superseded release
    else:
        assert (
            not made
            or day(on) > max(made, key=lambda r: r.released_on).expires_on
            or (withdraw is not None and day(withdraw) <= day(on))
        )
        assert answer.reason.startswith(f"No NaOH batch was in force on {day(on).isoformat()}.")


def test_empty_day_says_why_in_plain_words():
    b = record(releases=(rel(2, expires=30),), withdrawn_on=None)
    assert labday.lab_day([b], day(1), day(1), "NaOH").reason == (
        "No NaOH batch was in force on 2026-03-02. NAOH-2603-01 was not yet standardized (first released 2026-03-03)."
    )
    assert labday.lab_day([b], day(31), day(31), "NaOH").detail == "NAOH-2603-01 had expired on 2026-03-31."
    gone = record(releases=(rel(2),), withdrawn_on=day(5))
    assert labday.lab_day([gone], day(6), day(6), "NaOH").detail == "NAOH-2603-01 had been withdrawn on 2026-03-06."
    assert labday.lab_day([gone], day(-5), day(6), "NaOH").detail == "NAOH-2603-01 was prepared later, on 2026-02-28."
    assert labday.lab_day([], day(6), day(6), "HCl").reason == (
        "No HCl batch was in force on 2026-03-07. None is recorded for HCl."
    )


def test_bench_temperature_value_follows_the_linear_expansion_model():
    # EURACHEM/CITAC QUAM:2012: c(T) = c(20 °C)·[1 − α(T − 20)], α = 2.1e-4 /K, when α is given.
    # 0.1002 · (1 − 2.1e-4 · 3) = 0.1002 · 0.99937 = 0.100136874 (hand computation).
    b = record(releases=(rel(0),))
    entry = labday.lab_day([b], day(3), day(3), "NaOH", bench_temperature_c=23, alpha_per_k=2.1e-4).entries[0]
    assert entry.molarity_at_bench == pytest.approx(0.100136874, rel=1e-12)


def test_bench_temperature_value_follows_the_titrants_density_by_default():
    # A 0.1 mol/L titrant expands as pure water does (corrections.DILUTE_LIMIT_MOL_L): c(T) = c(20)·ρ(T)/ρ(20).
    # Tanaka et al., Metrologia 38 (2001) 301, Table: ρ(20 °C) = 998.2067 kg/m³, ρ(25 °C) = 997.0470 kg/m³
    # (7 figures, hence rel 2e-7).
    b = record(releases=(rel(0),))
    entry = labday.lab_day([b], day(3), day(3), "NaOH", bench_temperature_c=25).entries[0]
    assert entry.molarity_at_bench == pytest.approx(0.1002 * 997.0470 / 998.2067, rel=2e-7)
    # Water expands by 2.32e-4 /K on average between 20 and 25 °C, not QUAM's 2.1e-4: at 25 °C the two
    # answers differ by 1.1e-4 relative (0.1002·(1 − 5·2.1e-4) = 0.100094790, hand computation).
    assert entry.molarity_at_bench / 0.100094790 - 1 == pytest.approx(-1.1e-4, abs=0.1e-4)
    with pytest.raises(InvalidInput) as err:
        labday.lab_day([record(releases=(rel(0),))], day(3), day(3), "NaOH", bench_temperature_c=41)
    assert err.value.errors[0].field == "bench_temperature_c"


def test_a_past_days_trend_uses_the_standardizations_up_to_that_day_and_later_ones_are_learnt_later():
    # Invented: flat for three weeks, then two re-checks far below. On day 30 nothing showed a trend;
    # read on day 46, the two later re-checks are beyond ±0.5 % and the line through all five puts
    # day 30 at about -0.64 % (weighted fit by drift.fit_line).
    c0 = 0.1002
    checks = tuple(CheckFact(day(d), c0 * (1 + e), 5e-5) for d, e in ((10, -0.0003), (20, -0.0001), (40, -0.0100), (45, -0.0115)))
    b = record(releases=(rel(0, c0, interval=60),), rechecks=checks)
    then = labday.lab_day([b], day(30), day(30), "NaOH").entries[0]
    later = labday.lab_day([b], day(30), day(46), "NaOH").entries[0]
    assert then.fit.n == 3 and not then.fit.significant and then.flags == () and then.hold is None
    assert then.use_molarity == c0 and then.learnt_later == ()
    # Read later, the trend is still the one of the day (3 standardizations up to day 30) ...
    assert later.fit.n == 3 and later.trend_through == day(30) and later.prediction == then.prediction
    assert later.status.status is Status.IN_SERVICE  # as it stood that day
    # ... and what came after is named with its date, and puts the day on hold.
    kinds = [(item.on, item.kind) for item in later.learnt_later]
    assert kinds == [
        (day(40), labday.Later.RECHECK_OUTSIDE),
        (day(45), labday.Later.RECHECK_OUTSIDE),
        (day(45), labday.Later.TREND_OUTSIDE),
    ]
    assert later.learnt_later[0].what == (
        "a re-check on 2026-04-10 found 0.09920 mol/L, -1.00 % from the certified value (tolerance ±0.50 %)"
    )
    trend = later.learnt_later[2].what
    assert trend.startswith("the trend through the 5 standardizations up to 2026-04-15 puts 2026-03-31 at 0.099")
    assert float(re.search(r"\(([-+]\d\.\d\d) %", trend).group(1)) == pytest.approx(-0.64, abs=0.02)
    assert later.use_molarity is None and later.hold.startswith("A re-check on 2026-04-10 found 0.09920 mol/L")
    assert later.advice.startswith("On hold: no value of this batch is to be used")


def test_future_day_is_marked_and_extrapolated_from_what_is_known_today():
    b = record(releases=(rel(0),), rechecks=(CheckFact(day(7), 0.1001, 5e-5), CheckFact(day(14), 0.1000, 5e-5)))
    answer = labday.lab_day([b], day(30), day(15), "NaOH")
    entry = answer.entries[0]
    assert answer.future and not answer.past and entry.known_on == day(15) and entry.trend_through == day(15)
    assert entry.fit.n == 3 and entry.prediction.on == day(30) and entry.learnt_later == ()


# ---------------------------------------------------------------- hold and hindsight, as tables of facts


def review(opened: int, cleared: int | None = None, rid: int = 1) -> ReviewFact:
    return ReviewFact(
        recall_id=7,
        release_id=rid,
        subject="primary-standard lot STD-KHP-009 (invented)",
        suspect_from=day(-10),
        opened_on=day(opened),
        cleared_on=day(cleared) if cleared is not None else None,
    )


OUT = 0.1002 * 0.99  # -1.00 % from 0.1002: beyond ±0.5 %
IN = 0.1002 * 0.999  # -0.10 %: inside

# (name, facts, lab day, read on, hold starts with (None: no hold), learnt later as (day, kind)).
# Invented scenarios; the rule is the module's (labday.standing): beyond tolerance that day, an open
# recall review, or a later re-check of the same release beyond tolerance put a batch on hold.
HOLD_TABLE = [
    ("clean", {}, 20, 20, None, []),
    ("clean read later", {"rechecks": (CheckFact(day(14), IN, 5e-5),)}, 10, 30, None, []),
    (
        "re-check out before the day",
        {"rechecks": (CheckFact(day(14), OUT, 5e-5),)},
        20,
        20,
        "Beyond tolerance: re-check on 2026-03-15",
        [],
    ),
    ("re-check out after the day, read that day", {"rechecks": (CheckFact(day(14), OUT, 5e-5),)}, 10, 10, None, []),
    (
        "re-check out after the day, read today",
        {"rechecks": (CheckFact(day(14), OUT, 5e-5),)},
        10,
        30,
        "A re-check on 2026-03-15 found 0.09920 mol/L",
        [(14, labday.Later.RECHECK_OUTSIDE)],
    ),
    (
        "withdrawn a week later",
        {"withdrawn_on": day(17)},
        10,
        30,
        None,
        [(17, labday.Later.WITHDRAWN)],
    ),
    ("review open that day", {"reviews": (review(5),)}, 10, 10, "Under recall review since 2026-03-06", []),
    ("review opened later, read that day", {"reviews": (review(15),)}, 10, 10, None, []),
    (
        "review opened later, read today",
        {"reviews": (review(15),)},
        10,
        30,
        "Under recall review since 2026-03-16",
        [(15, labday.Later.UNDER_REVIEW)],
    ),
    ("review cleared later, read that day", {"reviews": (review(5, cleared=15),)}, 10, 10, "Under recall review since", []),
    (
        "review cleared later, read today",
        {"reviews": (review(5, cleared=15),)},
        10,
        30,
        None,
        [(15, labday.Later.REVIEW_CLEARED)],
    ),
    ("review of another release", {"reviews": (review(5, rid=99),)}, 10, 30, None, []),
    (
        "re-check out under a later release does not cover the day",
        {"releases": (rel(0), rel(12, 0.1000, rid=2)), "rechecks": (CheckFact(day(14), 0.1000 * 0.99, 5e-5),)},
        10,
        30,
        None,
        [],
    ),
]


@pytest.mark.parametrize("name,facts,on,read,hold,later", HOLD_TABLE, ids=[row[0] for row in HOLD_TABLE])
def test_hold_and_what_was_learnt_later(name, facts, on, read, hold, later):
    facts = {"releases": (rel(0, interval=60),), **facts}
    entry = labday.lab_day([record(**facts)], day(on), day(read), "NaOH").entries[0]
    if hold is None:
        assert entry.hold is None and entry.use_molarity == entry.release.molarity
    else:
        assert entry.hold.startswith(hold) and entry.use_molarity is None
    assert [(item.on, item.kind) for item in entry.learnt_later] == [(day(d), k) for d, k in later]
    # "As known that day" is the same function with the day as the cut-off: nothing learnt later.
    assert entry.that_day == labday.standing(entry.batch, day(on), day(on))
    assert entry.current == labday.standing(entry.batch, day(on), day(read))
    assert entry.that_day.later == ()


def test_a_withdrawal_learnt_later_is_named_with_its_date_and_reason():
    b = labday.BatchRecord(
        code="NAOH-2603-01",
        reagent="NaOH",
        nominal_molarity=0.1,
        facts=BatchFacts(prepared_on=day(-1), releases=(rel(0),), withdrawn_on=day(17)),
        withdrawal_reason="diluted in error (invented)",
    )
    entry = labday.lab_day([b], day(10), day(30), "NaOH").entries[0]
    assert entry.later_plain == ("Withdrawn on 2026-03-18: diluted in error (invented).",)
    assert entry.status.status is Status.IN_SERVICE and entry.hold is None
    assert entry.advice.startswith("Withdrawn after this day: ask the prep room whether its value still held on 2026-03-11")


@given(on=days, read=days, withdraw=st.one_of(st.none(), days), check=st.integers(1, 80), opened=st.integers(0, 120))
def test_the_day_as_it_stood_is_the_status_with_the_day_as_cut_off(on, read, withdraw, check, opened):
    facts = BatchFacts(
        prepared_on=day(-40),
        releases=(rel(0, interval=30),),
        rechecks=(CheckFact(day(check), OUT, 5e-5),),
        withdrawn_on=day(withdraw) if withdraw is not None else None,
        reviews=(review(opened),),
    )
    # policy.status_on ignores what is dated after the day, so cutting the facts at the day changes nothing.
    assert status_on(known_by(facts, day(on)), day(on)) == status_on(facts, day(on))
    # Reading later can only add to a day's answer, never take a day out of force.
    then = labday.lab_day([record(**facts.__dict__)], day(on), day(on), "NaOH")
    now = labday.lab_day([record(**facts.__dict__)], day(on), day(max(on, read)), "NaOH")
    assert [e.batch.code for e in then.entries] == [e.batch.code for e in now.entries]
    if now.entries and then.entries[0].hold is not None and then.entries[0].status.status is Status.DRIFTING:
        assert now.entries[0].hold is not None


def test_cautions_defer_to_the_chemical_hygiene_plan_and_name_strong_solutions():
    weak = labday.lab_day([record(releases=(rel(0),))], day(1), day(1), "NaOH")
    strong = labday.lab_day([record(nominal=1.0, releases=(rel(0, 0.998),))], day(1), day(1), "NaOH")
    assert "chemical hygiene plan" in labday.cautions(weak.entries)[-1]
    assert not any("NaOH 0.1 mol/L" in c for c in labday.cautions(weak.entries))
    assert any(c.startswith("NaOH 1 mol/L: at this strength") for c in labday.cautions(strong.entries))


# ---------------------------------------------------------------- class-data sheet

SHEET = """# invented class data, lab day 2026-12-01
group,aliquot_ml,titrant_ml,ratio,analyte_per_titrant,reported_molarity,notes
bench 1,25.00,24.62,1:1,,0.0985,
bench 2,10.00,19.84,2:1,,,sulfuric acid sample
bench 3,25.00,24.70,,1,0.1010,
"""


def test_class_results_are_recomputed_by_hand():
    sheet = labday.read_class_sheet(SHEET, 100)
    assert sheet.ok and [r.line for r in sheet.rows] == [3, 4, 5]
    assert sheet.rows[1].analyte_per_titrant == 0.5  # 2 mol titrant : 1 mol analyte
    results = labday.correct_class(sheet.rows, 0.10035, 0.1)
    # c_analyte = c_titrant · V_titrant · ratio / V_aliquot (hand computation):
    # bench 1: 0.10035 × 24.62 × 1 / 25.00 = 0.098824680; with 0.1 nominal 0.1 × 24.62 / 25.00 = 0.098480
    assert results[0].corrected == pytest.approx(0.09882468, rel=1e-12)
    assert results[0].with_nominal == pytest.approx(0.09848, rel=1e-12)
    # bench 2: 0.10035 × 19.84 × 0.5 / 10.00 = 0.09954720
    assert results[1].corrected == pytest.approx(0.0995472, rel=1e-12)
    # relative error of the nominal value: 0.1/0.10035 − 1 = −0.0034878 for every row
    assert all(r.relative_error == pytest.approx(0.1 / 0.10035 - 1, rel=1e-12) for r in results)
    # bench 1 reported 0.0985: (0.0985 − 0.09882468)/0.09882468 = −0.0032854
    assert results[0].reported_error == pytest.approx(-0.0032854, abs=1e-7)
    assert results[1].reported_error is None


def test_class_sheet_problems_are_reported_by_line():
    text = """group,aliquot_ml,titrant_ml,ratio,analyte_per_titrant
a,25,24,5,1:1,
b,25,"24,5",1:1,
c,25,24.5,,
d,25,24.5,1:1,1
e,25,24.5,01:02:00,
f,0,24.5,1:1,
"""
    sheet = labday.read_class_sheet(text, 100)
    problems = dict(sheet.problems)
    assert set(problems) == {2, 3, 4, 5, 6, 7}
    assert "has 6 cells" in problems[2]
    assert "use a point, not a comma" in problems[3]
    assert "stoichiometry is missing" in problems[4]
    assert "not both" in problems[5]
    assert "titrant:analyte" in problems[6] and "time" in problems[6]
    assert "aliquot_ml: must be above 0" in problems[7]
    assert not sheet.ok


def test_class_sheet_header_and_row_limits():
    assert "unknown column(s) 'volume'" in labday.read_class_sheet("group,volume\n", 10).problems[0][1]
    assert "ratio" in labday.read_class_sheet("group,aliquot_ml,titrant_ml\nx,1,1\n", 10).problems[0][1]
    many = "group,aliquot_ml,titrant_ml,ratio\n" + "g,25,20,1:1\n" * 11
    assert labday.read_class_sheet(many, 10).problems == ((0, "the file has 11 data rows; at most 10 are accepted"),)


def test_stored_rows_round_trip():
    rows = labday.read_class_sheet(SHEET, 100).rows
    assert labday.rows_from_csv(labday.rows_to_csv(rows)) == rows


# ---------------------------------------------------------------- over the demo: JSON, page, sheet, correction

TODAY = dt.date(2026, 12, 1)
PASSWORD = "violet kettle under the stairs"  # invented, for this test database only


@pytest.fixture(scope="module")
def demo_app(tmp_path_factory):
    path = tmp_path_factory.mktemp("labday") / "demo.db"
    saved = accounts.HASH_METHOD
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"  # cheap hashes for the demo users of this module
    try:
        build_demo(str(path), today=TODAY, password=PASSWORD)
    finally:
        accounts.HASH_METHOD = saved
    return create_app(
        {
            "DATABASE": str(path),
            "SECRET_KEY": "t",
            "TESTING": True,
            "LAB_TIMEZONE": "UTC",
            "WTF_CSRF_ENABLED": False,
            "CSV_MAX_ROWS": 50,
        }
    )


@pytest.fixture(scope="module")
def client(demo_app):
    return demo_app.test_client()


def signed_in(app, username):
    c = app.test_client()
    assert c.post("/sign-in", data={"username": username, "password": PASSWORD}).status_code == 303
    return c


def test_api_lists_batches_in_force_with_the_fields_asked_for(client):
    r = client.get(f"/api/v1/lab-day?date={TODAY}&titrant=NaOH&bench_temperature_c=23")
    assert r.status_code == 200
    body = r.get_json()
    assert body["date"] == "2026-12-01" and body["titrant"] == "NaOH" and body["reason"] is None
    assert [b["batch_id"] for b in body["batches"]] == ["NAOH-2610-01", "NAOH-2611-01"]
    drifting = body["batches"][0]
    for key in (
        "batch_id",
        "molarity",
        "U",
        "k",
        "released_on",
        "predicted_molarity",
        "prediction_interval",
        "flags",
        "molarity_at_bench",
    ):
        assert key in drifting
    assert drifting["U"] == pytest.approx(drifting["k"] * drifting["u"])  # GUM: U = k·u
    # Referred by the titrant's own model, water's density for dilute NaOH: c·ρ(23 °C)/ρ(20 °C), with
    # 997.5415 and 998.2071 kg/m3 (CRC Handbook water density table, from memory).
    assert drifting["molarity_at_bench"] == pytest.approx(drifting["molarity"] * 997.5415 / 998.2071, rel=1e-6)
    assert drifting["bench_referral_model"] == "water density (Tanaka 2001)"
    lo, hi = drifting["prediction_interval"]["low"], drifting["prediction_interval"]["high"]
    assert lo < drifting["predicted_molarity"] < hi < drifting["molarity"]  # drifted down, below certified
    assert drifting["status"] == "drifting" and drifting["flags"][0]["kind"] == "recheck_outside"
    assert drifting["trend"]["points"] == 5 and drifting["trend"]["significant"] is True
    # The 1 mol/L batch has one point: no trend, and its re-check is overdue by 6 days.
    one = body["batches"][1]
    assert one["predicted_molarity"] is None and "1 standardization so far" in one["trend_note"]
    assert one["flags"][0]["kind"] == "recheck_overdue"


def _dates_unwrapped(html: str) -> str:
    """The page with each date's no-break wrapper removed, to read its sentences as text."""
    return re.sub(r'<span class="nowrap">([^<]*)</span>', r"\1", html)


def test_api_every_batch_carries_use_molarity_and_hold(client):
    # The JSON contract (README, JSON API): use_molarity in mol/L or null, hold null or the reason in words.
    body = client.get(f"/api/v1/lab-day?date={TODAY}&titrant=NaOH&bench_temperature_c=23").get_json()
    held, ok = body["batches"]
    assert held["batch_id"] == "NAOH-2610-01" and held["use_molarity"] is None and held["use_temperature_c"] is None
    assert held["hold"] == (
        "Beyond tolerance: re-check on 2026-11-28 differs from the certified value by -0.69 % (tolerance ±0.50 %)."
    )
    # For reference only: the certified value, the latest re-check and the prediction stay in the answer.
    assert held["latest_recheck"]["on"] == "2026-11-28"
    assert held["latest_recheck"]["molarity"] / held["molarity"] - 1 == pytest.approx(-0.0069, abs=5e-5)
    assert held["latest_recheck"]["U"] == pytest.approx(2 * held["latest_recheck"]["u"])  # GUM: U = k·u, k = 2
    assert ok["hold"] is None and ok["use_molarity"] == ok["molarity_at_bench"] and ok["use_temperature_c"] == 23
    plain = client.get(f"/api/v1/lab-day?date={TODAY}&titrant=HCl").get_json()
    assert all(b["hold"] is None and b["use_molarity"] == b["molarity"] for b in plain["batches"])
    assert all(b["use_temperature_c"] == 20 for b in plain["batches"])
    for b in body["batches"] + plain["batches"]:
        assert set(b) >= {"use_molarity", "hold", "learnt_later", "latest_recheck"}


def test_past_day_page_shows_the_record_that_day_and_what_was_learnt_later(client):
    earlier = (TODAY - dt.timedelta(days=12)).isoformat()
    html = _dates_unwrapped(client.get(f"/lab-day?date={earlier}&titrant=NaOH").get_data(as_text=True))
    held = html.split('id="entry-NAOH-2610-01"')[1].split("</section>")[0]
    assert "chip chip-in_service" in held  # as it stood that day
    assert "Learnt after 2026-11-19" in held and "A re-check on 2026-11-28 found 0.09965 mol/L" in held
    assert "On hold: no value of NAOH-2610-01 is to be used for 2026-11-19." in held
    assert "For reference, not for use" in held and "Use this value" not in held
    assert "through the 4 standardizations made up to 2026-11-19 (the trend as it stood that day)" in held
    assert 'id="labday-as-known"' in html


def test_api_without_bench_temperature_leaves_bench_fields_out(client):
    body = client.get(f"/api/v1/lab-day?date={TODAY}&titrant=hydrochloric acid").get_json()
    assert body["titrant"] == "HCl" and len(body["batches"]) == 2
    assert "molarity_at_bench" not in body["batches"][0]


def test_api_empty_day_is_200_with_a_reason(client):
    r = client.get("/api/v1/lab-day?date=2001-01-01&titrant=HCl")
    assert r.status_code == 200
    body = r.get_json()
    assert body["batches"] == [] and body["reason"].startswith("No HCl batch was in force on 2001-01-01.")
    assert "prepared later" in body["reason"]


@pytest.mark.parametrize(
    "query,field",
    [
        ("date=2026-02-30&titrant=HCl", "date"),
        ("date=01/12/2026&titrant=HCl", "date"),
        ("titrant=HCl", "date"),
        ("date=2026-12-01&titrant=KCl", "titrant"),
        ("date=2026-12-01", "titrant"),
        ("date=2026-12-01&titrant=HCl&bench_temperature_c=41", "bench_temperature_c"),
        ("date=2026-12-01&titrant=HCl&bench_temperature_c=4.9", "bench_temperature_c"),
        ("date=2026-12-01&titrant=HCl&bench_temperature_c=23,5", "bench_temperature_c"),
        ("date=2026-12-01&titrant=HCl&bench_temp=23", "bench_temp"),
    ],
)
def test_api_bad_question_is_422_naming_the_field(client, query, field):
    r = client.get(f"/api/v1/lab-day?{query}")
    assert r.status_code == 422
    assert [e["field"] for e in r.get_json()["errors"]] == [field]


def test_page_shows_value_bench_value_prediction_and_flags(client):
    html = _dates_unwrapped(client.get(f"/lab-day?date={TODAY}&titrant=NaOH&bench_temperature_c=23").get_data(as_text=True))
    assert "Titrants for the lab day 2026-12-01" in html
    assert html.count('class="panel labday-entry') == 2 and html.count("labday-held") == 1
    assert "On hold: no value of NAOH-2610-01 is to be used for 2026-12-01." in html
    assert "Re-check on 2026-11-28 differs from the certified value by -0.69 %" in html
    # Only the batch not on hold offers a value to use (the 1 mol/L one, at the bench temperature).
    assert len(re.findall(r'class="plan-value labday-use labday-bench">0\.99\d\d mol/L', html)) == 1
    assert "Use this value" in html.split('id="entry-NAOH-2611-01"')[1]
    assert "Use this value" not in html.split('id="entry-NAOH-2610-01"')[1].split('id="entry-NAOH-2611-01"')[0]
    assert "chemical hygiene plan" in html
    empty = client.get("/lab-day?date=2001-01-01&titrant=NaOH").get_data(as_text=True)
    assert "No NaOH batch was in force on 2001-01-01." in empty
    bad = client.get("/lab-day?date=2026-13-01")
    assert bad.status_code == 422 and "is not a date" in bad.get_data(as_text=True)


def test_sheet_pdf_lists_the_batches_and_the_cautions(client):
    r = client.get(f"/lab-day.pdf?date={TODAY}&titrant=NaOH&bench_temperature_c=23")
    assert r.status_code == 200 and r.mimetype == "application/pdf"
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(r.data)).pages)
    assert "NaOH for the lab day 2026-12-01" in text
    assert "NAOH-2610-01" in text and "NAOH-2611-01" in text
    assert "chemical hygiene plan" in text
    assert "Ask the prep room" in text and "ON HOLD" in text and "Use this value" not in text


def test_drift_chart_is_served_as_svg(client):
    r = client.get(f"/batches/NAOH-2610-01/drift.svg?on={TODAY}")
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
    assert b"<title>Drift of NAOH-2610-01 as of 2026-12-01</title>" in r.data
    assert "script-src" not in r.headers["Content-Security-Policy"]  # no script may run in it
    assert client.get("/batches/H2SO4-2611-01/drift.svg").status_code == 404  # never released
    html = client.get(f"/batches/NAOH-2610-01?on={TODAY}").get_data(as_text=True)
    assert 'src="/batches/NAOH-2610-01/drift.svg?on=2026-12-01"' in html and "a significant drift" in html


CLASS = """group,aliquot_ml,titrant_ml,ratio,reported_molarity
bench 1,25.00,24.62,1:2,0.0490
bench 2,25.00,24.70,1:2,
"""


def _upload(c, **fields):
    data = {"lab_day": TODAY.isoformat(), "titrant": "H2SO4", "batch": "", "bench_temperature_c": "", **fields}
    if "sheet" not in fields:
        data["sheet"] = (io.BytesIO(CLASS.encode()), "class.csv")
    return c.post("/lab-day/correct", data=data, content_type="multipart/form-data")


def test_class_data_correction_is_recorded_and_downloadable(demo_app):
    c = signed_in(demo_app, "demo-instructor")
    r = _upload(c)
    assert r.status_code == 303
    page = c.get(r.headers["Location"])
    html = page.get_data(as_text=True)
    conn = dbmod.connect(demo_app.config["DATABASE"])
    try:
        row = dict(conn.execute("SELECT * FROM class_corrections ORDER BY id DESC LIMIT 1").fetchone())
        release = dict(
            conn.execute(
                "SELECT r.* FROM releases r JOIN batches b ON b.id = r.batch_id WHERE b.code = 'H2SO4-2608-01'"
            ).fetchone()
        )
        event = dict(conn.execute("SELECT * FROM events WHERE action = 'classdata.correct' ORDER BY id DESC").fetchone())
        assert row["release_id"] == release["id"] and row["row_count"] == 2 and row["recorded_by"] == "demo-instructor"
        assert row["molarity_used"] == release["molarity"] and row["lab_day"] == "2026-12-01"
        assert json.loads(event["detail"])["release_id"] == release["id"] and event["entity_id"] == row["id"]
        assert row["upload_sha256"] == hashlib.sha256(CLASS.encode()).hexdigest()
        with pytest.raises(Exception, match="append-only"):
            conn.execute("UPDATE class_corrections SET row_count = 3 WHERE id = ?", [row["id"]])
        from stockroom.records import corrections_with_release

        assert [x["id"] for x in corrections_with_release(conn, release["id"])] == [row["id"]]
    finally:
        conn.close()
    # 1 mol H2SO4 titrant : 2 mol analyte (e.g. NH3): c = c_t · 24.62 · 2 / 25.00 (hand computation)
    expected = release["molarity"] * 24.62 * 2 / 25.00
    assert f"{expected:.5f} mol/L" in html
    csv_text = c.get(f"/lab-day/corrections/{row['id']}.csv").get_data(as_text=True)
    data = [r for r in csv.reader(io.StringIO(csv_text)) if not r[0].startswith("#")]
    assert data[0][:3] == ["line", "group", "aliquot_ml"] and len(data) == 3
    assert float(data[1][6]) == pytest.approx(expected, abs=5e-7)
    assert float(data[1][7]) == pytest.approx((0.1 / release["molarity"] - 1) * 100, abs=5e-4)


def test_correction_needs_a_batch_when_several_were_in_force(demo_app):
    c = signed_in(demo_app, "demo-instructor")
    r = _upload(c, titrant="NaOH")
    assert r.status_code == 422
    html = r.get_data(as_text=True)
    assert "2 NaOH batches were in force on 2026-12-01: choose the one the class used" in html
    assert '<option value="NAOH-2610-01"' in html
    ok = _upload(c, titrant="NaOH", batch="NAOH-2611-01", bench_temperature_c="23")
    assert ok.status_code == 303


def test_correction_refuses_a_batch_on_hold_unless_another_is_named(demo_app):
    c = signed_in(demo_app, "demo-instructor")
    conn = dbmod.connect(demo_app.config["DATABASE"])
    before = conn.execute("SELECT count(*) FROM class_corrections").fetchone()[0]
    r = _upload(c, titrant="NaOH", batch="NAOH-2610-01")
    html = r.get_data(as_text=True)
    assert r.status_code == 422
    assert "NAOH-2610-01 is on hold for 2026-12-01, so it gives no value to correct with." in html
    assert "name another batch in force that day: NAOH-2611-01" in html
    assert conn.execute("SELECT count(*) FROM class_corrections").fetchone()[0] == before
    conn.close()
    assert _upload(c, titrant="NaOH", batch="NAOH-2611-01").status_code == 303


def test_correction_refuses_a_bad_file_by_line_and_records_nothing(demo_app):
    c = signed_in(demo_app, "demo-instructor")
    conn = dbmod.connect(demo_app.config["DATABASE"])
    before = conn.execute("SELECT count(*) FROM class_corrections").fetchone()[0]
    bad = "group,aliquot_ml,titrant_ml,ratio\nbench 1,25,24.6,1:1\nbench 2,25,abc,1:1\n"
    r = _upload(c, sheet=(io.BytesIO(bad.encode()), "bad.csv"))
    assert r.status_code == 422 and "line 3: titrant_ml: &#39;abc&#39; is not a plain decimal number" in r.get_data(as_text=True)
    too_many = "group,aliquot_ml,titrant_ml,ratio\n" + "g,25,20,1:1\n" * 51
    r = _upload(c, sheet=(io.BytesIO(too_many.encode()), "big.csv"))
    assert r.status_code == 422 and "at most 50 are accepted" in r.get_data(as_text=True)
    r = _upload(c, lab_day="2001-01-01")
    assert r.status_code == 422 and "No H2SO4 batch was in force on 2001-01-01." in r.get_data(as_text=True)
    assert conn.execute("SELECT count(*) FROM class_corrections").fetchone()[0] == before
    conn.close()


def test_only_instructors_correct_class_data(demo_app, client):
    staff = signed_in(demo_app, "okafor")
    assert _upload(staff).status_code == 403
    assert signed_in(demo_app, "demo-admin").get("/lab-day/correct").status_code == 403
    anonymous = client.get("/lab-day/correct")
    assert anonymous.status_code == 303 and "/sign-in" in anonymous.headers["Location"]


def test_dashboard_lists_a_batch_expected_to_leave_tolerance_among_those_needing_attention(client):
    # The demo's drifting NaOH, twelve days before the demo's today: four standardizations so far, all in
    # the band, trend -0.33 % per 30 days (p < 0.05), crossing the -0.5 % edge the next day.
    earlier = TODAY - dt.timedelta(days=12)
    html = client.get(f"/?on={earlier}").get_data(as_text=True)
    attention = html.split("<h2>Needs attention</h2>")[1].split("</section>")[0]
    attention = attention.replace('<span class="nowrap">', "").replace("</span>", "")  # dates kept on one line
    forecast = (TODAY - dt.timedelta(days=11)).isoformat()
    assert "NAOH-2610-01" in attention and f"expected to leave tolerance on {forecast}" in attention
    assert 'class="chip chip-in_service"' in attention  # shown, but the status is unchanged until that day
    body = client.get(f"/api/v1/lab-day?date={earlier}&titrant=NaOH").get_json()
    drifting = next(b for b in body["batches"] if b["batch_id"] == "NAOH-2610-01")
    assert drifting["status"] == "in_service"
    kinds = [f["kind"] for f in drifting["flags"]]
    assert kinds[0] == "expected_to_leave"
    # Read with the later re-checks (the server's today is after the demo's last one), the line through all
    # five points puts that day already outside the band: the look-back says so.
    assert kinds == ["expected_to_leave"]  # the day's own flags
    # Read with the later re-checks (the server's today is after the demo's last one), what came after the
    # day is named with its date, and the 2026-11-28 re-check beyond tolerance puts the day on hold.
    if body["known_on"] >= TODAY.isoformat():
        later = [(x["on"], x["kind"]) for x in drifting["learnt_later"]]
        assert later == [("2026-11-28", "recheck_outside"), ("2026-11-28", "trend_outside")]
        assert drifting["use_molarity"] is None and drifting["hold"].startswith("A re-check on 2026-11-28 found")
        assert drifting["trend"]["points"] == 4 and drifting["trend"]["standardizations_up_to"] == earlier.isoformat()


def test_sheet_of_a_held_batch_gives_no_value_to_use_and_says_why():
    # Invented: a re-check 1 % below the certified value, 4 days before the lab day.
    from stockroom.pdf.labday_sheet import labday_sheet_pdf

    b = record(releases=(rel(0, interval=60),), rechecks=(CheckFact(day(6), OUT, 5e-5),))
    answer = labday.lab_day([b], day(10), day(10), "NaOH")
    pdf = labday_sheet_pdf(answer, printed_on=day(10))
    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(pdf)).pages)
    assert "Use this value" not in text
    use_box = text.split("ON HOLD")[1].split("For reference, not for use")[0]
    assert use_box.startswith(" No value to use for 2026-03-11. Beyond tolerance: re-check on 2026-03-07 differs")
    assert "(tolerance ±0.50 %)." in use_box
    # No molarity in the use box: the one figure with a unit there is the tolerance, a percentage.
    assert "mol/L" not in use_box
    # The certified value (0.1002 ± 0.0001 mol/L) comes only after the reference label.
    assert text.index("0.10020") > text.index("For reference, not for use")
