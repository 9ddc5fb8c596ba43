"""A stored curve drawn: inline SVG on the run page and vector drawings on the certificate.

Positions are checked against the drawing's own linear axes (x = left + (V − V_lo) / (V_hi − V_lo) · width),
computed here from the module's stated margins; the PDF is read back with pypdf.
"""

from __future__ import annotations

import datetime as dt
import io
import re

import pypdf
import pytest

from stockroom import curve_synth, endpoints, records, workflow
from stockroom import db as dbmod
from stockroom.demo import build_demo
from stockroom.pdf import certificates, curve_drawing

TODAY = dt.date(2026, 12, 3)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("curves") / "demo.db"
    build_demo(str(path), today=TODAY, password="a long invented demo passphrase")
    conn = dbmod.connect(path)
    run_id = conn.execute("SELECT max(run_id) FROM replicate_curves").fetchone()[0]
    yield path, conn, run_id
    conn.close()


def _curve():
    pts = curve_synth.khp_curve(0.8179, 0.1, seed=5)
    ep = endpoints.locate([p[0] for p in pts], [p[1] for p in pts])[0]
    return pts, ep


def test_the_svg_is_self_contained_and_scales_to_its_box():
    pts, ep = _curve()
    svg = curve_drawing.curve_svg(pts, reading="ph", volume_ml=ep.volume_ml, U_ml=2 * ep.u_ml, k=2, title="Replicate 1", key="r1")
    assert svg.startswith("<svg ") and 'width="100%"' in svg and 'viewBox="0 0 360 340"' in svg
    # A strict content security policy blocks style attributes and elements: none may be left.
    assert "style=" not in svg and "<style" not in svg and "<script" not in svg.lower()
    assert 'id="curve-clip-r1"' in svg and "url(#curve-clip-r1)" in svg
    assert "<title>Replicate 1</title>" in svg
    for words in ("Volume added (mL)", "|dpH/dV| (pH/mL)", ">pH<", "Close-up"):
        assert words in svg, words
    assert f"{ep.volume_ml:.3f} ± {2 * ep.u_ml:.3f} mL (k = 2)" in svg


def test_the_close_up_band_spans_plus_minus_u_on_the_volume_axis():
    pts, ep = _curve()
    U = 2 * ep.u_ml
    svg = curve_drawing.curve_svg(pts, reading="ph", volume_ml=ep.volume_ml, U_ml=U, k=2)
    band_fill = 'fill="rgb(86%,90%,95%)"'
    rects = [m.group(0) for m in re.finditer(r"<rect [^>]*>", svg) if band_fill in m.group(0)]
    assert len(rects) == 2  # one band in each panel
    # The close-up spans V_e ± ZOOM_HALF_ML (within the recorded volumes) over the plot's width.
    half = max(curve_drawing.ZOOM_HALF_ML, 4 * U)
    lo, hi = max(ep.volume_ml - half, pts[0][0]), min(ep.volume_ml + half, pts[-1][0])
    inner = curve_drawing.WIDTH - curve_drawing._LEFT - curve_drawing._RIGHT
    expected_x = curve_drawing._LEFT + (ep.volume_ml - U - lo) / (hi - lo) * inner
    expected_w = 2 * U / (hi - lo) * inner
    xs = [(float(re.search(r' x="([\d.]+)"', r).group(1)), float(re.search(r' width="([\d.]+)"', r).group(1))) for r in rects]
    assert any(x == pytest.approx(expected_x, abs=0.01) and w == pytest.approx(expected_w, abs=0.01) for x, w in xs), xs


def test_the_run_page_draws_each_stored_curve(demo):
    path, conn, run_id = demo
    from stockroom import create_app

    app = create_app({"DATABASE": str(path), "SECRET_KEY": "curve-drawing-test"})
    html = app.test_client().get(f"/runs/{run_id}").get_data(as_text=True)
    assert html.count('class="curve-drawing"') == 3
    assert "Titration curves" in html and "(end point on its curve)" in html
    run = records.run_by_id(conn, run_id)
    first = run["replicates"][0]["curve"]
    U = 2 * first["u_ml"]  # the demo's COVERAGE_FACTOR default, k = 2
    assert f"end point {first['volume_ml']:.3f} ± {U:.3f} mL (k = 2), derivative method, taken as the titre" in html
    assert "located from the curve, derivative method" in html  # the budget's own line


def test_the_certificate_draws_the_curves_as_vectors(demo, tmp_path):
    path, conn, run_id = demo
    # Accept the run on a copy (the module's database stays undecided for the page test).
    copy = tmp_path / "copy.db"
    src = dbmod.connect(path)
    src.conn.execute(f"VACUUM INTO '{copy}'")
    src.close()
    (tmp_path / "copy.db.trail-key").write_bytes((path.parent / "demo.db.trail-key").read_bytes())
    db = dbmod.connect(copy)
    workflow.accept(db, run_id, "lindqvist", reason="")
    release_id = db.execute("SELECT id FROM releases WHERE run_id = ?", [run_id]).fetchone()[0]
    pdf = certificates.build_certificate(certificates.certificate_data(db, release_id, TODAY))
    db.close()
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    text = " ".join(" ".join(p.extract_text().split()) for p in reader.pages)
    assert "Titration curves" in text and text.count("Volume added (mL)") == 6  # two panels for each of 3 curves
    assert "Replicate 1:" in text and "end point by the derivative method, its titre" in text
    # Vector, not raster: no page holds an image XObject.
    for page in reader.pages:
        xobjects = (page.get("/Resources") or {}).get("/XObject") or {}
        assert not any(xobjects[name].get_object().get("/Subtype") == "/Image" for name in xobjects)
