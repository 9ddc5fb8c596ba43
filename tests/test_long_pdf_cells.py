"""Lab-day and recall PDFs stay printable when a lot carries very many open recalls (cells split across pages)."""

from __future__ import annotations

import datetime as dt
import io

import pypdf
import pytest

from stockroom import db as dbmod
from stockroom import recall
from stockroom.demo import build_demo

TODAY = dt.date(2026, 12, 2)
MANY = 200


@pytest.fixture(scope="module")
def crowded(tmp_path_factory):
    """The invented demo with 200 open recalls on the lot most releases rest on."""
    path = tmp_path_factory.mktemp("crowded") / "demo.db"
    build_demo(str(path), today=TODAY, password="violet kettle under the stairs")
    conn = dbmod.connect(path)
    try:
        lot_id = conn.execute(
            "SELECT standard_lot_id FROM runs WHERE standard_lot_id IS NOT NULL "
            "GROUP BY standard_lot_id ORDER BY count(*) DESC LIMIT 1"
        ).fetchone()[0]
        ids = [
            recall.open_recall(
                conn, "lot", lot_id, TODAY - dt.timedelta(days=150), f"suspect assay, complaint {i} (invented)", TODAY, "test"
            )
            for i in range(MANY)
        ]
    finally:
        conn.close()
    return path, ids


def _pages(pdf: bytes) -> list[str]:
    return [p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages]


def test_the_lab_day_sheet_prints_with_many_open_recalls(crowded):
    from stockroom import create_app

    path, _ = crowded
    app = create_app({"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "test-only", "LAB_TIMEZONE": "UTC"})
    for titrant in ("NaOH", "HCl"):
        resp = app.test_client().get(f"/lab-day.pdf?date={TODAY - dt.timedelta(days=10)}&titrant={titrant}")
        assert resp.status_code == 200, resp.get_data(as_text=True)[:500]
        text = "\n".join(_pages(resp.data))
        assert "complaint 199" in text or "recall" in text.lower()


def test_the_recall_report_prints_with_many_open_recalls(crowded):
    from stockroom.pdf.recall_report import recall_report_pdf

    path, ids = crowded
    conn = dbmod.connect(path)
    try:
        report = recall.impact(conn, ids[-1], TODAY)
    finally:
        conn.close()
    pages = _pages(recall_report_pdf(report, printed_on=TODAY))
    assert len(pages) >= 1 and "complaint 199" in "\n".join(pages)


def test_a_tall_row_becomes_a_group_of_rows():
    from stockroom.pdf.tall_rows import group_ends, split_row

    rows = split_row([["a"], list("bcdefghij"), []], per_row=4)
    assert rows == [[["a"], list("bcde"), []], [[], list("fghi"), []], [[], ["j"], []]]
    assert split_row([["a"], ["b"]]) == [[["a"], ["b"]]]
    assert group_ends([3, 1, 2]) == [3, 4, 6]  # after a header row: rows 1-3, 4, 5-6
