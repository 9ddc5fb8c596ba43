"""One record per click: a form posted twice with the same one-time form id makes one record."""

from __future__ import annotations

import datetime as dt
import re
from html import unescape

import pytest
from formposts import count

from stockroom import db as dbmod
from stockroom import records, run_input, workflow
from stockroom.web.once import ALREADY

TODAY = dt.datetime.now(dt.UTC).date()


def iso(days: int) -> str:
    return (TODAY + dt.timedelta(days=days)).isoformat()


@pytest.fixture
def world(app):
    """A lot, a released NaOH batch with an undecided run, and an instrument (all invented)."""
    conn = dbmod.connect(app.config["DATABASE"])
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": iso(300),
            "dried_on": iso(-1),
            "dried_at_c": 120,
        },
        "setup",
    )
    batch = records.create_batch(
        conn,
        {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": iso(-2), "prepared_by": "t"},
        "setup",
    )

    def new_run() -> int:
        data = {
            "method": "primary",
            "purpose": "certify",
            "standard_lot_id": lot["id"],
            "performed_on": TODAY.isoformat(),
            "analyst": "Setup",
            "burette_capacity_ml": 50.0,
            "replicates": [
                {"mass_g": m, "initial_ml": 0.10, "final_ml": t}
                for m, t in ((0.8012, 39.42), (0.8107, 39.90), (0.8203, 40.37), (0.8301, 40.83))
            ],
        }
        run = run_input.parse_run(data, today=TODAY, prepared_on=TODAY - dt.timedelta(days=2))
        return workflow.record_run(conn, app.config, batch, run, "setup")[0]

    released = new_run()
    workflow.accept(conn, released, "setup")
    out = {"lot": lot, "batch": batch, "run": new_run(), "conn": conn}
    yield out
    conn.close()


def _cases():
    code = "{batch}"
    return [
        (
            "batch",
            "staff",
            "/batches/new",
            "/batches/new",
            "batches",
            {
                "reagent": "HCl",
                "nominal_molarity": "0.1",
                "volume_l": "20",
                "source_form": "liquid",
                "concentrate_lot": "INV-HCL-0042 (invented)",
                "concentrate_assay_pct": "37",
                "concentrate_density_g_ml": "1.19",
                "prepared_on": TODAY.isoformat(),
                "prepared_by": "A. Tester",
                "water_grade": "deionized, Type II",
                "container": "20 L HDPE carboy",
                "notes": "",
                "action": "register",
            },
        ),
        (
            "lot",
            "staff",
            "/lots/new",
            "/lots/new",
            "standard_lots",
            {
                "substance": "KHP",
                "supplier": "Invented Reagents Ltd",
                "supplier_lot": "IR-KHP-7781 (invented)",
                "assay_pct": "99.98",
                "assay_u_pct": "0.02",
                "assay_k": "2",
                "expires_on": iso(400),
                "received_on": iso(-20),
                "dried_on": iso(-2),
                "dried_at_c": "120",
                "storage_note": "",
            },
        ),
        (
            "run",
            "staff",
            f"/batches/{code}/runs/new",
            f"/batches/{code}/runs/new?method=primary",
            "runs",
            {
                "purpose": "recheck",
                "standard_lot_id": "{lot}",
                "performed_on": TODAY.isoformat(),
                "analyst": "A. Tester",
                "burette_capacity_ml": "50.0",
                "action": "record",
                **{f"r{i}_mass_g": f"{0.80 + 0.01 * i:.4f}" for i in range(1, 4)},
                **{f"r{i}_initial_ml": "0.10" for i in range(1, 4)},
                **{f"r{i}_final_ml": f"{39.3 + 0.49 * i:.2f}" for i in range(1, 4)},
            },
        ),
        (
            "exclusion",
            "staff",
            "/runs/{run}",
            "/runs/{run}/exclude",
            "exclusions",
            {"position": "2", "reason": "bubble in the tip (invented)"},
        ),
        (
            "decision",
            "staff",
            "/runs/{run}",
            "/runs/{run}/decide",
            "decisions",
            {"decision": "accept", "released_on": TODAY.isoformat(), "reason": "replaces the setup release (invented)"},
        ),
        (
            "withdrawal",
            "staff",
            f"/batches/{code}/withdraw",
            f"/batches/{code}/withdraw",
            "withdrawals",
            {"withdrawn_on": TODAY.isoformat(), "reason": "carboy cracked (invented)"},
        ),
        (
            "label print",
            "staff",
            f"/batches/{code}/labels",
            f"/batches/{code}/labels",
            "label_prints",
            {"layout": "carboy-a5", "copies": "1", "start": "1"},
        ),
        (
            "account",
            "admin",
            "/admin/users",
            "/admin/users",
            "users",
            {"username": "newstaff", "display_name": "New Staff", "role": "staff", "password": "bench-Test-long-9f"},
        ),
        ("token", "staff", "/account/tokens", "/account/tokens", "api_tokens", {"label": "bench tablet"}),
        (
            "recall",
            "staff",
            "/recalls/new",
            "/recalls/new",
            "recalls",
            {"subject": "lot:{lot}", "suspect_from": iso(-1), "reason": "assay in doubt (invented)"},
        ),
        (
            "instrument",
            "staff",
            "/instruments/new",
            "/instruments/new",
            "instruments",
            {
                "code": "BUR-07",
                "kind": "burette",
                "capacity": "50",
                "accuracy_class": "A",
                "tolerance_ml": "",
                "division_ml": "0.1",
                "calibrated_on": iso(-3),
                "next_due_on": iso(362),
                "outcome": "pass",
                "certificate_ref": "CERT-0071",
                "calibrated_by": "Invented Metrology Ltd",
            },
        ),
        (
            "policy",
            "admin",
            "/admin/policy",
            "/admin/policy",
            "reagent_policies",
            {
                "reagent": "NaOH",
                "nominal_molarities": "0.1, 0.5",
                "shelf_life_days": "60",
                "recheck_interval_days": "7",
                "tolerance_pct": "0.3",
                "max_rsd_pct": "0.15",
                "min_replicates": "4",
                "effective_from": iso(1),
                "reason": "CO2 uptake seen (invented)",
            },
        ),
        (
            "amendment",
            "staff",
            f"/batches/{code}",
            f"/batches/{code}/amend",
            "amendments",
            {"field": "container", "new_value": "10 L carboy", "reason": "wrong size typed"},
        ),
    ]


def _fill(text: str, world) -> str:
    return (
        text.replace("{batch}", world["batch"]["code"])
        .replace("{run}", str(world["run"]))
        .replace("{lot}", str(world["lot"]["id"]))
    )


def _hidden_fields(page: str, action: str) -> dict[str, str]:
    """The hidden fields of the first form on the page posting to `action` (CSRF token, form id...)."""
    for attrs, body in re.findall(r"<form([^>]*)>(.*?)</form>", page, re.S):
        if f'action="{action}"' in attrs and "form_id" in body:
            return {n: unescape(v) for n, v in re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)">', body)}
    raise AssertionError(f"no form with a form id posting to {action}")


@pytest.mark.parametrize("kind,role,page,action,table,data", _cases(), ids=[c[0] for c in _cases()])
def test_a_form_posted_twice_makes_one_record(app, world, signed_in_client, kind, role, page, action, table, data):
    client = signed_in_client(role)
    page, action = _fill(page, world), _fill(action, world)
    data = {k: _fill(v, world) for k, v in data.items()}
    resp = client.get(page)
    assert resp.status_code == 200, (kind, resp.status_code)
    hidden = _hidden_fields(resp.get_data(as_text=True), action)
    assert re.fullmatch(r"[A-Za-z0-9_-]{24}", hidden["form_id"])
    form = {**hidden, **data}
    before = count(app, table)
    first = client.post(action, data=form)
    assert first.status_code in (200, 303), (kind, first.status_code, first.get_data(as_text=True)[:400])
    assert count(app, table) == before + 1
    second = client.post(action, data=form)
    assert count(app, table) == before + 1, f"{kind}: the second submission wrote a record"
    assert second.status_code == 303
    expected = first.headers["Location"] if first.status_code == 303 else page
    assert second.headers["Location"] == expected
    shown = client.get(second.headers["Location"]).get_data(as_text=True)
    assert ALREADY in unescape(shown)
    assert count(app, "form_submissions") == 1


def test_a_refused_form_stores_no_id_and_can_be_sent_again(app, world, signed_in_client):
    staff = signed_in_client("staff")
    hidden = _hidden_fields(staff.get("/lots/new").get_data(as_text=True), "/lots/new")
    good = {
        "substance": "KHP",
        "supplier": "Invented Reagents Ltd",
        "supplier_lot": "IR-KHP-7782 (invented)",
        "assay_pct": "99.98",
        "assay_u_pct": "0.02",
        "assay_k": "2",
        "expires_on": iso(400),
        "received_on": iso(-20),
        "dried_on": iso(-2),
        "dried_at_c": "120",
        "storage_note": "",
    }
    before = count(app, "standard_lots")
    bad = staff.post("/lots/new", data={**hidden, **good, "assay_pct": "abc"})
    assert bad.status_code == 422 and count(app, "form_submissions") == 0
    fixed = staff.post("/lots/new", data={**hidden, **good})
    assert fixed.status_code == 303 and count(app, "standard_lots") == before + 1


def test_a_form_id_the_server_did_not_make_is_refused(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    resp = staff.post(
        f"/runs/{world['run']}/exclude",
        data={"csrf_token": form_token(staff, "/"), "form_id": "<script>", "position": "1", "reason": "x"},
    )
    assert resp.status_code == 422 and count(app, "exclusions") == 0


def test_a_stale_accept_from_the_page_is_refused_with_409_and_writes_nothing(app, world, signed_in_client):
    staff = signed_in_client("staff")
    run_id = world["run"]
    page = staff.get(f"/runs/{run_id}").get_data(as_text=True)
    accept = _hidden_fields(page, f"/runs/{run_id}/decide")
    exclude = [
        {n: unescape(v) for n, v in re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)">', body)}
        for attrs, body in re.findall(r"<form([^>]*)>(.*?)</form>", page, re.S)
        if f'action="/runs/{run_id}/exclude"' in attrs
    ][0]
    assert staff.post(f"/runs/{run_id}/exclude", data={**exclude, "position": "3", "reason": "splashed"}).status_code == 303
    resp = staff.post(f"/runs/{run_id}/decide", data={**accept, "decision": "accept"})
    assert resp.status_code == 409
    text = unescape(resp.get_data(as_text=True))
    assert "the result changed since you opened the page: Replicate 3 was left out by staff-user at" in text
    assert count(app, "decisions") == 1 and count(app, "releases") == 1  # only the setup's release
