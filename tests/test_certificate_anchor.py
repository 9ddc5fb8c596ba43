"""A certificate's footer prints the audit trail's head, so a paper copy anchors the trail (read back with pypdf)."""

from __future__ import annotations

import datetime as dt
import io
import re
import sqlite3

import pypdf
from click.testing import CliRunner

from stockroom import db as dbmod
from stockroom import records
from stockroom.cli import main
from stockroom.demo import build_demo
from stockroom.pdf import certificates

TODAY = dt.date(2026, 12, 1)


def _text(pdf: bytes) -> str:
    return "\n".join(page.extract_text() for page in pypdf.PdfReader(io.BytesIO(pdf)).pages)


def test_every_page_of_a_certificate_carries_the_head_and_verify_takes_it(tmp_path):
    path = tmp_path / "live.db"
    build_demo(str(path), today=TODAY)
    conn = dbmod.connect(path)
    try:
        code = conn.execute("SELECT b.code FROM releases r JOIN batches b ON b.id = r.batch_id ORDER BY r.id LIMIT 1").fetchone()[
            0
        ]
        data = certificates.certificate_data_for_batch(conn, code, TODAY)
        head = records.audit.chain_head(conn)
    finally:
        conn.close()
    assert head is not None
    pdf = certificates.build_certificate(data)
    pages = pypdf.PdfReader(io.BytesIO(pdf)).pages
    printed = f"{head[0]}:{head[1][:16]}"
    for page in pages:
        assert printed in page.extract_text()
    found = re.search(r"stockroom verify --anchor\): (\d+):([0-9a-f]{16})", _text(pdf))
    assert found and f"{found[1]}:{found[2]}" == printed
    # The printed head is an anchor: it verifies while the entry stands, and fails once it is rewritten.
    ok = CliRunner().invoke(main, ["verify", "--db", str(path), "--anchor", printed])
    assert ok.exit_code == 0, ok.output
    c = sqlite3.connect(path)
    c.execute("DROP TRIGGER events_no_update")
    c.execute("UPDATE events SET hash = ? WHERE id = ?", ["f" * 64, head[0]])
    c.commit()
    c.close()
    bad = CliRunner().invoke(main, ["verify", "--db", str(path), "--anchor", printed])
    assert bad.exit_code == 1 and f"audit entry {head[0]}" in bad.output


def test_the_anchor_text_of_an_empty_trail():
    assert certificates.head_anchor(None) == "none (the audit trail is empty)"
    assert certificates.head_anchor((41, "0123456789abcdef" * 4)) == "41:0123456789abcdef"
