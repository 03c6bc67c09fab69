"""What keeps large apertures fast gives the same figures and files: the region's alias count,
the principal cuts from projections, the scan table read from the highest samples, the DXF's
element entities written as text, the local-fill drawing, and the method chosen by size."""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pytest

from thinning.engine.exact import GridExact
from thinning.engine.pattern import FFTPatternEngine
from thinning.engine.region import _alias_count
from thinning.geometry.layout import Layout
from thinning.outputs import dxf_bulk, figures, fill_image
from thinning.spec import default_method, parse_spec


def _brute_alias_count(u, v, period, r2, radius, centre):
    tu, tv = period
    reach = radius + math.hypot(*centre)
    n_u = int(math.ceil(reach / tu)) + 1
    n_v = 0 if tv is None else int(math.ceil(reach / tv)) + 1
    count = np.zeros((v.size, u.size))
    for p in range(-n_u, n_u + 1):
        for q in range(-n_v, n_v + 1):
            vv = v[:, None] + (0.0 if tv is None else q * tv)
            count += ((u[None, :] + p * tu) ** 2 + vv**2) <= r2
    return count


@pytest.mark.parametrize(
    "shape, pitch, scan, full, centre",
    [
        ((64, 64), (0.015, 0.015), 0.35, False, (0.0, 0.0)),
        ((30, 41), (0.0085, 0.0147), 0.7, False, (0.0, 0.0)),
        ((1, 200), (0.015, 0.015), 0.0, False, (0.0, 0.0)),
        ((50, 50), (0.02, 0.02), 0.5, True, (0.1, -0.4)),
    ],
)
def test_alias_count_equals_the_sum_over_aliases(shape, pitch, scan, full, centre):
    """math: counting the aliases in the disc by intervals along u gives the same count as
    testing every alias of every sample."""
    eng = FFTPatternEngine(shape, pitch, 0.03, scan, linear=shape[0] == 1, full=full)
    g = eng.grid
    r2 = eng.radius**2 * (1 + 1e-12)
    args = (g.u - centre[0], g.v - centre[1], g.period, r2, eng.radius, centre)
    np.testing.assert_array_equal(_alias_count(*args), _brute_alias_count(*args))


def test_principal_cuts_from_projections_equal_the_exact_pattern():
    """math: on a grid the cut v = 0 is the pattern of the column sums (and u = 0 of the row
    sums); the Horner sums agree with the exact evaluator to 1e-9 in power."""
    rng = np.random.default_rng(0)
    jj, ii = np.nonzero(rng.random((23, 31)) < 0.45)
    lay = Layout(ii * 0.015, jj * 0.0125)
    cuts = figures.principal_cuts(lay, 0.03, n=401)
    s = np.sin(np.radians(cuts["theta_deg"]))
    grid = np.zeros((23, 31))
    grid[jj - jj.min(), ii - ii.min()] = 1.0
    ex = GridExact(grid, (0.015, 0.0125), 0.03)
    px = ex.evaluate(s, 0 * s, derivatives=False)
    py = ex.evaluate(0 * s, s, derivatives=False)
    np.testing.assert_allclose(10 ** (cuts["cuts"]["x-z"] / 10), px, rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(10 ** (cuts["cuts"]["y-z"] / 10), py, rtol=1e-9, atol=1e-15)


def test_scan_table_is_the_highest_sample_in_each_disc():
    """The worst sidelobe of each steered beam, read from the highest samples first, is the
    maximum of the map over that beam's visible disc outside the main beam (brute force)."""
    rng = np.random.default_rng(1)
    jj, ii = np.nonzero(rng.random((20, 20)) < 0.5)
    lay = Layout(ii * 0.015, jj * 0.015)
    scan = math.radians(30)
    uv = figures.uv_power_map(lay, 0.03, 1.5, scan_max=scan)
    table = figures.scan_psl_table(lay, 0.03, scan, steps=4, uv_map=uv)
    u, v, p_db = uv
    from thinning.analysis.score import layout_engine

    _, _, exact, _ = layout_engine(lay, 0.03, scan)
    eng, *_ = layout_engine(lay, 0.03, scan)
    psi, rad = figures.main_beam_radius(exact, min(eng.grid.du, eng.grid.dv), False, 1.5)
    uu, vv = np.meshgrid(u, v)
    ang = np.mod(np.arctan2(vv, uu), 2 * math.pi)
    mb = np.hypot(uu, vv) <= np.interp(ang, np.append(psi, 2 * math.pi), np.append(rad, rad[0]))
    for i, t in enumerate(np.radians(table["theta_deg"])):
        for j, ph in enumerate(np.radians(table["phi_deg"])):
            u0, v0 = math.sin(t) * math.cos(ph), math.sin(t) * math.sin(ph)
            inside = ((uu + u0) ** 2 + (vv + v0) ** 2 <= 1 + 1e-12) & ~mb
            assert table["psl_db"][i, j] == pytest.approx(p_db[inside].max(), abs=1e-9)


def test_bulk_dxf_reads_back_every_element(tmp_path):
    """ezdxf as a reader: above BULK_ELEMENTS the element entities are written as text; every
    circle, point and label reads back, at exactly the layout's positions, and the document
    passes ezdxf's audit with $HANDSEED above every handle."""
    import ezdxf

    from thinning.outputs.dxf import write_layout_dxf

    rng = np.random.default_rng(2)
    jj, ii = np.nonzero(rng.random((120, 120)) < 0.5)
    assert jj.size > dxf_bulk.BULK_ELEMENTS
    lay = Layout(ii * 0.015 + 1e-4, jj * 0.015 - 2e-4)
    path = write_layout_dxf(tmp_path / "big.dxf", lay)
    doc = ezdxf.readfile(path)
    msp = doc.modelspace()
    circles = msp.query("CIRCLE")
    assert len(circles) == len(lay) and len(msp.query("POINT")) == len(lay)
    xy = np.array([(c.dxf.center.x, c.dxf.center.y) for c in circles])
    np.testing.assert_array_equal(xy, np.column_stack([lay.x, lay.y]) * 1e3)
    labels = [t.dxf.text for t in msp.query("TEXT[layer=='LABELS']")]
    assert labels == list(lay.element_ids)
    assert not doc.audit().errors
    seed = int(doc.header["$HANDSEED"], 16)
    assert seed > max(int(e.dxf.handle, 16) for e in msp)


def test_large_drawing_shows_the_local_fill(tmp_path, monkeypatch):
    """Above LARGE_ELEMENTS the sheet draws the local fill: each cell's share of occupied
    sites (math: a fully occupied cell reads 1, an empty one 0)."""
    from thinning.outputs import drawing

    monkeypatch.setattr(drawing, "LARGE_ELEMENTS", 100)
    ii, jj = np.meshgrid(np.arange(40), np.arange(40))
    sites = np.column_stack([ii.ravel(), jj.ravel()]) * 0.015
    on = ii.ravel() < 20  # the left half full, the right half empty
    lay = Layout(sites[on, 0], sites[on, 1])
    fill, extent, cell = fill_image.fill_grid(lay.x * 1e3, lay.y * 1e3, sites * 1e3, cells=8)
    assert np.nanmax(fill) == 1.0 and np.nanmin(fill) == 0.0
    files = drawing.write_layout_drawings(tmp_path, lay, sites=sites, formats=("png",))
    assert files[0].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


SPEC = """
[array]
frequency_ghz = 10.0
lattice = "rectangular"
spacing_mm = [15.0, 15.0]
[aperture]
outline_mm = [[0, 0], [{w}, 0], [{w}, {w}], [0, {w}]]
[budget]
fill = 0.5
"""


@pytest.mark.parametrize("side, method", [(20, "genetic"), (70, "density")])
def test_default_method_by_size(side, method):
    """A spec without search.method runs genetic below 4,096 sites and density from there
    on; one that names a method keeps it."""
    text = SPEC.format(w=15 * side - 1)
    spec = parse_spec(tomllib.loads(text), "s.toml")
    assert spec.search_method is None
    assert len(spec.sites()) == side * side
    assert spec.method == method == default_method(side * side)
    assert "default for" in spec.method_label
    named = parse_spec(tomllib.loads(text + '[search]\nmethod = "ift"\n'), "s.toml")
    assert named.method == "ift" and named.method_label == "ift"


def test_envelope_bound_in_layout_json_and_report(tmp_path):
    """A density design records its envelope bound beside the PSL in layout.json and the
    report's summary (and the bound is the one the problem's envelope holds)."""
    import json

    from helpers import small_spec

    from thinning.analysis.design import run_design
    from thinning.outputs.report_sections import summary_html

    spec = parse_spec(tomllib.loads(small_spec("density", 60)), "small.toml")
    res = run_design(spec, tmp_path / "d")
    meta = json.loads((tmp_path / "d" / "layout.json").read_text())
    assert meta["envelope_bound_db"] == pytest.approx(res.problem.envelope.bound_db, abs=1e-4)
    assert meta["envelope"]["kind"] in ("lp", "taylor")
    assert meta["method_by_size"] is False
    html = summary_html(meta)
    assert 'data-key="envelope_bound_db"' in html and 'data-key="psl_db"' in html
