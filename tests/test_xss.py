"""Free text typed anywhere is shown escaped on every page that displays it (Jinja autoescaping)."""

from __future__ import annotations

import datetime as dt
import re

from recorded_runs import record

from stockroom import db as dbmod
from stockroom import records, tokens, workflow

PAYLOAD = '<script>alert("xss")</script><img src=x onerror=alert(1)>'
TODAY = dt.date.today()


def test_payload_in_every_free_text_field_is_escaped_everywhere(app, signed_in_client, make_user, form_token):
    staff_user = make_user("xss-staff", "staff", display_name="Eve " + PAYLOAD)
    conn = dbmod.connect(app.config["DATABASE"])
    batch = records.create_batch(
        conn,
        {
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20,
            "prepared_on": TODAY.isoformat(),
            "prepared_by": PAYLOAD,
            "concentrate_lot": PAYLOAD,
            "water_grade": PAYLOAD,
            "container": PAYLOAD,
            "notes": PAYLOAD,
        },
        "xss-staff",
    )
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "supplier": PAYLOAD,
            "supplier_lot": PAYLOAD,
            "storage_note": PAYLOAD,
            "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 120,
        },
        "xss-staff",
    )
    reps = [
        {"mass_g": m, "volume_ml": v, "initial_ml": 0.1, "final_ml": 0.1 + v, "blank_ml": 0.0}
        for m, v in ((0.8179, 40.09), (0.8226, 40.33), (0.8253, 40.45), (0.8060, 39.52))
    ]
    meta = {
        "purpose": "certify",
        "performed_on": TODAY.isoformat(),
        "analyst": PAYLOAD,
        "endpoint": PAYLOAD,
        "notes": PAYLOAD,
        "burette_capacity_ml": 50.0,
    }
    run_id, _ = record(conn, app.config, batch, meta, reps, "xss-staff", lot=lot, excluded={2: PAYLOAD})
    workflow.accept(conn, run_id, "xss-staff", reason=PAYLOAD)
    records.amend_batch(conn, batch["id"], "container", PAYLOAD + " (2)", PAYLOAD, "xss-staff")
    tokens.create(conn, staff_user.id, "xss-staff", PAYLOAD)
    records.withdraw_batch(conn, batch["id"], TODAY, PAYLOAD, "xss-staff")
    conn.close()
    client = signed_in_client("staff", username="xss-staff")
    pages = [
        "/",
        "/batches/",
        f"/batches/{batch['code']}",
        f"/runs/{run_id}",
        "/lots/",
        f"/lots/{lot['code']}",
        "/audit",
        "/account/tokens",
        f"/lab-day?date={TODAY.isoformat()}&titrant=NaOH",
    ]
    shown = 0
    for url in pages:
        html = client.get(url).get_data(as_text=True)
        assert "<script>alert" not in html, url
        assert "onerror=alert" not in html.replace("onerror=alert(1)&gt;", ""), url
        assert not re.search(r"<img[^>]*onerror", html), url
        if "&lt;script&gt;alert(" in html:
            shown += 1
    assert shown >= 7  # the payload really is displayed (escaped) on most of these pages
