"""What leaves the tool: the design's files, ``export`` and ``report`` for any layout."""

from __future__ import annotations

import base64
import io
import json
import re
import xml.etree.ElementTree as ET

import ezdxf
import numpy as np
import pytest
from helpers import TRI_PANEL
from matplotlib.image import imread

from thinning.cli import main
from thinning.io.layout_csv import read_layout_csv

SPEC = (
    'name = "test-panel"\n'
    + TRI_PANEL
    + """[constraints]
symmetry = "mirror-x"
[search]
method = "genetic"
seed = 2
evaluations = 400
[stress]
band_ghz = [9.5, 10.5]
phase_error_deg = 5.0
trials = 20
[output]
footprint_mm = 10.0
"""
)


@pytest.fixture(scope="module")
def designed(tmp_path_factory):
    d = tmp_path_factory.mktemp("design")
    spec = d / "panel.toml"
    spec.write_text(SPEC)
    out = d / "out"
    assert main(["design", str(spec), "--out", str(out), "--quiet"]) == 0
    return spec, out


def test_design_writes_every_deliverable(designed):
    spec, out = designed
    names = {p.name for p in out.iterdir()}
    assert {
        "layout.csv",
        "layout.json",
        "layout.dxf",
        "layout.svg",
        "layout.png",
        "report.html",
    } <= names
    assert not [n for n in names if n.endswith(".tmp")]
    lay = read_layout_csv(out / "layout.csv")
    # ids in the documented order: rows from the top (largest y first), left to right
    order = np.lexsort((lay.x, -np.round(lay.y, 9)))
    assert np.array_equal(order, np.arange(len(lay)))
    assert [str(i) for i in lay.element_ids] == [str(i + 1) for i in range(len(lay))]
    meta = json.loads((out / "layout.json").read_text())
    assert meta["baseline_random"]["evaluations"] == meta["evaluations"]


def test_dxf_reads_back(designed):
    """ezdxf (reference reader): units mm, layers, one circle per element within 0.001 mm."""
    _, out = designed
    doc = ezdxf.readfile(out / "layout.dxf")
    assert doc.header["$INSUNITS"] == 4
    layers = {layer.dxf.name for layer in doc.layers}
    assert {"OUTLINE", "HOLES", "CLEARANCE", "ELEMENTS", "LABELS", "TITLE"} <= layers
    lay = read_layout_csv(out / "layout.csv")
    circles = doc.modelspace().query('CIRCLE[layer=="ELEMENTS"]')
    assert len(circles) == len(lay)
    c = np.array([(e.dxf.center.x, e.dxf.center.y) for e in circles])
    want = np.column_stack([lay.x, lay.y]) * 1e3
    assert np.abs(np.sort(c, axis=0) - np.sort(want, axis=0)).max() < 1e-3
    assert {round(e.dxf.radius, 9) for e in circles} == {5.0}
    title = " ".join(t.dxf.text for t in doc.modelspace().query('TEXT[layer=="TITLE"]'))
    assert "10 GHz" in title and f"{len(lay)} elements" in title


def test_svg_and_report(designed):
    _, out = designed
    root = ET.parse(out / "layout.svg").getroot()
    assert root.tag.endswith("svg")
    html = (out / "report.html").read_text()
    for sid in (
        "summary",
        "layout",
        "pattern",
        "cuts",
        "scan",
        "stress",
        "convergence",
        "comparison",
        "cautions",
        "provenance",
    ):
        assert f'id="{sid}"' in html, sid
    imgs = re.findall(r'src="data:image/png;base64,([^"]+)"', html)
    assert len(imgs) >= 5  # u-v map, cuts, scan, convergence, comparison (the layout is SVG)
    assert html.count("<svg") == 1
    for b in imgs:
        assert imread(io.BytesIO(base64.b64decode(b))).ndim == 3
    assert "exposure" in html and "full-wave" in html and "Band edges" in html
    assert "not run" not in html.split('id="comparison"')[1].split("</section>")[0]


@pytest.mark.parametrize("fmt", ["dxf", "svg", "png", "json"])
def test_export_any_layout(designed, tmp_path, capsys, fmt):
    spec, out = designed
    target = tmp_path / f"x.{fmt}"
    code = main(
        [
            "export",
            str(out / "layout.csv"),
            "--to",
            fmt,
            "--out",
            str(target),
            "--spec",
            str(spec),
            "--freq-ghz",
            "10",
        ]
    )
    assert code == 0, capsys.readouterr().err
    assert target.stat().st_size > 0
    if fmt == "json":  # round trip with the CSV, exact to the printed 1e-6 mm
        doc = json.loads(target.read_text())
        lay = read_layout_csv(out / "layout.csv")
        xy = np.array([(e["x_mm"], e["y_mm"]) for e in doc["elements"]])
        assert np.allclose(xy, np.column_stack([lay.x, lay.y]) * 1e3, atol=1e-6)
        assert doc["metrics"]["elements"] == len(lay)


def test_report_for_a_hand_made_layout(tmp_path, capsys):
    p = tmp_path / "hand.csv"
    p.write_text("x_mm,y_mm\n0,0\n15,0\n45,0\n60,0\n0,15\n30,15\n60,15\n15,30\n45,30\n")
    code = main(["report", str(p), "--freq-ghz", "10", "--scan-max-deg", "10"])
    assert code == 0, capsys.readouterr().err
    html = (tmp_path / "report.html").read_text()
    assert 'id="summary"' in html and "Not run" not in html.split('id="stress"')[1][:300]


def test_unwritable_and_missing(tmp_path, capsys, designed):
    _, out = designed
    blocker = tmp_path / "file"
    blocker.write_text("x")
    spec = tmp_path / "s.toml"
    spec.write_text(SPEC)
    code = main(["design", str(spec), "--out", str(blocker), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "file" in err and len(err.strip().splitlines()) == 1
    code = main(
        [
            "export",
            str(out / "layout.csv"),
            "--to",
            "dxf",
            "--out",
            str(tmp_path / "nope" / "a.dxf"),
        ]
    )
    err = capsys.readouterr().err
    assert code == 1 and "does not exist" in err
    assert not (tmp_path / "nope").exists()
    code = main(["report", str(tmp_path / "missing.csv"), "--freq-ghz", "10"])
    err = capsys.readouterr().err
    assert code == 1 and "missing.csv" in err and len(err.strip().splitlines()) == 1
