"""The shared reads of containers and losses: volume gone and remaining per batch, what a section received."""

import datetime as dt

from stockroom import db as dbmod
from stockroom import schema
from stockroom.records import containers


def _db(tmp_path):
    conn = dbmod.connect(tmp_path / "c.db")
    schema.migrate(conn)
    return conn


def _batch(conn, code, volume_l):
    return dbmod.insert_row(
        conn,
        "batches",
        {
            "code": code,
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": volume_l,
            "prepared_on": "2026-09-01",
            "prepared_by": "t",
            "recorded_at": "x",
            "recorded_by": "t",
        },
    )


def _fill(conn, batch_id, code, litres, on, expires, course="CHM 110", section="A"):
    return dbmod.insert_row(
        conn,
        "containers",
        {
            "code": code,
            "batch_id": batch_id,
            "kind": "bench bottle",
            "volume_l": litres,
            "filled_on": on,
            "expires_on": expires,
            "course": course,
            "section": section,
            "recorded_at": "x",
            "recorded_by": "t",
        },
    )


def test_volume_remaining_is_registered_less_containers_and_losses_up_to_a_date(tmp_path):
    conn = _db(tmp_path)
    a, b = _batch(conn, "A-1", 20.0), _batch(conn, "B-1", 10.0)
    _fill(conn, a, "A-1-C01", 2.5, "2026-09-05", "2026-11-30")
    _fill(conn, a, "A-1-C02", 1.0, "2026-09-12", "2026-11-30")
    dbmod.insert_row(
        conn,
        "batch_volume_losses",
        {
            "batch_id": a,
            "kind": "loss",
            "volume_l": 0.25,
            "occurred_on": "2026-09-10",
            "reason": "spill",
            "recorded_at": "x",
            "recorded_by": "t",
        },
    )
    assert containers.volume_out_l(conn, [a, b]) == {a: 3.75, b: 0.0}
    assert containers.volume_out_l(conn, [a], dt.date(2026, 9, 10)) == {a: 2.75}
    assert containers.volume_remaining_l(conn, a) == 16.25
    assert containers.volume_remaining_l(conn, b) == 10.0


def test_received_by_names_the_containers_a_section_had_in_use_that_day(tmp_path):
    conn = _db(tmp_path)
    a = _batch(conn, "A-1", 20.0)
    first = _fill(conn, a, "A-1-C01", 1.0, "2026-09-05", "2026-10-05")
    _fill(conn, a, "A-1-C02", 1.0, "2026-09-05", "2026-10-05", section="B")
    dbmod.insert_row(
        conn,
        "container_disposals",
        {"container_id": first, "disposed_on": "2026-09-20", "reason": "cracked", "recorded_at": "x", "recorded_by": "t"},
    )
    got = containers.received_by(conn, "chm 110", "a", dt.date(2026, 9, 19))
    assert [c["code"] for c in got] == ["A-1-C01"]
    assert containers.received_by(conn, "CHM 110", "A", dt.date(2026, 9, 20)) == []
    assert [c["code"] for c in containers.received_by(conn, "CHM 110", "", dt.date(2026, 9, 19))] == ["A-1-C02", "A-1-C01"]
    assert containers.received_by(conn, "CHM 110", "B", dt.date(2026, 10, 6)) == []
