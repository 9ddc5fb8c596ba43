"""Institution scale: a fifty-year history builds, lists cost what they show, and what is kept to make
them cheap (the per-batch status summary, the recall's reach) gives exactly what the records give."""

from __future__ import annotations

import datetime as dt
import shutil
import sqlite3
from collections import Counter

import pytest
from click.testing import CliRunner

from stockroom import db as dbmod
from stockroom import readmodel, records, schema, synth, traceability
from stockroom import recall as recall_mod
from stockroom.cli import main
from stockroom.policy import status_on

END = dt.date(2026, 6, 30)
YEARS = 50
START = END - dt.timedelta(days=365 * YEARS)


@pytest.fixture(scope="module")
def long_history(tmp_path_factory):
    """A thinned fifty-year synthetic history (about 6 batches a year), built once for the module."""
    path = tmp_path_factory.mktemp("long") / "fifty.db"
    counts = synth.build(str(path), years=YEARS, seed=3, end=END, per_year=6)
    return path, counts


@pytest.fixture
def history(long_history, tmp_path):
    """A private copy of the long history (with its trail key), open through stockroom's connection."""
    source, _ = long_history
    target = tmp_path / source.name
    shutil.copyfile(source, target)
    shutil.copyfile(str(source) + ".trail-key", str(target) + ".trail-key")
    conn = dbmod.connect(target)
    yield conn
    conn.close()


def _coarse(status_value: str) -> str:
    return status_value if status_value in ("awaiting", "expired", "withdrawn") else "live"


def test_fifty_years_build_with_the_policies_in_force_from_the_first_day(long_history, history):
    path, counts = long_history
    # per_year=6 over 50 years: about 300 batches (the draw is random; the bounds are loose on purpose).
    assert 150 < counts["batches"] < 450 and counts["releases"] > 100
    first = dt.date.fromisoformat(history.execute("SELECT min(prepared_on) FROM batches").fetchone()[0])
    assert first < dt.date(1977, 1, 1)  # fifty years before mid-2026
    on_first_day = records.policies(history, START)
    assert {r.reagent for r in synth.RECIPES} <= set(on_first_day)
    rows = history.execute(
        "SELECT reagent, reason FROM reagent_policies WHERE effective_from = ? ORDER BY reagent", [START.isoformat()]
    ).fetchall()
    assert len(rows) == len(on_first_day) and all("synthetic" in r[1] for r in rows)
    # The policies put in force from the first day are those of the starting set, value for value.
    assert records.policies(history, START) == records.policies(history, dt.date(2000, 1, 1))
    assert CliRunner().invoke(main, ["verify", "--db", str(path)]).exit_code == 0


@pytest.mark.parametrize("command", ["synth", "bench"])
def test_synth_and_bench_take_up_to_fifty_years(command, tmp_path):
    extra = ["--db", str(tmp_path / "x.db")] if command == "synth" else []
    refused = CliRunner().invoke(main, [command, "--years", "51", *extra])
    assert refused.exit_code == 2 and "51 is not in the range 1<=x<=50" in refused.output
    param = next(p for p in main.commands[command].params if p.name == "years")
    assert (param.type.min, param.type.max) == (1, 50)


def test_the_kept_status_summary_equals_the_records(history):
    assert readmodel.status_summary_problems(history) == []
    # The migration's backfill computes the same summary from the records alone.
    with dbmod.write(history):
        history.execute("DELETE FROM batch_status_summary")
        history.execute(schema._SCALE_INDEXES[-1])
    assert readmodel.status_summary_problems(history) == []
    # ... and a summary row that disagrees is found.
    with dbmod.write(history):
        history.execute("UPDATE batch_status_summary SET last_expires_on = '1999-01-01' WHERE batch_id = 3")
    assert readmodel.status_summary_problems(history) == [3]


def _dates():
    return [START + dt.timedelta(days=40), START + dt.timedelta(days=9000), END - dt.timedelta(days=120), END]


def test_coarse_status_in_sql_is_policy_status_on_for_every_batch_and_date(history):
    facts = readmodel.facts_of(history)
    prepared = {i: f.prepared_on for i, f in facts.items()}
    for on in _dates():
        got = {i: c for i, c, _ in readmodel.coarse_statuses(history, on)}
        want = {i: _coarse(status_on(f, on).status.value) for i, f in facts.items() if prepared[i] <= on}
        assert got == want, on
        assert readmodel.coarse_counts(history, on) == {c: Counter(want.values()).get(c, 0) for c in readmodel.COARSE}


def test_a_release_recorded_out_of_order_and_a_withdrawal_keep_the_summary_and_status_right(history):
    """Insert rows as any writer would (the summary's triggers fire on insert, whoever inserts)."""
    bid, released_on, expires_on = history.execute(
        "SELECT batch_id, released_on, expires_on FROM releases ORDER BY id DESC LIMIT 1"
    ).fetchone()
    r0, e0 = dt.date.fromisoformat(released_on), dt.date.fromisoformat(expires_on)
    columns = [r[1] for r in history.execute("PRAGMA table_info(releases)") if r[1] != "id"]
    picked = ", ".join(columns)

    def copy_release(released: dt.date, expires: dt.date) -> None:
        values = ", ".join("?" if c in ("released_on", "expires_on") else c for c in columns)
        history.execute(
            f"INSERT INTO releases ({picked}) SELECT {values} FROM releases WHERE batch_id = ? ORDER BY id LIMIT 1",
            [
                released.isoformat() if c == "released_on" else expires.isoformat()
                for c in columns
                if c in ("released_on", "expires_on")
            ]
            + [bid],
        )

    with dbmod.write(history):
        copy_release(r0 + dt.timedelta(days=10), r0 + dt.timedelta(days=20))  # a newer release, expiring sooner
        copy_release(r0 + dt.timedelta(days=5), e0 + dt.timedelta(days=400))  # recorded later, released between
        history.execute(
            "INSERT INTO withdrawals (batch_id, withdrawn_on, reason, recorded_at, recorded_by) "
            "VALUES (?, ?, 'test', '', 'test')",
            [bid, (r0 + dt.timedelta(days=30)).isoformat()],
        )
    assert readmodel.status_summary_problems(history) == []
    facts = readmodel.facts_of(history, [bid])[bid]
    for days in (0, 4, 5, 9, 10, 20, 21, 29, 30, 31):
        on = r0 + dt.timedelta(days=days)
        row = [c for i, c, _ in readmodel.coarse_statuses(history, on) if i == bid]
        assert row == [_coarse(status_on(facts, on).status.value)], days
    # Days 21-29: the newest release (day 10) has expired although the one released on day 5 has not.
    assert [c for i, c, _ in readmodel.coarse_statuses(history, r0 + dt.timedelta(days=25)) if i == bid] == ["expired"]


@pytest.mark.parametrize("status", [None, "expired", "withdrawn", "awaiting", "in_service", "recheck_due"])
@pytest.mark.parametrize("reagent", [None, "NaOH"])
def test_a_page_of_batches_is_the_slice_of_the_whole_list(history, status, reagent):
    """batch_page (SQL page and count) against every batch computed in full, sorted and sliced."""
    facts = readmodel.facts_of(history)
    on = END - dt.timedelta(days=120)
    rows = {r["id"]: r for r in dbmod.query(history, "SELECT id, prepared_on, reagent FROM batches")}
    order = sorted((i for i in rows if rows[i]["prepared_on"] <= on.isoformat()), key=lambda i: (rows[i]["prepared_on"], i))
    order.reverse()
    whole = [
        i
        for i in order
        if (reagent is None or rows[i]["reagent"] == reagent)
        and (status is None or status_on(facts[i], on).status.value == status)
    ]
    views, total = readmodel.batch_page(history, on, reagent=reagent, status=status, limit=7, offset=3)
    assert total == len(whole)
    assert [v.batch["id"] for v in views] == whole[3:10]
    assert all(v.report == status_on(facts[v.batch["id"]], on) for v in views)


def test_the_reach_of_a_recall_is_the_reach_over_the_whole_graph(history):
    whole = recall_mod.read_graph(history)
    lots = [r[0] for r in history.execute("SELECT id FROM standard_lots ORDER BY id")]
    batch = history.execute("SELECT batch_id FROM releases ORDER BY id LIMIT 1 OFFSET 20").fetchone()[0]
    suspects = [traceability.Suspect("lot", i, START) for i in lots[:6]]
    suspects += [traceability.Suspect("lot", lots[-1], END - dt.timedelta(days=200)), traceability.Suspect("batch", batch, START)]
    reached_any = False
    for suspect in suspects:
        part = recall_mod.read_reach_graph(history, [suspect])
        want = traceability.downstream(whole, suspect)
        got = traceability.downstream(part, suspect)
        assert got == want
        assert {k: part.node(k) for k in got} == {k: whole.node(k) for k in want}
        reached_any = reached_any or bool(want)
    assert reached_any
    # The synthetic recall (the first year's KHP lot) reaches the same releases both ways.
    (rid,) = history.execute("SELECT id FROM recalls").fetchone()
    rc = recall_mod.recall_by_id(history, rid)
    assert recall_mod.reached_release_ids(whole, [rc]) == recall_mod.reached_release_ids(
        recall_mod.read_reach_graph(history, [rc.suspect]), [rc]
    )
    assert recall_mod.reached_release_ids(whole, [rc])[rid]


def test_the_trail_lists_the_actions_present_without_scanning_it(history):
    from stockroom.web.audit import _actions

    assert _actions(history) == [r[0] for r in history.execute("SELECT DISTINCT action FROM events ORDER BY action")]


def test_the_trail_page_checks_new_entries_and_finds_a_changed_one(app, signed_in_client):
    staff = signed_in_client("staff")
    first = staff.get("/audit").get_data(as_text=True)
    assert "the chain was checked just now and is whole" in first
    again = staff.get("/audit").get_data(as_text=True)
    assert "the entries added since the last full check were checked just now" in again
    # An entry changed behind the program's back after the last check is found on the next view.
    conn = sqlite3.connect(app.config["DATABASE"])
    conn.isolation_level = None
    conn.execute("DROP TRIGGER events_no_update")
    newest = conn.execute("SELECT max(id) FROM events").fetchone()[0]
    conn.execute("UPDATE events SET reason = 'edited' WHERE id = ?", [newest])
    conn.close()
    broken = staff.get("/audit").get_data(as_text=True)
    assert f"The chain is broken at entry {newest}" in broken
