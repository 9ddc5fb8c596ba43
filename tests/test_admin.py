"""Administration pages: accounts, reagent policy as data, settings shown read-only."""

from __future__ import annotations

import datetime as dt

from formposts import post

from stockroom import db as dbmod
from stockroom import records


def test_admin_creates_and_disables_accounts(app, signed_in_client, form_token):
    admin = signed_in_client("admin")
    page = admin.get("/admin/users")
    assert page.status_code == 200 and "admin-user" in page.get_data(as_text=True)
    resp = post(
        admin,
        form_token,
        "/admin/users",
        {"username": "newstaff", "display_name": "New Staff", "role": "staff", "password": "short"},
    )
    assert resp.status_code == 422 and "12" in resp.get_data(as_text=True)
    assert 'value="short"' not in resp.get_data(as_text=True)  # a password is never sent back
    resp = post(
        admin,
        form_token,
        "/admin/users",
        {"username": "newstaff", "display_name": "New Staff", "role": "staff", "password": "bench-Test-long-9f"},
    )
    assert resp.status_code == 303
    assert post(admin, form_token, "/admin/users/newstaff/disable", {"reason": ""}).status_code == 422
    assert post(admin, form_token, "/admin/users/newstaff/disable", {"reason": "left the lab"}).status_code == 303
    assert "disabled" in admin.get("/admin/users").get_data(as_text=True)
    assert signed_in_client("staff").get("/admin/users").status_code == 403


def test_policy_change_is_a_new_row_in_force_from_its_date(app, signed_in_client, form_token):
    admin = signed_in_client("admin")
    tomorrow = dt.date.today() + dt.timedelta(days=1)
    form = {
        "reagent": "NaOH",
        "nominal_molarities": "0.1, 0.5",
        "shelf_life_days": "60",
        "recheck_interval_days": "7",
        "tolerance_pct": "0.3",
        "max_rsd_pct": "0.15",
        "min_replicates": "4",
        "effective_from": tomorrow.isoformat(),
        "reason": "",
    }
    resp = post(admin, form_token, "/admin/policy", form)
    assert resp.status_code == 422 and "reason" in resp.get_data(as_text=True)
    bad = dict(form, reason="tighter", recheck_interval_days="90")
    assert post(admin, form_token, "/admin/policy", bad).status_code == 422
    assert post(admin, form_token, "/admin/policy", dict(form, reason="CO2 uptake seen")).status_code == 303
    conn = dbmod.connect(app.config["DATABASE"])
    today_policy = records.policy_for(conn, "NaOH", dt.date.today())
    new = records.policy_for(conn, "NaOH", tomorrow)
    assert today_policy.recheck_interval_days == 14  # the starting policy still applies today
    assert (new.recheck_interval_days, new.shelf_life_days, new.min_replicates) == (7, 60, 4)
    assert new.tolerance_rel == 0.003 and new.max_rsd == 0.0015 and new.nominal_molarities == (0.1, 0.5)
    conn.close()
    assert signed_in_client("staff").post("/admin/policy", data={}).status_code in (400, 403)


def test_settings_page_hides_the_secret(signed_in_client):
    html = signed_in_client("admin").get("/admin/settings").get_data(as_text=True)
    assert "BALANCE_LINEARITY_G" in html and "(set; not shown)" in html and "test-only" not in html


def _input_value(page: str, name: str) -> str:
    import re

    found = re.search(rf'<input id="f-{name}" name="{name}" type="[a-z]+" value="([^"]*)"', page)
    assert found, name
    return found.group(1)


def test_policy_form_starts_from_the_policy_in_force(signed_in_client):
    # The starting NaOH policy (policy.DEFAULT_POLICIES): 90 days' shelf life, re-check every 14 days,
    # tolerance 0.5 %, RSD 0.2 %, three replicates, 0.1/0.5/1 mol/L.
    admin = signed_in_client("admin")
    page = admin.get("/admin/policy?reagent=NaOH").get_data(as_text=True)
    assert '<option value="NaOH" selected>' in page
    assert _input_value(page, "shelf_life_days") == "90"
    assert _input_value(page, "recheck_interval_days") == "14"
    assert _input_value(page, "tolerance_pct") == "0.5"
    assert _input_value(page, "max_rsd_pct") == "0.2"
    assert _input_value(page, "min_replicates") == "3"
    assert _input_value(page, "nominal_molarities") == "0.1, 0.5, 1"
    hcl = admin.get("/admin/policy?reagent=HCl").get_data(as_text=True)
    assert _input_value(hcl, "shelf_life_days") == "365" and _input_value(hcl, "recheck_interval_days") == "90"
    assert _input_value(hcl, "reason") == ""
