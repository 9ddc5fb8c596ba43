"""The register's text search through the trigram index gives exactly what SQLite's LIKE gives over the
batches as they now read (corrections applied), whatever the text and the search."""

from __future__ import annotations

import datetime as dt
import json
import shutil

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from stockroom import db as dbmod
from stockroom import readmodel, records, schema

FAR = dt.date(2100, 1, 1)
# Letters in both cases (LIKE folds ASCII case only), accented letters whose case LIKE does not fold but
# the trigram tokenizer does, LIKE's own wildcards and escape, FTS5 query syntax, spaces and digits.
# Few letters, so that random searches often hit.
ALPHABET = 'aAbé\u00c9ß%_\\"*: 1'
TEXT = st.text(alphabet=ALPHABET, max_size=10)
SEARCH = st.text(alphabet=ALPHABET, min_size=1, max_size=4)


@pytest.fixture(scope="module")
def empty_copy_source(tmp_path_factory):
    """A migrated database file without batches, made once for the module (each example copies it)."""
    path = tmp_path_factory.mktemp("search") / "empty.db"
    conn = dbmod.connect(path)
    schema.migrate(conn)
    conn.close()
    return path


def _insert_batch(conn, batch_id: int, code: str, prepared_by: str, notes: str) -> None:
    # Raw inserts, as any writer would: the index's triggers fire on insert, whoever inserts.
    conn.execute(
        "INSERT INTO batches (id, code, reagent, nominal_molarity, volume_l, prepared_on, prepared_by, notes, "
        "recorded_at, recorded_by) VALUES (?, ?, 'NaOH', 0.1, 1.0, '2026-01-05', ?, ?, '', 'test')",
        [batch_id, code, prepared_by, notes],
    )


def _insert_amendment(conn, batch_id: int, field: str, value: str) -> None:
    conn.execute(
        "INSERT INTO amendments (entity, entity_id, field, old_value, new_value, reason, recorded_at, recorded_by) "
        "VALUES ('batches', ?, ?, 'null', ?, 'test', '', 'test')",
        [batch_id, field, json.dumps(value)],
    )


def _like_reference(conn, search: str) -> list[int]:
    """The batches a plain LIKE over the three fields, as each batch now reads, finds (newest first)."""
    rows = records.with_amendments(dbmod.query(conn, "SELECT id, code, prepared_by, notes FROM batches"), conn)
    conn.execute("CREATE TEMP TABLE IF NOT EXISTS reading (id INTEGER PRIMARY KEY, code TEXT, prepared_by TEXT, notes TEXT)")
    conn.execute("DELETE FROM temp.reading")
    conn.conn.executemany(
        "INSERT INTO temp.reading VALUES (?, ?, ?, ?)", [(r["id"], r["code"], r["prepared_by"], r["notes"]) for r in rows]
    )
    like = "%" + readmodel.like_literal(search) + "%"
    found = conn.execute(
        "SELECT id FROM temp.reading WHERE code LIKE :l ESCAPE '\\' OR prepared_by LIKE :l ESCAPE '\\' "
        "OR notes LIKE :l ESCAPE '\\' ORDER BY id DESC",
        {"l": like},
    )
    return [int(r[0]) for r in found]


batches_st = st.lists(st.tuples(TEXT, TEXT, TEXT), min_size=1, max_size=12)
amendments_st = st.lists(st.tuples(st.integers(0, 11), st.sampled_from(["prepared_by", "notes"]), TEXT), max_size=8)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(batches=batches_st, amendments=amendments_st, searches=st.lists(SEARCH, min_size=1, max_size=6))
# The trigram index folds É to é, LIKE does not (it folds ASCII only): the index's answer alone would be wrong.
@example(batches=[("xÉa", "", ""), ("", "xéa", "")], amendments=[], searches=["xéa", "XÉA", 'a"b', "é"])
def test_the_indexed_search_finds_exactly_what_like_finds(empty_copy_source, tmp_path, batches, amendments, searches):
    # The reference is SQLite's own LIKE (ESCAPE '\'), the operator the register searched with before the index.
    path = tmp_path / "one.db"
    shutil.copyfile(empty_copy_source, path)
    conn = dbmod.connect(path)
    try:
        with dbmod.write(conn):
            for i, (code, prepared_by, notes) in enumerate(batches, start=1):
                _insert_batch(conn, i, f"{code}#{i}", prepared_by, notes)  # codes are unique
            for which, field, value in amendments:
                _insert_amendment(conn, which % len(batches) + 1, field, value)
        assert readmodel.search_index_problems(conn) == []
        for search in searches:
            want = _like_reference(conn, search)
            got = [i for i, _, _ in readmodel.coarse_statuses(conn, FAR, search=search)]
            assert got == want, search
            assert readmodel.coarse_count(conn, FAR, search=search) == len(want), search
    finally:
        conn.close()


def _fixed_batches(conn) -> None:
    with dbmod.write(conn):
        _insert_batch(conn, 1, "NAOH-2601-01", "Ann Field", "first of the year")
        _insert_batch(conn, 2, "HCL-2601-01", "Ben Ortiz", "carboy 3")
        _insert_batch(conn, 3, "NAOH-2601-02", "Ann Field", "")
        _insert_amendment(conn, 2, "notes", "carboy 4, not 3")
        _insert_amendment(conn, 3, "prepared_by", "Cleo Marsh")


@pytest.mark.parametrize(
    ("search", "ids"),
    [
        # Worked by hand over the three invented batches above (after their corrections).
        ("naoh", [3, 1]),  # ASCII case folds, as LIKE does
        ("ann", [1]),  # batch 3 now reads "Cleo Marsh": the correction, not the original, is searched
        ("cleo", [3]),
        ("carboy 3", []),  # corrected away
        ("carboy 4", [2]),
        ("l-", [2]),  # two characters: read without the index, same rule
        ("h", [3, 2, 1]),  # one character (every code holds an H)
        ("2601-0", [3, 2, 1]),
        ("%", []),  # LIKE's wildcard is literal text here
    ],
)
def test_a_search_reads_each_batch_as_it_now_reads(empty_copy_source, tmp_path, search, ids):
    path = tmp_path / "fixed.db"
    shutil.copyfile(empty_copy_source, path)
    conn = dbmod.connect(path)
    try:
        _fixed_batches(conn)
        assert [i for i, _, _ in readmodel.coarse_statuses(conn, FAR, search=search)] == ids
    finally:
        conn.close()


def test_the_migration_backfill_builds_the_index_the_triggers_keep(empty_copy_source, tmp_path):
    path = tmp_path / "backfill.db"
    shutil.copyfile(empty_copy_source, path)
    conn = dbmod.connect(path)
    try:
        _fixed_batches(conn)
        kept = conn.execute("SELECT rowid, code, prepared_by, notes FROM batch_search ORDER BY rowid").fetchall()
        assert [tuple(r) for r in kept][1:] == [
            (2, "HCL-2601-01", "Ben Ortiz", "carboy 4, not 3"),
            (3, "NAOH-2601-02", "Cleo Marsh", ""),
        ]
        with dbmod.write(conn):
            conn.execute("DELETE FROM batch_search")
            conn.execute(schema._SEARCH_INDEX[-1])  # the migration's backfill, from the records alone
        assert [tuple(r) for r in conn.execute("SELECT rowid, code, prepared_by, notes FROM batch_search ORDER BY rowid")] == [
            tuple(r) for r in kept
        ]
        assert readmodel.search_index_problems(conn) == []
        # ... and an entry that disagrees with the batch is found.
        with dbmod.write(conn):
            conn.execute("UPDATE batch_search SET notes = 'tampered' WHERE rowid = 1")
        assert readmodel.search_index_problems(conn) == [1]
    finally:
        conn.close()


def test_a_correction_through_the_records_layer_moves_the_search_and_the_trail_stays_whole(app, database):
    from stockroom.records.audit import verify

    values = {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 2.0, "prepared_on": "2026-01-05"}
    values |= {"prepared_by": "Ann Field", "notes": "first of the year"}
    batch = records.create_batch(database, values, actor="test")
    records.amend_batch(database, batch["id"], "notes", "moved to the cold room", "wrong shelf noted", actor="test")
    assert [i for i, _, _ in readmodel.coarse_statuses(database, FAR, search="cold room")] == [batch["id"]]
    assert [i for i, _, _ in readmodel.coarse_statuses(database, FAR, search="first of")] == []
    assert readmodel.search_index_problems(database) == []
    # The index is derived, not a record: the verifier neither asks it for guards nor for trail entries.
    report = verify(database)
    assert report.problems == () and report.ok
