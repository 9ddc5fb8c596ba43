"""The demo's invented dispensings: where its batches went, as the pages and the JSON show it."""

from __future__ import annotations

import datetime as dt

from stockroom import create_app
from stockroom import db as dbmod
from stockroom.demo import build_demo, load_dispensings

PASSWORD = "demo-Test-5e1f"


def test_demo_batches_show_where_they_went(tmp_path, quick_password_hashing):
    path = tmp_path / "demo.db"
    build_demo(str(path), password=PASSWORD)
    assert load_dispensings()["invented"] is True
    conn = dbmod.connect(path)
    codes = {r[0]: r[1] for r in conn.execute("SELECT reagent || ':' || prepared_on, code FROM batches")}
    conn.close()
    today = dt.date.today()
    hcl = codes[f"HCl:{(today - dt.timedelta(days=176)).isoformat()}"]
    naoh = codes[f"NaOH:{(today - dt.timedelta(days=61)).isoformat()}"]
    app = create_app({"DATABASE": str(path), "TESTING": True, "SECRET_KEY": "t", "LAB_TIMEZONE": "UTC"})
    client = app.test_client()
    data = client.get(f"/api/v1/batches/{hcl}").get_json()
    # 20 L registered; 1 + 1 + 1 + 2 + 1 L dispensed and 0.3 L spilt (demo_data/dispensings.json): 13.7 L left.
    assert data["volume_remaining_l"] == 13.7
    assert [c["destination"]["text"] for c in data["containers"]][:3] == [
        "CHM 110 · section A · room 214",
        "CHM 110 · section B · room 214",
        "CHM 110 · section C · room 214",
    ]
    drift = {c["code"]: c["status"] for c in client.get(f"/api/v1/batches/{naoh}").get_json()["containers"]}
    # The bottle filled 30 days ago kept 28 days (the demo's NaOH container shelf life): expired. The one
    # filled 16 days ago follows its batch, drifting now: on hold.
    assert drift == {f"{naoh}-C01": "expired", f"{naoh}-C02": "on_hold"}
