"""Dispensing rules (stockroom.stock) and the tracking writes (records.containers) on a real database."""

from __future__ import annotations

import datetime as dt

import pytest
from stock_world import released_batch

from stockroom import db as dbmod
from stockroom import policy, records, stock
from stockroom.errors import Conflict, InvalidInput
from stockroom.policy import BatchFacts, ReleaseFact, ReviewFact, status_on
from stockroom.records import containers

D = dt.date


# ---------------------------------------------------------------- expiry and codes


@pytest.mark.parametrize(
    ("batch_expiry", "filled", "days", "expected"),
    [
        # No container shelf life: the batch's own expiry (the rule of issue 17).
        (D(2026, 12, 1), D(2026, 9, 10), None, D(2026, 12, 1)),
        # 30 days from 10 September is 10 October (September has 30 days: the Gregorian calendar).
        (D(2026, 12, 1), D(2026, 9, 10), 30, D(2026, 10, 10)),
        # A shelf life reaching past the batch's expiry is cut to it: never later than the parent.
        (D(2026, 9, 20), D(2026, 9, 10), 30, D(2026, 9, 20)),
        # 2028 is a leap year: 28 February + 1 day is 29 February (Gregorian calendar).
        (D(2028, 12, 1), D(2028, 2, 28), 1, D(2028, 2, 29)),
    ],
)
def test_container_expiry(batch_expiry, filled, days, expected):
    assert stock.container_expiry(batch_expiry, filled, days) == expected


def test_container_codes():
    assert stock.container_code("NAOH-2611-02", 3) == "NAOH-2611-02-C03"
    assert stock.container_code("NAOH-2611-02", 112) == "NAOH-2611-02-C112"
    codes = ["NAOH-2611-02-C01", "NAOH-2611-02-C07", "NAOH-2611-021-C40", "HCL-2611-02-C09"]
    # Only this batch's own codes count: NAOH-2611-021 is another batch that shares the prefix.
    assert stock.next_sequence("NAOH-2611-02", codes) == 8
    assert stock.next_sequence("KOH-2611-01", codes) == 1
    with pytest.raises(ValueError):
        stock.container_code("X", 0)


def test_destination_words():
    assert stock.Destination("214", "CHM 110", "B").words() == "CHM 110 · section B · room 214"
    assert stock.Destination(course="CHM 110").words() == "CHM 110"


# ---------------------------------------------------------------- the one reader


def test_form_and_json_shapes_read_the_same():
    today = D(2026, 10, 1)
    form = {
        "volume_l": "0,5",
        "dispensed_on": "2026-09-15",
        "container": "bench bottle",
        "room": "214",
        "course": "CHM 110",
        "section": "B",
    }
    as_json = {
        "volume_l": 0.5,
        "dispensed_on": "2026-09-15",
        "container": "bench bottle",
        "destination": {"room": "214", "course": "CHM 110", "section": "B"},
    }
    assert stock.read_dispensing(form, today=today, decimal_comma=True) == stock.read_dispensing(as_json, today=today)
    plain = stock.read_dispensing({**as_json, "destination": "CHM 110"}, today=today)
    assert plain.destination == stock.Destination(course="CHM 110")


@pytest.mark.parametrize(
    ("data", "field", "words"),
    [
        (
            {"volume_l": 0, "dispensed_on": "2026-09-15", "container": "bench bottle", "course": "C"},
            "volume_l",
            "between 0.001 and 50 L",
        ),
        (
            {"volume_l": 60, "dispensed_on": "2026-09-15", "container": "bench bottle", "course": "C"},
            "volume_l",
            "between 0.001 and 50 L",
        ),
        (
            {"volume_l": 1, "dispensed_on": "2026-10-02", "container": "bench bottle", "course": "C"},
            "dispensed_on",
            "later than 2026-10-01",
        ),
        ({"volume_l": 1, "dispensed_on": "2026-09-15", "container": "jug", "course": "C"}, "container", "one of"),
        ({"volume_l": 1, "dispensed_on": "2026-09-15", "container": "bench bottle"}, "course", "required"),
        (
            {"volume_l": 1, "dispensed_on": "2026-09-15", "container": "bench bottle", "destination": {"room": "1"}},
            "destination.course",
            "required",
        ),
        (
            {"volume_l": 1, "dispensed_on": "2026-09-15", "container": "bench bottle", "course": "C", "colour": "red"},
            "colour",
            "not a field",
        ),
    ],
)
def test_bad_dispensings_name_the_field(data, field, words):
    with pytest.raises(InvalidInput) as exc:
        stock.read_dispensing(data, today=D(2026, 10, 1))
    assert words in exc.value.fields[field]


# ---------------------------------------------------------------- status follows the parent

_REL = ReleaseFact(1, D(2026, 9, 1), D(2026, 11, 30), 0.1021, 0.0001, 0.0002, 2.0, 14, 0.005)


_EXPIRES = D(2026, 10, 31)


def _state(facts, on, disposed=None):
    return stock.container_state(status_on(facts, on), D(2026, 9, 10), _EXPIRES, disposed, on)


def test_container_status_follows_batch_and_own_expiry():
    base = BatchFacts(prepared_on=D(2026, 9, 1), releases=(_REL,))
    # The re-check interval is 14 days (invented policy): on 9 September no re-check is due yet.
    assert _state(base, D(2026, 9, 9)).status is stock.ContainerStatus.NOT_YET_FILLED
    assert _state(base, D(2026, 9, 12)).status is stock.ContainerStatus.IN_USE
    assert _state(base, D(2026, 11, 1)).status is stock.ContainerStatus.EXPIRED  # its own expiry, before the batch's
    assert _state(base, D(2026, 9, 20), disposed=D(2026, 9, 20)).status is stock.ContainerStatus.DISPOSED
    withdrawn = BatchFacts(prepared_on=D(2026, 9, 1), releases=(_REL,), withdrawn_on=D(2026, 9, 15))
    st = _state(withdrawn, D(2026, 9, 16))
    assert st.status is stock.ContainerStatus.WITHDRAWN and "2026-09-15" in st.reason
    in_error = BatchFacts(prepared_on=D(2026, 9, 1), releases=(_REL,), registered_in_error_on=D(2026, 9, 15))
    assert _state(in_error, D(2026, 9, 12)).status is stock.ContainerStatus.REGISTERED_IN_ERROR
    review = ReviewFact(7, 1, "primary-standard lot STD-KHP-001", D(2026, 8, 1), D(2026, 9, 14))
    held = BatchFacts(prepared_on=D(2026, 9, 1), releases=(_REL,), reviews=(review,))
    assert _state(held, D(2026, 9, 13)).status is stock.ContainerStatus.IN_USE
    st = _state(held, D(2026, 9, 14))
    assert st.status is stock.ContainerStatus.ON_HOLD and "recall 7" in st.reason


def test_dispensing_refusals():
    awaiting = BatchFacts(prepared_on=D(2026, 9, 1))
    report = status_on(awaiting, D(2026, 9, 5))
    with pytest.raises(Conflict, match="not released by 2026-09-05"):
        stock.check_dispensing(report, None, 1.0, 20.0)
    facts = BatchFacts(prepared_on=D(2026, 9, 1), releases=(_REL,))
    on = D(2026, 9, 5)
    stock.check_dispensing(status_on(facts, on), policy.release_in_force(facts, on), 20.0, 20.0)  # exactly all of it
    with pytest.raises(InvalidInput) as exc:
        stock.check_dispensing(status_on(facts, on), policy.release_in_force(facts, on), 2.5, 2.0)
    assert exc.value.fields["volume_l"] == "2.5 L is more than remains in the batch (2.000 L left)"
    late = D(2026, 12, 1)
    with pytest.raises(Conflict, match="expired"):
        stock.check_dispensing(status_on(facts, late), policy.release_in_force(facts, late), 1.0, 20.0)


# ---------------------------------------------------------------- writes


@pytest.fixture
def world(app, database):
    prepared = dt.date.today() - dt.timedelta(days=20)
    batch, release_id = released_batch(database, app.config, prepared_on=prepared, volume_l=5.0)
    return {"db": database, "batch": batch, "prepared": prepared, "release_id": release_id}


def _d(world, litres, days_after=1, **dest):
    return stock.Dispensing(
        litres,
        world["prepared"] + dt.timedelta(days=days_after),
        "bench bottle",
        stock.Destination(**({"course": "CHM 110"} | dest)),
    )


def test_dispense_records_code_expiry_volume_and_audit(world):
    db, batch = world["db"], world["batch"]
    first = containers.dispense(db, batch, _d(world, 1.5, section="A"), "ana")
    second = containers.dispense(db, batch, _d(world, 0.75, section="B", room="214"), "ana")
    assert (first["code"], second["code"]) == (batch["code"] + "-C01", batch["code"] + "-C02")
    release = dbmod.query(db, "SELECT expires_on FROM releases WHERE id = ?", [world["release_id"]])[0]
    assert second["expires_on"] == release["expires_on"]  # no container shelf life in the starting policy
    # 5.0 - 1.5 - 0.75 = 2.75 L
    assert containers.volume_remaining_l(db, batch["id"]) == pytest.approx(2.75)
    events = dbmod.query(db, "SELECT action, entity, entity_id FROM events WHERE action = 'container.fill' ORDER BY id")
    assert [(e["entity"], e["entity_id"]) for e in events] == [("containers", first["id"]), ("containers", second["id"])]
    assert records.unaudited_records(db) == []


def test_dispense_refuses_more_than_remains_and_writes_nothing(world):
    db, batch = world["db"], world["batch"]
    containers.dispense(db, batch, _d(world, 4.0), "ana")
    containers.record_volume_change(
        db, batch, stock.VolumeChange("loss", 0.5, world["prepared"] + dt.timedelta(days=2), "spilt while filling"), "ana"
    )
    before = db.execute("SELECT count(*) FROM events").fetchone()[0]
    with pytest.raises(InvalidInput) as exc:
        containers.dispense(db, batch, _d(world, 0.6), "ana")
    assert "(0.500 L left)" in exc.value.fields["volume_l"]
    assert db.execute("SELECT count(*) FROM events").fetchone()[0] == before
    assert db.execute("SELECT count(*) FROM containers").fetchone()[0] == 1


def test_container_shelf_life_from_policy_shortens_expiry(world):
    db, batch = world["db"], world["batch"]
    current = records.policy_for(db, "NaOH", world["prepared"])
    from dataclasses import replace

    records.add_policy(db, replace(current, container_shelf_life_days=7), world["prepared"], "bench bottles pick up CO2", "admin")
    assert records.policy_for(db, "NaOH", world["prepared"]).container_shelf_life_days == 7
    row = containers.dispense(db, batch, _d(world, 1.0, days_after=3), "ana")
    assert row["expires_on"] == (world["prepared"] + dt.timedelta(days=10)).isoformat()


def test_dispose_container_once_and_losses_need_reason(world):
    db, batch = world["db"], world["batch"]
    row = containers.dispense(db, batch, _d(world, 1.0), "ana")
    c = containers.container_by_code(db, row["code"])
    with pytest.raises(InvalidInput):
        containers.dispose_container(db, c, world["prepared"], "cracked", "ana")  # before it was filled
    containers.dispose_container(db, c, world["prepared"] + dt.timedelta(days=2), "cracked cap", "ana")
    with pytest.raises(Conflict):
        containers.dispose_container(db, c, world["prepared"] + dt.timedelta(days=3), "again", "ana")
    assert containers.container_by_code(db, row["code"])["disposed_on"] == (world["prepared"] + dt.timedelta(days=2)).isoformat()
    with pytest.raises(InvalidInput):
        containers.record_volume_change(db, batch, stock.VolumeChange("loss", 0.1, world["prepared"], "  "), "ana")
    with pytest.raises(Exception, match="append-only"):
        db.execute("UPDATE containers SET volume_l = 9 WHERE id = ?", [row["id"]])
    assert records.unaudited_records(db) == []


def test_dispense_from_withdrawn_batch_is_a_conflict(world):
    db, batch = world["db"], world["batch"]
    records.withdraw_batch(db, batch["id"], world["prepared"] + dt.timedelta(days=2), "cloudy", "ana")
    with pytest.raises(Conflict, match="withdrawn"):
        containers.dispense(db, batch, _d(world, 1.0, days_after=3), "ana")
    containers.dispense(db, batch, _d(world, 1.0, days_after=1), "ana")  # before the withdrawal it was in service
