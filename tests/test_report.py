"""The HTML report and the figure data behind it.

Sources are named beside each check (../shared/references.md rows in brackets).
"""

from __future__ import annotations

import base64
import io
import math
import re

import numpy as np
import pytest
from helpers import TRI_PANEL

from thinning.analysis.score import layout_engine, score_layout
from thinning.errors import OutputError
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.outputs import figures
from thinning.outputs.report import CAUTIONS, SECTIONS, build_report, report_for_layout
from thinning.units import SPEED_OF_LIGHT

FREQ = 10e9  # [Hz]
LAM = SPEED_OF_LIGHT / FREQ  # [m]
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _grid_layout(kind, rows, cols, fill, seed):
    """A random thinning (asymmetric on purpose) of a block of lattice sites."""
    if kind == "rectangular":
        lat = Lattice("rectangular", LAM / 2, LAM / 2)
        cc, rr = np.meshgrid(np.arange(cols), np.arange(rows))
    else:  # equilateral triangular: a checkerboard of the (dx/2, dy) grid
        lat = Lattice("triangular", 0.6 * LAM, 0.6 * LAM * math.sqrt(3) / 2)
        cc, rr = np.meshgrid(np.arange(2 * cols), np.arange(rows))
        keep = (cc - rr) % 2 == 0
        cc, rr = cc[keep], rr[keep]
    x, y = lat.position(cc.ravel(), rr.ravel())
    on = np.random.default_rng(seed).random(x.size) < fill
    on[:2] = True
    return Layout(x[on], y[on]), np.column_stack([x, y])


@pytest.fixture(scope="module")
def rect():
    return _grid_layout("rectangular", 10, 12, 0.6, 1)


@pytest.fixture(scope="module")
def report_html(tmp_path_factory, rect):
    layout, sites = rect
    hist = [
        {"evaluations": e, "seconds": 0.01 * e, "best_psl_db": p, "best_asl_db": -20.0}
        for e, p in [(10, -9.0), (100, -11.5), (1000, -13.0)]
    ]
    baseline = {
        "psl_db": -10.5,
        "asl_db": -19.0,
        "evaluations": 1000,
        "history": [{"evaluations": e, "best_psl_db": p} for e, p in [(10, -8.0), (1000, -10.5)]],
    }
    path = tmp_path_factory.mktemp("report") / "report.html"
    report_for_layout(
        path,
        layout,
        FREQ,
        math.radians(20),
        1.0,
        sites=sites,
        history=hist,
        baseline=baseline,
        provenance={"method": "genetic", "seed": 7, "spec_digest": "<sha&256>", "runtime_s": 1.5},
        title="Report <test> & co",
    )
    return path.read_text(encoding="utf-8")


# -- the HTML file ----------------------------------------------------------------------------
def test_report_has_every_section_with_data(report_html):
    """Every section with data; none for what was not given (no built-array analysis, no
    spec, no tiles): left out rather than shown empty."""
    for sid, _ in SECTIONS:
        assert (f'<h2 id="{sid}">' in report_html) is (sid not in ("stress", "spec", "tiles"))
    for sid in (
        "summary",
        "layout",
        "pattern",
        "cuts",
        "scan",
        "convergence",
        "comparison",
        "cautions",
        "provenance",
    ):
        assert f'id="{sid}"' in report_html


def test_report_is_self_contained_and_escaped(report_html):
    assert "<script" not in report_html.lower()
    assert not re.search(r'(src|href)="(?!data:|#)', report_html)
    assert "http://" not in report_html and "https://" not in report_html
    assert "Report &lt;test&gt; &amp; co" in report_html
    assert "&lt;sha&amp;256&gt;" in report_html
    for caution in CAUTIONS:
        assert caution.replace("'", "&#x27;") in report_html


def test_every_image_decodes(report_html):
    import matplotlib.image

    srcs = re.findall(r'<img src="([^"]+)"', report_html)
    assert len(srcs) == 5  # u-v map, cuts, scan, convergence, comparison (layout: SVG)
    for src in srcs:
        assert src.startswith("data:image/png;base64,")
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert data.startswith(PNG_SIGNATURE)
        img = matplotlib.image.imread(io.BytesIO(data))
        assert img.ndim == 3 and img.shape[0] > 100 and img.shape[1] > 100


def test_summary_psl_is_the_scored_psl(report_html, rect):
    layout, sites = rect
    expected = score_layout(layout, FREQ, math.radians(20), 1.0, sites=len(sites)).to_dict()
    cell = re.search(r'data-key="psl_db" data-value="([^"]+)">([^<]+)<', report_html)
    assert cell is not None
    assert float(cell.group(1)) == expected["psl_db"]
    assert cell.group(2) == f"{expected['psl_db']:.2f} dB".replace("-", "−")
    for key in ("asl_db", "directivity_dbi", "pi_n_dbi"):
        got = re.search(rf'data-key="{key}" data-value="([^"]+)"', report_html)
        assert float(got.group(1)) == expected[key]


def test_sections_without_data_are_left_out(tmp_path, rect):
    """A report on a layout file (no search, no baseline, no error model, no spec) has no
    empty convergence, comparison, built-array or appendix sections, and no navigation
    links to them."""
    path = build_report(
        tmp_path / "r.html", metrics={"psl_db": -12.0, "elements": 3}, figures={}, provenance={}
    )
    text = path.read_text(encoding="utf-8")
    for sid in ("convergence", "comparison", "stress", "spec"):
        assert f'id="{sid}"' not in text and f'href="#{sid}"' not in text
    for sid in ("summary", "layout", "cautions", "provenance"):
        assert f'<h2 id="{sid}">' in text


def test_missing_folder_raises_and_leaves_nothing(tmp_path, rect):
    layout, _ = rect
    missing = tmp_path / "no" / "such"
    with pytest.raises(OutputError):
        build_report(missing / "r.html", metrics={}, figures={})
    with pytest.raises(OutputError):
        report_for_layout(missing / "r.html", layout, FREQ, 0.0)
    assert not (tmp_path / "no").exists()
    assert list(tmp_path.iterdir()) == []


# -- the pattern data -------------------------------------------------------------------------
def _off_grid_layout():
    rng = np.random.default_rng(5)
    return Layout(rng.uniform(0, 4 * LAM, 40), rng.uniform(0, 3 * LAM, 40))


@pytest.mark.parametrize("kind", ["rectangular", "triangular", "off-grid", "linear"])
def test_uv_map_is_the_exact_pattern(kind):
    """The map samples equal |AF|²/(Σa)² from the direct sum (math: the same quantity).

    Checked at points of the map in every quadrant and beyond one FFT period (the tiling),
    on asymmetric layouts so that a mirrored map would fail. Tolerance 1e-6 relative: float64
    round-off of the FFT, far below it.
    """
    if kind == "off-grid":
        layout = _off_grid_layout()
    elif kind == "linear":
        on = np.random.default_rng(3).random(23) < 0.6
        on[0] = True
        layout = Layout(np.flatnonzero(on) * 0.7 * LAM, np.zeros(on.sum()))
    else:
        layout = _grid_layout(kind, 7, 9, 0.55, 2)[0]
    _, grid, exact, _ = layout_engine(layout, LAM, math.radians(40))
    assert (grid is None) == (kind == "off-grid")
    u, v, p_db = figures.uv_power_map(layout, LAM, scan_max=math.radians(40), floor_db=-300)
    assert u[0] == pytest.approx(-u[-1]) and u[-1] <= 1 + math.sin(math.radians(40)) + 1e-9
    rng = np.random.default_rng(0)
    j = rng.integers(0, u.size, 200)
    if kind == "linear":
        assert v is None and p_db.shape == u.shape
        uu, vv, got = u[j], np.zeros(j.size), 10 ** (p_db[j] / 10)
    else:
        i = rng.integers(0, v.size, 200)
        uu, vv, got = u[j], v[i], 10 ** (p_db[i, j] / 10)
    want = exact.evaluate(uu, vv, derivatives=False)
    keep = want > 1e-9  # away from exact nulls, where a relative test means nothing
    assert keep.sum() > 150
    np.testing.assert_allclose(got[keep], want[keep], rtol=1e-6)
    assert np.max(p_db) == pytest.approx(0.0, abs=1e-9)


@pytest.fixture
def dirichlet_16():
    """Uniform 16-element array at half-wavelength spacing: |AF|² = (sin(Nπu/2)/(N sin(πu/2)))².

    Its first sidelobe is −13.147 dB (math: the Dirichlet kernel, evaluated to 1e-4 dB); it
    tends to −13.26 dB for large N (references.md row 8, Mailloux ch. 1). Tolerance ±0.05 dB:
    the cut is sampled every 0.1°, about 70 samples per lobe here, which loses < 0.01 dB.
    """
    n = 16
    return Layout(np.arange(n) * LAM / 2, np.zeros(n)), -13.147


def test_principal_cut_first_sidelobe_of_uniform_array(dirichlet_16):
    layout, first = dirichlet_16
    cuts = figures.principal_cuts(layout, LAM)
    assert list(cuts["cuts"]) == ["x-z"]
    th, p = cuts["theta_deg"], cuts["cuts"]["x-z"]
    assert p[th.size // 2] == pytest.approx(0.0, abs=1e-12)
    peaks = np.flatnonzero((p[1:-1] > p[:-2]) & (p[1:-1] >= p[2:])) + 1
    side = peaks[th[peaks] > 0.5]  # lobes right of the main beam, nearest first
    assert p[side[0]] == pytest.approx(first, abs=0.05)
    assert p[side[0]] == pytest.approx(-13.15, abs=0.05)
    # first null at sin θ = 2/N (Dirichlet kernel, math)
    assert math.sin(math.radians(th[side[0]])) > 2 / 16


def test_principal_cuts_of_planar_array_have_both_planes(rect):
    layout, _ = rect
    cuts = figures.principal_cuts(layout, LAM)
    assert set(cuts["cuts"]) == {"x-z", "y-z"}
    for p in cuts["cuts"].values():
        assert p.max() == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("kind", ["rectangular", "triangular", "off-grid"])
def test_scan_psl_at_broadside_is_the_broadside_psl(kind):
    """θ₀ = 0 of the scan table is the PSL over the visible region only (scan_max = 0).

    Same region and main-beam rule; the table takes the highest sample (8 samples per λ/L),
    score_layout refines it on the exact pattern, so they agree within 0.5 dB and the table
    is never the higher by more than round-off.
    """
    layout = _off_grid_layout() if kind == "off-grid" else _grid_layout(kind, 8, 10, 0.5, 4)[0]
    table = figures.scan_psl_table(layout, LAM, math.radians(30), steps=4)
    assert table["theta_deg"][0] == 0.0 and table["theta_deg"][-1] == pytest.approx(30.0)
    assert table["psl_db"].shape == (4, 3)
    broadside = score_layout(layout, FREQ, 0.0).psl_db
    row0 = table["psl_db"][0]
    np.testing.assert_allclose(row0, broadside, atol=0.5)
    assert np.all(row0 <= broadside + 1e-6)
    # every steered visible disc lies inside the disc of radius 1 + sin θmax, so no entry can
    # exceed the refined PSL over the cone
    cone = score_layout(layout, FREQ, math.radians(30)).psl_db
    assert table["worst_db"].max() <= cone + 1e-6


def test_scan_psl_sees_the_grating_lobe_enter():
    """Filled 12 × 12 square lattice at 0.7 λ scanned in φ = 0.

    The grating lobe at u = sin θ₀ − λ/d = sin θ₀ − 1/0.7 reaches the visible edge u = −1 once
    sin θ₀ > 1/0.7 − 1, i.e. θ₀ > 25.4° (references.md row 10: Sharp 1961, Mailloux ch. 1;
    math from the lattice periodicity); its beam, first null λ/(N d) = 0.119 wide in u, leans
    in before that. So: up to 15° (lobe 0.17 outside) the worst sidelobe is the uniform
    aperture's first sidelobe, about −13 dB (row 8); at 25° (lobe 0.006 outside) and 30° it
    is the grating lobe, within 1 dB of the beam. Thresholds are loose: the table is sampled.
    """
    cc, rr = np.meshgrid(np.arange(12), np.arange(12))
    layout = Layout(cc.ravel() * 0.7 * LAM, rr.ravel() * 0.7 * LAM)
    table = figures.scan_psl_table(layout, LAM, math.radians(30), steps=7)  # 0, 5, …, 30°
    phi0 = table["psl_db"][:, 0]
    assert np.all(phi0[:4] < -12.0)  # 0 … 15°
    assert phi0[5] > -1.0  # 25°
    assert phi0[6] > -1.0  # 30°: the grating lobe is in


# -- the report as a design review reads it ----------------------------------------------------
def test_psl_location_and_its_repeats():
    """The lattice repeats the pattern every reciprocal vector b = λ·(A⁻¹)ᵀ (references.md
    row 10; math). Square λ/2 lattice (λ = 2 mm, d = 1 mm): b = (2, 0), (0, 2).
    (1.5, 0) repeats at (−0.5, 0): visible at broadside. (1.2, 1.2) has its nearest repeat
    at (−0.8, −0.8), |·| = 1.131 > 1: seen only by beams steered at least
    asin(0.131) = 7.55° toward φ = 45° (the steered beam sees q at q + (u₀, v₀))."""
    from thinning.outputs.report_sections import psl_location

    basis = [[1.0, 0.0], [0.0, 1.0]]
    a = psl_location([1.5, 0.0], basis, 2.0, 45.0)
    assert a["broadside"] and np.allclose(a["nearest"], [-0.5, 0.0])
    assert "broadside beam has it too" in a["text"]
    b = psl_location([1.2, 1.2], basis, 2.0, 45.0)
    assert not b["broadside"] and np.allclose(b["nearest"], [-0.8, -0.8])
    assert b["min_scan_deg"] == pytest.approx(math.degrees(math.asin(math.hypot(0.8, 0.8) - 1)))
    assert b["toward_phi_deg"] == pytest.approx(45.0)
    c = psl_location([0.3, 0.4], basis, 2.0, 45.0)
    assert c["broadside"] and "θ = 30.0°" in c["text"]  # asin(0.5)


def test_scan_section_with_equal_values_is_one_line(tmp_path, rect):
    """Every beam with the same worst sampled lobe: one statement and a one-row table, and
    the note on sampled against refined figures names the difference."""
    table = {
        "theta_deg": np.linspace(0, 20, 5),
        "phi_deg": np.array([0.0, 45.0, 90.0]),
        "psl_db": np.full((5, 3), -22.94),
        "psl_uv": np.zeros((5, 3, 2)),
        "worst_db": np.full(5, -22.94),
    }
    path = build_report(tmp_path / "r.html", metrics={"psl_db": -22.91}, scan_table=table)
    scan = path.read_text().split('id="scan"')[1].split("</section>")[0]
    assert scan.count("<tr>") == 2 and "the same worst sampled sidelobe" in scan
    assert "0.03 dB" in scan and "refined on the exact continuous pattern" in scan
    table["psl_db"][2, 1] = -21.0
    path = build_report(tmp_path / "r.html", metrics={"psl_db": -20.9}, scan_table=table)
    scan = path.read_text().split('id="scan"')[1].split("</section>")[0]
    assert scan.count("<tr>") == 6


def test_cuts_mark_the_steering_range_not_an_observation_band(rect):
    """No shaded band of observation angles (matplotlib's axvspan is a Polygon or Rectangle
    patch); the steering range is an annotation, labelled as such."""
    layout, _ = rect
    fig = figures.fig_principal_cuts(layout, LAM, math.radians(30))
    for ax in fig.axes:
        assert not [p for p in ax.patches if "scan" in str(p.get_label())]
        texts = [t.get_text() for t in ax.texts]
        assert any("steering range ±30°" in t for t in texts)
        assert "observation angle" in ax.get_xlabel()


def _stress(model):
    return {
        "scan": [
            {
                "theta_deg": 30.0,
                "phi_deg": 0.0,
                "psl_db": -20.0,
                "gain_dbi": 28.5,
                "scan_loss_db": 0.62,
                "hpbw_deg": 5.7,
                "hpbw_broadening": 1.15,
                "cos_law": 1.1547,
            }
        ],
        "band": [
            {
                "frequency_ghz": 9.400000001,
                "steering": "phase",
                "theta_command_deg": 30.0,
                "theta_beam_deg": 30.0,
                "squint_deg": 0.0,
                "psl_db": -20.0,
                "grating_lobe": False,
            }
        ],
        "monte_carlo": {"trials": 1, "model": model},
        "psl_db": {"nominal": -20.0, "median": -20.0, "p90": -20.0},
        "asl_db": {"nominal": -30.0, "mean": -30.0},
        "expected_asl_db": -30.0,
    }


def test_built_array_section_reads_as_a_review(tmp_path):
    """No Monte Carlo without an error; the scan loss is a positive loss; frequencies at a
    sensible precision; the error floor's formula rendered, citing the publications rather
    than a file the reader does not have."""
    none = {"amplitude_error_db": 0.0, "phase_error_deg": 0.0, "phase_bits": None, "failures": 0}
    text = build_report(
        tmp_path / "r.html", metrics={"psl_db": -20.0}, stress=_stress(none)
    ).read_text()
    stress = text.split('id="stress"')[1].split("</section>")[0]
    assert "Random errors" not in stress
    assert ">0.62<" in stress and "−0.62" not in stress
    assert ">9.4<" in stress and "9.4000" not in stress
    some = dict(none, phase_error_deg=5.0, phase_bits=4)
    text = build_report(
        tmp_path / "r.html", metrics={"psl_db": -20.0}, stress=_stress(some)
    ).read_text()
    assert "Random errors" in text and "2<sup>2B</sup>" in text and "Mailloux" in text
    for raw in ("^{", "cos^", "references.md"):
        assert raw not in text


def test_summary_names_the_spec_constraints_and_appendix(tmp_path):
    """With its spec the report opens with the name and description, the requirement
    verdicts, the constraints, the cell-gain rule named for the lattice in use, and ends with
    the spec's text."""
    from thinning.analysis.requirements import judge
    from thinning.spec import load_spec

    text = (
        (
            'name = "review-panel"\ndescription = "an invented panel for the review test"\n'
            + TRI_PANEL
        )
        + """[constraints]
symmetry = "mirror-x"
pin_ids = [1, 2]
[requirements]
psl_db = -30.0
"""
    )
    path = tmp_path / "panel.toml"
    path.write_text(text)
    spec = load_spec(path)
    sites = spec.sites()
    mask = np.zeros(len(sites), bool)
    mask[: len(sites) // 2] = True
    layout = Layout.from_sites(sites, mask)
    xy = np.column_stack([sites.x, sites.y])
    metrics = score_layout(layout, FREQ, math.radians(20), 1.0, sites=xy).to_dict()
    html = report_for_layout(
        tmp_path / "r.html",
        layout,
        FREQ,
        math.radians(20),
        1.0,
        aperture=spec.aperture,
        sites=xy,
        metrics=metrics,
        spec=spec,
        requirements=judge(spec.requirements, metrics),
    ).read_text()
    summary = html.split('id="layout"')[0]
    assert "review-panel" in summary and "an invented panel for the review test" in summary
    assert "PSL ≤ −30 dB" in summary and "NOT MET" in summary
    assert "mirror-x" in summary and "ids 1, 2" in summary and "3 mm" in summary
    assert "Cell-gain rule, triangular lattice" in summary and "λ/2 square" not in summary
    assert "Frequency" in summary and ">10 GHz<" in summary
    appendix = html.split('id="spec"')[1]
    assert "edge_clearance_mm = 3.0" in appendix and spec.digest in appendix


def test_layout_drawing_is_inline_svg_with_ids_and_dimensions(tmp_path, rect):
    """Vector drawing: one circle per element carrying its id as a tooltip, the ids as text
    (hidden until asked for), the zoom and id controls, and the overall dimensions in mm
    measured from the elements (no outline given): the element span, centre to centre."""
    layout, sites = rect
    html = report_for_layout(tmp_path / "r.html", layout, FREQ, 0.3, sites=sites).read_text()
    svg = html[html.index("<svg") : html.index("</svg>")]
    assert svg.count("<circle") == len(layout) + len(sites)  # elements and empty sites
    ids = re.findall(r"<title>(\d+): x", svg)
    assert ids == [str(i) for i in range(1, len(layout) + 1)]
    assert 'class="ids"' in svg and 'id="dwg-ids"' in html and 'id="dwg-z4"' in html
    width = (layout.x.max() - layout.x.min()) * 1e3
    assert f"{width:.1f} mm (element centres)" in svg
