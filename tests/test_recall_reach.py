"""A recall's reach into the containers and destinations that received the suspect solution, with their dates."""

from __future__ import annotations

import csv
import datetime as dt
import io

from pypdf import PdfReader
from stock_world import released_batch

from stockroom import recall as recall_mod
from stockroom import stock
from stockroom.pdf.recall_report import recall_report_pdf
from stockroom.records import containers

TODAY = dt.date.today()


def day(n: int) -> dt.date:
    return TODAY + dt.timedelta(days=n)


def _fill(db, batch, litres, on, course, section, room=""):
    return containers.dispense(
        db, batch, stock.Dispensing(litres, on, "bench bottle", stock.Destination(room, course, section)), "ana"
    )


def _world(app, database):
    batch, _ = released_batch(database, app.config, prepared_on=day(-30), volume_l=10.0)
    c1 = _fill(database, batch, 1.0, day(-25), "CHM 110", "A", "214")
    c2 = _fill(database, batch, 0.5, day(-5), "CHM 110", "B", "214")
    c3 = _fill(database, batch, 0.5, day(-25), "CHM 220", "A")
    containers.dispose_container(database, containers.container_by_code(database, c3["code"]), day(-15), "emptied", "ana")
    recall_id = recall_mod.open_recall(database, "batch", batch["id"], day(-10), "wrong KHP drying record", TODAY, "ana")
    return batch, (c1, c2, c3), recall_id


def test_impact_lists_containers_in_use_while_suspect(app, database):
    batch, (c1, c2, c3), recall_id = _world(app, database)
    report = recall_mod.impact(database, recall_id, TODAY)
    got = {c.code: (c.from_day, c.to_day, c.destination) for c in report.containers}
    # C1 was in use before the suspect date and after it: reached from the suspect date to today.
    # C2 was filled after it. C3 was taken out of use (day -15) before the solution became suspect (day -10).
    assert got == {
        c1["code"]: (day(-10), TODAY, "CHM 110 · section A · room 214"),
        c2["code"]: (day(-5), TODAY, "CHM 110 · section B · room 214"),
    }
    assert c3["code"] not in got
    dests = [(d.destination, d.containers, d.first_day, d.volume_l) for d in report.destinations]
    assert dests == [
        ("CHM 110 · section A · room 214", (c1["code"],), day(-10), 1.0),
        ("CHM 110 · section B · room 214", (c2["code"],), day(-5), 0.5),
    ]


def test_reach_in_csv_pdf_and_page(app, database, signed_in_client):
    batch, (c1, c2, _), recall_id = _world(app, database)
    report = recall_mod.impact(database, recall_id, TODAY)
    lines = [line for line in recall_mod.impact_csv(report).splitlines() if not line.startswith('"#')]
    rows = list(csv.DictReader(io.StringIO("\n".join(lines))))
    reached = [r for r in rows if r["section"] == "container"]
    assert [(r["from"], r["to"], r["days"]) for r in reached] == [
        (day(-10).isoformat(), TODAY.isoformat(), "11"),  # days -10..0, both ends: 11 days
        (day(-5).isoformat(), TODAY.isoformat(), "6"),
    ]
    assert "for CHM 110 · section B · room 214" in reached[1]["note"]
    text = " ".join(p.extract_text() for p in PdfReader(io.BytesIO(recall_report_pdf(report, printed_on=TODAY))).pages)
    assert c1["code"] in text and "section B" in text
    page = signed_in_client("staff").get(f"/recalls/{recall_id}").get_data(as_text=True)
    assert f'href="/containers/{c2["code"]}"' in page
    assert "CHM 110 · section A · room 214</strong>: 1 container, 1.000 L" in page
