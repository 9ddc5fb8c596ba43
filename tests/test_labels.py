"""Batch labels: layouts as data, what a label says, QR codes, text that fits, printing and its record.

PDFs are read back with pypdf; QR codes are rendered with poppler's pdftoppm and decoded with pyzbar
(Debian's libzbar0), both independent of reportlab, which wrote them.
"""

from __future__ import annotations

import datetime as dt
import io
import os
import re
import shutil
import sqlite3
import subprocess
import tempfile
import time
from pathlib import Path

import pypdf
import pytest
from click.testing import CliRunner
from recorded_runs import record
from reportlab.graphics.barcode.qrencoder import QRErrorCorrectLevel
from reportlab.lib.units import mm
from reportlab.pdfbase.pdfmetrics import stringWidth

from stockroom import db as dbmod
from stockroom import readmodel, records
from stockroom.formatting import molarity as format_molarity
from stockroom.pdf import labels, layouts
from stockroom.pdf.labels import LabelOverflow, build_labels, fit_report, label_content, with_content

SHIPPED = ("bottle", "carboy-a5", "carboy-half-letter", "sheet-a4-21", "sheet-letter-30")
# Four invented replicates of about 0.1 mol/L NaOH against KHP: gross, tare (g), initial, final (mL).
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]
LONG_NAME = "Dr. Maria-Magdalena Lindqvist-Okonkwo van der Berg-Abernathy, senior technician (b)"[:80]


def lab_today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC


def make_batch(db, reagent, nominal, prepared_by="R. Okafor (invented)", days_ago=3):
    return records.create_batch(
        db,
        {
            "reagent": reagent,
            "nominal_molarity": nominal,
            "volume_l": 20,
            "prepared_on": (lab_today() - dt.timedelta(days=days_ago)).isoformat(),
            "prepared_by": prepared_by,
        },
        "setup",
    )


def make_lot(db):
    return records.create_lot(
        db,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "supplier": "Invented Chemicals",
            "supplier_lot": "K-0001",
            "expires_on": (lab_today() + dt.timedelta(days=300)).isoformat(),
            "dried_on": lab_today().isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )


def release(db, config, batch, lot, molarity, U, *, days_ago=1, u=None):
    """Record a run on the batch and release it at exactly the given value (mol/L) — a stand-in for any value."""
    on = lab_today() - dt.timedelta(days=days_ago)
    reps = [
        {
            "mass_gross_g": float(g),
            "mass_tare_g": float(t),
            "initial_ml": float(i),
            "final_ml": float(f),
            "volume_ml": round(float(f) - float(i), 2),
        }
        for g, t, i, f in GOOD
    ]
    meta = {
        "purpose": "certify",
        "performed_on": on.isoformat(),
        "analyst": "R. Okafor",
        "burette_capacity_ml": 50.0,
        "endpoint": "phenolphthalein",
    }
    run_id, _ = record(db, config, batch, meta, reps, "setup", lot=lot)
    return records.decide_run(
        db,
        run_id,
        "accept",
        "",
        "setup",
        release={
            "molarity": molarity,
            "u": u if u is not None else U / 2,
            "U": U,
            "k": 2.0,
            "reference_temperature_c": 20.0,
            "released_on": on.isoformat(),
            "expires_on": (on + dt.timedelta(days=60)).isoformat(),
            "recheck_interval_days": 14,
            "tolerance_rel": 0.005,
        },
    )


@pytest.fixture
def world(app, database):
    lot = make_lot(database)
    naoh = make_batch(database, "NaOH", 0.1)
    release_id = release(database, app.config, naoh, lot, 0.10214, 0.00020)
    strong = make_batch(database, "NaOH", 1.0)
    return {"config": app.config, "db": database, "lot": lot, "naoh": naoh, "release_id": release_id, "strong": strong}


def pdf_text(pdf: bytes, page: int = 0) -> str:
    return pypdf.PdfReader(io.BytesIO(pdf)).pages[page].extract_text()


def render_png(pdf: bytes, dpi: int = 300, page: int = 1):
    from PIL import Image

    if shutil.which("pdftoppm") is None:
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true but pdftoppm (poppler-utils) is not installed; .ci/run installs it")
        pytest.skip("pdftoppm (poppler-utils) is not installed")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "l.pdf"
        path.write_bytes(pdf)
        subprocess.run(
            [
                "pdftoppm",
                "-r",
                str(dpi),
                "-png",
                "-f",
                str(page),
                "-l",
                str(page),
                "-singlefile",
                str(path),
                str(Path(tmp) / "l"),
            ],
            check=True,
            capture_output=True,
            timeout=60,
        )
        return Image.open(Path(tmp) / "l.png").convert("L")


def qr_decode(image):
    try:
        from pyzbar.pyzbar import decode
    except (ImportError, OSError):  # pyzbar not installed, or libzbar0 missing
        if os.environ.get("CI") == "true":
            raise
        pytest.skip("pyzbar with libzbar0 is needed to decode QR codes")
    return [d.data.decode("utf-8") for d in decode(image) if d.type == "QRCODE"]


# ---------------------------------------------------------------- layouts as data


def test_every_shipped_layout_loads_and_fits_its_page():
    found, broken = layouts.load_all()
    assert broken == []
    assert set(SHIPPED) <= set(found)
    # ISO 216 A4 210 x 297 and A5 148 x 210 mm; ANSI letter 8.5 x 11 in and half letter 5.5 x 8.5 in.
    assert found["sheet-a4-21"].page_width == 210 and found["sheet-a4-21"].page_height == 297
    assert found["carboy-a5"].page_width == 210 and found["carboy-a5"].page_height == 148  # landscape
    letter, half = found["sheet-letter-30"], found["carboy-half-letter"]
    assert (letter.page_width, letter.page_height) == pytest.approx((8.5 * 25.4, 11 * 25.4))
    assert (half.page_width, half.page_height) == pytest.approx((8.5 * 25.4, 5.5 * 25.4))
    assert found["sheet-letter-30"].per_page == 30 and found["sheet-a4-21"].per_page == 21
    for lay in found.values():
        x, y = lay.origin_mm(lay.per_page)  # the last label on the sheet
        assert x + lay.label_width <= lay.page_width + 0.01 and y + lay.label_height <= lay.page_height + 0.01


def test_a_new_layout_is_a_new_file_only(tmp_path, world):
    text = (layouts.layouts_folder() / "bottle.toml").read_text()
    text = text.replace('title = "Bottle', 'title = "Our own bottle')
    (tmp_path / "our-bottle.toml").write_text(text)
    found, broken = layouts.load_all(tmp_path)
    assert broken == [] and list(found) == ["our-bottle"]
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    pdf = build_labels(content, found["our-bottle"], copies=2)
    assert len(pypdf.PdfReader(io.BytesIO(pdf)).pages) == 2


BOTTLE = Path(__file__).resolve().parents[1] / "labels" / "bottle.toml"


@pytest.mark.parametrize(
    ("change", "named"),
    [
        (("[grid]\nrows = 1", "[grid]\nrows = 1\ncolums = 2"), "[grid] colums"),
        (("columns = 1", "columns = 3"), "[grid] columns"),
        (("box_mm = [77, 2.5, 20, 20]", "box_mm = [85, 2.5, 20, 20]"), "qr: box_mm"),
        (("box_mm = [77, 2.5, 20, 20]", "box_mm = [77, 2.5, 9, 9]"), "at least 12"),
        (('text = "{certified}"', 'text = "{certified_value}"'), "unknown placeholder {certified_value}"),
        (('text = "{certified}"', 'text = "{batch_id}"'), "{certified}"),
        (("box_mm = [3, 10.5, 72, 5.5]", "box_mm = [3, 2.5, 72, 5.5]"), "overlaps"),
        (('size = "A4"', 'size = "A3"'), "[page] size"),
        (("width_mm = 100\nheight_mm = 70\n\n[grid]", "width_mm = 100\nheight_mm = seventy\n\n[grid]"), "not valid TOML"),
        (('kind = "qr"', 'kind = "barcode"'), "kind: must be one of"),
        (("size_pt = 17", "size_pt = 2"), "size_pt: must be at least 4"),
    ],
)
def test_layout_problems_name_the_key(change, named):
    text = BOTTLE.read_text()
    old, new = change
    if old == 'size = "A4"':
        text = text.replace("[page]\nwidth_mm = 100\nheight_mm = 70", '[page]\nsize = "A4"')
        old = 'size = "A4"'
    assert old in text
    with pytest.raises(layouts.LayoutError) as caught:
        layouts.parse_layout("broken", text.replace(old, new, 1))
    assert named in caught.value.message, caught.value.problems


def test_an_unknown_layout_name_lists_the_layouts():
    with pytest.raises(layouts.LayoutError) as caught:
        layouts.get("carboy-a4")
    assert "carboy-a5" in caught.value.message


# ---------------------------------------------------------------- what a label says


def test_a_released_batch_label_carries_the_certified_value_dates_and_hazard(world):
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    pdf = build_labels(content, layouts.get("carboy-a5"), copies=1, first_serial=42)
    text = pdf_text(pdf)
    rel = readmodel.batch_history(world["db"], world["naoh"]["id"])["releases"][0]
    certified = format_molarity(0.10214, 0.00020, 2.0)
    assert certified == "0.10214 ± 0.00020 mol/L (k = 2)"
    assert f"{certified} at 20 °C" in text
    assert world["naoh"]["code"] in text
    assert "Sodium hydroxide NaOH, 0.1 mol/L nominal" in text
    assert f"Expires {rel['expires_on']}" in text
    run_day = (lab_today() - dt.timedelta(days=1)).isoformat()
    assert f"Standardized {run_day}" in text
    assert f"Prepared {world['naoh']['prepared_on']} by R. Okafor (invented)" in text
    # ~0.1 mol/L NaOH: H290 only, Warning (DOMAIN primer, from memory — verify against the SDS).
    assert "WARNING" in text and "H290 May be corrosive to metals." in text and "H314" not in text
    assert "P234 Keep only in original packaging." in text
    assert "local regulations and your institution's chemical hygiene plan" in text
    assert "Label 000042" in text
    assert "NOT FOR USE" not in text


def test_an_unreleased_batch_prints_not_for_use_and_no_value(world):
    content = label_content(world["db"], world["config"], world["strong"], lab_today())
    assert not content.released and content.release_id is None
    for name in ("carboy-a5", "bottle"):
        text = pdf_text(build_labels(content, layouts.get(name), copies=1))
        assert "NOT FOR USE — awaiting standardization" in text
        assert "mol/L (k =" not in text and "±" not in text
        assert "Expires —" in text
        # 1 mol/L NaOH: Danger, H314 (CLP Annex VI, Skin Corr. 1B from 2 %; from memory), H318 not beside it.
        assert "DANGER" in text and "H314 Causes severe skin burns and eye damage." in text and "H318" not in text


def test_a_withdrawn_batch_prints_not_for_use_withdrawn(world):
    records.withdraw_batch(world["db"], world["naoh"]["id"], lab_today(), "cap left off overnight", "setup")
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    text = pdf_text(build_labels(content, layouts.get("carboy-a5"), copies=1))
    assert "NOT FOR USE — withdrawn" in text and "0.10214" not in text


def test_an_expired_batch_prints_not_for_use_expired(world):
    later = lab_today() + dt.timedelta(days=90)
    content = label_content(world["db"], world["config"], world["naoh"], later)
    assert content.certified == "NOT FOR USE — expired"


def test_no_classification_means_no_label(world):
    batch = make_batch(world["db"], "HClO4", 0.1)  # no starting classification for perchloric acid
    with pytest.raises(labels.Conflict) as caught:
        label_content(world["db"], world["config"], batch, lab_today())
    assert "no hazard classification" in caught.value.message


# ---------------------------------------------------------------- QR codes


def test_the_qr_code_opens_the_batch_page_at_the_configured_address(world):
    config = dict(world["config"], BASE_URL="https://prep.example.org/stockroom/")
    content = label_content(world["db"], config, world["naoh"], lab_today())
    url = f"https://prep.example.org/stockroom/batches/{world['naoh']['code']}"
    assert content.url == url
    decoded = qr_decode(render_png(build_labels(content, layouts.get("carboy-a5"), copies=1), dpi=150))
    assert decoded == [url]
    # The smallest QR code shipped (12.2 mm on the 30-label sheet), at a 300 dpi office printer's resolution:
    # each label, cut out of the page image, reads back on its own.
    sheet = layouts.get("sheet-letter-30")
    dpi = 300
    image = render_png(build_labels(content, sheet, copies=30), dpi=dpi)
    px = dpi / 25.4
    for position in range(1, 31):
        x, y = sheet.origin_mm(position)
        crop = image.crop((int(x * px), int(y * px), int((x + sheet.label_width) * px), int((y + sheet.label_height) * px)))
        assert qr_decode(crop) == [url], position


def test_the_qr_code_uses_error_correction_m():
    drawing = labels._qr_drawing("http://127.0.0.1:8000/batches/NAOH-2611-01", 40 * mm)
    widget = drawing.contents[0]
    assert widget.barLevel == "M"
    assert widget.qr.errorCorrectLevel == QRErrorCorrectLevel.M


# ---------------------------------------------------------------- text that fits


def _words(text: str) -> list[str]:
    return text.replace(labels.NBSP, " ").split()


def _assert_fits(content, layout):
    fits = fit_report(content, layout, serial=123456)
    assert len(fits) == sum(1 for f in layout.fields if f.kind == "text")
    for fit in fits:
        field = layout.field(fit.field)
        for line in fit.lines:
            # Measured again here with reportlab's stringWidth, against the box less any frame padding.
            width = stringWidth(line, fit.font, fit.size_pt)
            assert width <= fit.box_width_pt + 1e-6, (layout.name, fit.field, line, width, fit.box_width_pt)
            assert fit.box_width_pt <= field.width * mm + 1e-6
        assert len(fit.lines) * fit.size_pt * field.leading <= fit.box_height_pt + 1e-6, (layout.name, fit.field)
        assert fit.size_pt >= field.min_size_pt - 1e-9
        values = labels.placeholder_values(content, 123456)
        codes = labels.placeholder_values(content, 123456, codes_only=True)
        full = [_words(labels.printable(field.text.format_map(v))) for v in (values, codes)]
        assert _words(" ".join(fit.lines)) in full, (layout.name, fit.field)  # nothing dropped, nothing clipped
    return fits


@pytest.mark.parametrize("layout_name", SHIPPED)
def test_no_field_text_exceeds_its_box_for_long_inputs(world, layout_name):
    db = world["db"]
    # Concentrated HCl carries the most label elements stockroom seeds (three H statements, two pictograms,
    # six P statements); the 30-label sheet is for dilute solutions, so it gets 1 mol/L NaOH (H290, H314).
    heavy = make_batch(
        db,
        "HCl" if layout_name != "sheet-letter-30" else "NaOH",
        12.0 if layout_name != "sheet-letter-30" else 1.0,
        prepared_by=LONG_NAME,
    )
    content = with_content(label_content(db, world["config"], heavy, lab_today()), batch_id="BAOH2-2612-01-B2")
    layout = layouts.get(layout_name)
    fits = _assert_fits(content, layout)
    prepared = [f for f in fits if "prepared_by" in layout.field(f.field).placeholders]
    assert prepared and " ".join(prepared[0].lines).endswith(LONG_NAME.split()[-1])
    text = pdf_text(build_labels(content, layout, copies=1))
    for word in LONG_NAME.split():
        assert word in text


def test_released_values_fit_every_layout(world):
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    for name in SHIPPED:
        _assert_fits(content, layouts.get(name))


def test_text_that_cannot_fit_is_refused_not_clipped(world):
    # Four H statements (HCl at 5 mol/L: H290 H315 H319 H335) need more room than the 30-label sheet has.
    batch = make_batch(world["db"], "HCl", 5.0)
    content = label_content(world["db"], world["config"], batch, lab_today())
    with pytest.raises(LabelOverflow) as caught:
        build_labels(content, layouts.get("sheet-letter-30"), copies=1)
    assert caught.value.field == "hazards" and "larger layout" in caught.value.message
    _assert_fits(content, layouts.get("sheet-a4-21"))


def test_precautionary_statements_fall_back_to_their_codes_on_small_labels(world):
    content = label_content(world["db"], world["config"], world["strong"], lab_today())
    small = {f.field: f for f in fit_report(content, layouts.get("sheet-letter-30"))}
    assert " ".join(small["precautions"].lines) == "P234 P280 P303+P361+P353 P305+P351+P338 P310 (see SDS)"
    large = {f.field: f for f in fit_report(content, layouts.get("carboy-a5"))}
    assert "P310 Immediately call a POISON CENTER/doctor." in large["precautions"].lines


def test_a_word_wider_than_the_box_is_broken_and_every_piece_fits():
    lines = labels.wrap("P303+P361+P353 " + "x" * 60, "Helvetica", 8, 60)
    assert all(stringWidth(line, "Helvetica", 8) <= 60 for line in lines)
    assert "".join(lines).replace(" ", "") == "P303+P361+P353" + "x" * 60


def test_accents_greek_and_the_combining_bar_are_kept_and_only_missing_letters_change():
    # The embedded typeface draws Ł, ő, ñ, Greek and the combining macron of the mean-volume symbol.
    text = "Łukasz Żółć, Erdős, Nuñez, 0.1 µmol, α = 0.05, V\u0304 ≤ 25 °C ± 0.5, ν\u2082"
    assert labels.printable(text) == text
    # A letter the font lacks (CJK) becomes '?', one with a missing accented form keeps its base letter.
    assert labels.printable("漢 x") == "? x"


# ---------------------------------------------------------------- sheets


def _serial_positions(pdf: bytes, page: int = 0) -> dict[str, tuple[float, float]]:
    found: dict[str, tuple[float, float]] = {}

    def visit(text, cm, tm, font, size):
        m = re.fullmatch(r"No\. (\d{6})", text.strip())
        if m:
            found[m.group(1)] = (cm[4] + tm[4], cm[5] + tm[5])

    pypdf.PdfReader(io.BytesIO(pdf)).pages[page].extract_text(visitor_text=visit)
    return found


def test_printing_starts_at_the_chosen_position_of_a_partly_used_sheet(world):
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    pdf = build_labels(content, layouts.get("sheet-letter-30"), copies=3, start=5, first_serial=7)
    positions = _serial_positions(pdf)
    assert sorted(positions) == ["000007", "000008", "000009"]
    # The sheet's geometry (labels/sheet-letter-30.toml): left margin 4.8 mm, top 12.7 mm, pitch 69.9 x 25.4 mm
    # on a page 279.4 mm tall. Position 5 is row 2, column 2; 6 is row 2, column 3; 7 is row 3, column 1.
    for serial, (row, col) in zip(("000007", "000008", "000009"), ((1, 1), (1, 2), (2, 0)), strict=True):
        x, y = positions[serial]
        left = (4.8 + col * 69.9) * mm
        top = (279.4 - 12.7 - row * 25.4) * mm
        assert left < x < left + 66.7 * mm and top - 25.4 * mm < y < top, (serial, x / mm, y / mm)


def test_copies_beyond_the_sheet_continue_on_new_sheets(world):
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    pdf = build_labels(content, layouts.get("sheet-letter-30"), copies=30, start=25)
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    assert len(reader.pages) == 2
    assert len(_serial_positions(pdf, 0)) == 6 and len(_serial_positions(pdf, 1)) == 24


def test_a_30_label_sheet_builds_in_under_0_3_s(world):
    content = label_content(world["db"], world["config"], world["naoh"], lab_today())
    layout = layouts.get("sheet-letter-30")
    timings = []
    for _ in range(3):
        start = time.perf_counter()
        build_labels(content, layout, copies=30)
        timings.append(time.perf_counter() - start)
    assert min(timings) <= 0.3, timings


# ---------------------------------------------------------------- printing from the batch page


def _count(app, sql, params=()):
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        return conn.execute(sql, params).fetchone()[0]
    finally:
        conn.close()


def test_printing_needs_label_print(app, client, world, signed_in_client, form_token):
    url = f"/batches/{world['naoh']['code']}/labels"
    assert client.get(url).status_code == 303
    token = form_token(client, "/sign-in")
    assert client.post(url, data={"layout": "bottle", "copies": "1", "csrf_token": token}).status_code == 303
    assert (
        client.post(
            url, data={"layout": "bottle", "copies": "1", "csrf_token": token}, headers={"Accept": "application/json"}
        ).status_code
        == 401
    )
    instructor = signed_in_client("instructor")
    assert instructor.get(url).status_code == 403
    token = form_token(instructor, "/")
    assert instructor.post(url, data={"layout": "bottle", "copies": "1", "csrf_token": token}).status_code == 403
    assert _count(app, "SELECT count(*) FROM label_prints") == 0
    page = signed_in_client("staff").get(url)
    assert page.status_code == 200
    html = page.get_data(as_text=True)
    assert "0.10214 ± 0.00020 mol/L (k = 2) at 20 °C" in html and 'value="sheet-letter-30"' in html


def test_a_print_is_recorded_with_its_serials_and_the_pdf_comes_back(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = world["naoh"]["code"]
    url = f"/batches/{code}/labels"
    resp = staff.post(url, data={"layout": "sheet-letter-30", "copies": "3", "start": "2", "csrf_token": form_token(staff, url)})
    assert resp.status_code == 200 and resp.mimetype == "application/pdf"
    assert resp.headers["Content-Disposition"] == f'attachment; filename="labels-{code}-000001.pdf"'
    text = pdf_text(resp.data)
    assert "No. 000001" in text and "No. 000003" in text and "No. 000004" not in text
    resp2 = staff.post(url, data={"layout": "bottle", "copies": "2", "csrf_token": form_token(staff, url)})
    assert resp2.status_code == 200
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        rows = dbmod.query(conn, "SELECT * FROM label_prints ORDER BY id")
        events = dbmod.query(conn, "SELECT * FROM events WHERE action = 'label.print' ORDER BY id")
    finally:
        conn.close()
    assert [(r["layout"], r["copies"], r["serial_first"], r["serial_last"]) for r in rows] == [
        ("sheet-letter-30", 3, 1, 3),
        ("bottle", 2, 4, 5),
    ]
    assert {r["value_printed"] for r in rows} == {"0.10214 ± 0.00020 mol/L (k = 2) at 20 °C"}
    assert {r["recorded_by"] for r in rows} == {"staff-user"} and {r["release_id"] for r in rows} == {world["release_id"]}
    assert [e["batch_id"] for e in events] == [world["naoh"]["id"]] * 2
    assert '"serials":[4,5]' in events[1]["detail"]
    assert "Label 000004" in pdf_text(resp2.data) and "Label 000005" in pdf_text(resp2.data, 1)


def test_print_serials_are_unique_across_the_database(world):
    db = world["db"]
    records.record_print(db, world["naoh"]["id"], world["release_id"], "bottle", 5, "x", "setup")
    other = make_batch(db, "HCl", 0.1)
    second = records.record_print(db, other["id"], None, "bottle", 2, "y", "setup")
    assert (second["serial_first"], second["serial_last"]) == (6, 7)
    base = {
        "batch_id": other["id"],
        "release_id": None,
        "layout": "bottle",
        "value_printed": "z",
        "recorded_at": "2026-01-01T00:00:00+00:00",
        "recorded_by": "someone",
    }
    for first, last, copies in ((7, 8, 2), (3, 3, 1), (8, 9, 3)):  # overlapping, inside, or copies not matching
        with pytest.raises(sqlite3.IntegrityError):
            db["label_prints"].insert(dict(base, serial_first=first, serial_last=last, copies=copies))


@pytest.mark.parametrize(
    ("form", "field", "words"),
    [
        ({"layout": "carboy-a4", "copies": "1"}, "layout", "must be one of"),
        ({"layout": "bottle", "copies": "0"}, "copies", "between 1 and 200"),
        ({"layout": "bottle", "copies": "201"}, "copies", "between 1 and 200"),
        ({"layout": "bottle", "copies": "two"}, "copies", "whole number"),
        ({"layout": "sheet-letter-30", "copies": "1", "start": "31"}, "start", "between 1 and 30"),
    ],
)
def test_a_bad_print_form_is_answered_422_beside_the_field(app, world, signed_in_client, form_token, form, field, words):
    staff = signed_in_client("staff")
    url = f"/batches/{world['naoh']['code']}/labels"
    resp = staff.post(url, data=dict(form, csrf_token=form_token(staff, url)))
    assert resp.status_code == 422
    html = resp.get_data(as_text=True)
    assert re.search(rf'id="e-{field}">[^<]*{re.escape(words)}', html), html[:3000]
    assert _count(app, "SELECT count(*) FROM label_prints") == 0


def test_a_layout_too_small_for_the_hazard_text_is_422_and_nothing_is_recorded(app, world, signed_in_client, form_token):
    batch = make_batch(world["db"], "HCl", 5.0)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}/labels"
    resp = staff.post(url, data={"layout": "sheet-letter-30", "copies": "1", "csrf_token": form_token(staff, url)})
    assert resp.status_code == 422 and "larger layout" in resp.get_data(as_text=True)
    assert _count(app, "SELECT count(*) FROM label_prints") == 0


def test_no_classification_no_print(app, world, signed_in_client, form_token):
    batch = make_batch(world["db"], "HClO4", 0.1)
    staff = signed_in_client("staff")
    url = f"/batches/{batch['code']}/labels"
    page = staff.get(url)
    assert page.status_code == 200 and "no hazard classification" in page.get_data(as_text=True)
    resp = staff.post(url, data={"layout": "bottle", "copies": "1", "csrf_token": form_token(staff, url)})
    assert resp.status_code == 422
    assert _count(app, "SELECT count(*) FROM label_prints") == 0


def test_after_a_superseding_release_the_batch_page_warns_and_offers_the_reprint(app, world, signed_in_client, form_token):
    staff = signed_in_client("staff")
    code = world["naoh"]["code"]
    url = f"/batches/{code}/labels"
    staff.post(url, data={"layout": "bottle", "copies": "4", "csrf_token": form_token(staff, url)})
    assert "show an old value" not in staff.get(f"/batches/{code}").get_data(as_text=True)
    release(world["db"], world["config"], world["naoh"], world["lot"], 0.10150, 0.00021, days_ago=0)
    page = staff.get(f"/batches/{code}").get_data(as_text=True)
    assert "Labels in circulation show an old value." in page
    assert "000001–000004" in page and "0.10214 ± 0.00020 mol/L (k = 2) at 20 °C" in page
    assert "0.10150 ± 0.00021 mol/L (k = 2) at 20 °C" in page
    assert f'href="/batches/{code}/labels">reprint the labels</a>' in page
    staff.post(url, data={"layout": "bottle", "copies": "4", "csrf_token": form_token(staff, url)})
    page = staff.get(f"/batches/{code}").get_data(as_text=True)
    assert "Old labels may still be in circulation." in page and "000001–000004" in page
    assert "000005" not in page.split("Old labels may still be in circulation.")[1].split("</div>")[0]
    assert "Print labels" in page and f"/batches/{code}/certificate.pdf" in page


# ---------------------------------------------------------------- command line


def test_cli_prints_labels_and_records_the_print(app, world, tmp_path):
    from stockroom.cli import main

    out = tmp_path / "labels.pdf"
    result = CliRunner().invoke(
        main,
        [
            "labels",
            world["naoh"]["code"],
            "--layout",
            "sheet-a4-21",
            "--copies",
            "2",
            "--start",
            "21",
            "--db",
            app.config["DATABASE"],
            "--out",
            str(out),
        ],
    )
    assert result.exit_code == 0, result.output
    assert "serials 000001-000002" in result.output
    assert "No. 000001" in pdf_text(out.read_bytes()) and "No. 000002" in pdf_text(out.read_bytes(), 1)
    actor = _count(app, "SELECT recorded_by FROM label_prints")
    assert actor.startswith("cli")
    bad = CliRunner().invoke(
        main, ["labels", world["naoh"]["code"], "--layout", "nope", "--db", app.config["DATABASE"], "--out", str(out)]
    )
    assert bad.exit_code == 2 and "'nope' is not one of" in bad.output  # --layout is a choice of the files in labels/


@pytest.mark.parametrize("width_pt", [70.0, 110.0, 160.0])  # pt; "0.00016 mol/L" alone is 52 pt wide
def test_the_certified_value_wraps_only_between_its_parts(width_pt):
    # A narrow box may break the value after "±", before "(k" and before "at", never inside
    # "20 °C", "0.00016 mol/L" or "(k = 2)": a unit on a line of its own misreads (common practice).
    text = labels._unbreakable_figures(labels.value_text(0.10035, 0.00016, 2.0, 20.0))
    lines = [ln.replace("\u00a0", " ") for ln in labels.wrap(text, "Helvetica-Bold", 8, width_pt)]
    assert " ".join(lines) == "0.10035 ± 0.00016 mol/L (k = 2) at 20 °C"
    assert len(lines) > 1 or width_pt >= 160
    for ln in lines:
        assert ln.startswith(("0.10035", "0.00016", "(k = 2)", "at 20 °C")), lines


# ---------------------------------------------------------------- the address a QR code carries


def test_a_label_printed_from_the_web_carries_the_address_its_printer_reached(world, signed_in_client, form_token):
    """No BASE_URL set (the default): the QR code starts with the request's scheme, host and port."""
    assert world["config"]["BASE_URL"] == ""
    staff = signed_in_client("staff")
    code = world["naoh"]["code"]
    url = f"/batches/{code}/labels"
    base = "http://localhost:8765/"  # the session cookie is for localhost; the port differs
    token = form_token(staff, url)
    resp = staff.post(url, data={"layout": "carboy-a5", "copies": "1", "csrf_token": token}, base_url=base)
    assert resp.status_code == 200 and resp.mimetype == "application/pdf"
    assert qr_decode(render_png(resp.data, dpi=150)) == [f"http://localhost:8765/batches/{code}"]


def test_qr_base_url_prefers_the_setting_then_the_request_then_the_fallback():
    assert labels.qr_base_url("https://prep.example.org", "http://localhost:5000/") == "https://prep.example.org"
    assert labels.qr_base_url("", "http://localhost:5000/") == "http://localhost:5000/"
    assert labels.qr_base_url("  ", None) == labels.FALLBACK_BASE_URL == "http://127.0.0.1:8000"


def test_the_demo_sets_its_qr_address_to_the_port_it_serves():
    from stockroom.cli import demo_address

    assert demo_address("127.0.0.1", 8123) == {"BASE_URL": "http://127.0.0.1:8123"}
    assert demo_address("::1", 9000) == {"BASE_URL": "http://[::1]:9000"}
    assert demo_address("0.0.0.0", 8123) == {}  # a wildcard names no address: the request's host is used
    assert labels.batch_url(demo_address("127.0.0.1", 8123)["BASE_URL"], "HCL-2606-01") == (
        "http://127.0.0.1:8123/batches/HCL-2606-01"
    )
