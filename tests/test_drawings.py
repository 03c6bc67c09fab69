"""DXF and figure output, checked by reading the files back with independent readers.

References used here, named beside each check:
- ezdxf's reader (``ezdxf.readfile``), a DXF parser, for the DXF header, layers and entities.
  Coordinates are compared to 0.001 mm, the resolution a mechanical drawing needs; they are in
  fact written at full float64 precision.
- the Python standard library's XML parser (``xml.etree.ElementTree``) for SVG, per the SVG 1.1
  specification's root element (``<svg width=... height=...>``).
- the PNG specification (RFC 2083, §4.1.1: IHDR holds width and height as big-endian uint32
  right after the signature and chunk header), decoded with ``struct``, and matplotlib's own
  PNG reader ``matplotlib.image.imread`` for the pixel array.
"""

from __future__ import annotations

import struct
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from thinning.errors import OutputError
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.outputs import dxf as dxf_mod
from thinning.outputs.drawing import (
    default_footprint_mm,
    layout_figure,
    layout_title,
    save_figure,
    write_layout_drawings,
)
from thinning.outputs.dxf import DXF_LAYERS, write_layout_dxf

ezdxf = pytest.importorskip("ezdxf")

OUTLINE_MM = [[0, 0], [160, 0], [160, 110], [0, 110]]  # 160 × 110 mm panel
HOLE_MM = [[70, 45], [90, 45], [90, 65], [70, 65]]  # 20 × 20 mm cut-out in the middle
CLEARANCE_MM = 3.0
A4_150DPI_PX = (1754, 1240)  # 11.69 in × 150, 8.27 in × 150, rounded


@pytest.fixture(scope="module")
def aperture() -> Aperture:
    return Aperture.from_mm(OUTLINE_MM, [HOLE_MM], edge_clearance_mm=CLEARANCE_MM)


@pytest.fixture(scope="module")
def sites(aperture):
    return Lattice.from_mm("triangular", [17.0, 14.722]).sites_in(aperture)


@pytest.fixture(scope="module")
def layout(sites) -> Layout:
    mask = np.zeros(len(sites), dtype=bool)
    mask[::2] = True  # every other site: thinned, so some sites stay empty
    return Layout.from_sites(sites, mask)


def _entities(doc, kind: str, layer: str) -> list:
    return [e for e in doc.modelspace().query(kind) if e.dxf.layer == layer]


def _no_temp_files(folder) -> bool:
    return not [p for p in folder.iterdir() if p.name.endswith(".tmp")]


# -- DXF ----------------------------------------------------------------------------------------
def test_dxf_reads_back(tmp_path, aperture, layout):
    path = tmp_path / "layout.dxf"
    footprint = 12.5
    assert write_layout_dxf(path, layout, aperture, footprint_mm=footprint, title="t") == path
    doc = ezdxf.readfile(path)  # reference: ezdxf's DXF reader

    assert doc.dxfversion == "AC1024"  # R2010
    assert doc.header["$INSUNITS"] == 4  # millimetres
    assert doc.header["$MEASUREMENT"] == 1  # metric
    for name, colour in DXF_LAYERS.items():
        assert name in doc.layers
        assert doc.layers.get(name).color == colour
    assert len(set(DXF_LAYERS.values())) == len(DXF_LAYERS)  # each its own colour

    circles = _entities(doc, "CIRCLE", "ELEMENTS")
    points = _entities(doc, "POINT", "ELEMENTS")
    assert len(circles) == len(points) == len(layout)
    want = np.column_stack([layout.x, layout.y]) * 1e3  # [mm]
    got_c = np.array([(c.dxf.center.x, c.dxf.center.y) for c in circles])
    got_p = np.array([(p.dxf.location.x, p.dxf.location.y) for p in points])
    np.testing.assert_allclose(got_c, want, rtol=0, atol=1e-3)  # 0.001 mm
    np.testing.assert_allclose(got_p, want, rtol=0, atol=1e-3)
    np.testing.assert_array_equal(got_c, want)  # in fact exact: float64 round trip
    assert all(c.dxf.radius == pytest.approx(footprint / 2) for c in circles)

    (outline,) = _entities(doc, "LWPOLYLINE", "OUTLINE")
    assert outline.closed
    np.testing.assert_allclose(
        np.array(outline.get_points("xy")), aperture.outline_mm()[:-1], rtol=0, atol=1e-9
    )
    (hole,) = _entities(doc, "LWPOLYLINE", "HOLES")
    assert hole.closed
    np.testing.assert_allclose(
        np.array(hole.get_points("xy")), aperture.holes_mm()[0][:-1], rtol=0, atol=1e-9
    )
    # Clearance: the outer ring 3 mm inside the outline and the hole's ring 3 mm outside it.
    clear = _entities(doc, "LWPOLYLINE", "CLEARANCE")
    assert len(clear) == 2
    ext = np.array(clear[0].get_points("xy"))
    assert ext[:, 0].min() == pytest.approx(CLEARANCE_MM)
    assert ext[:, 1].max() == pytest.approx(110 - CLEARANCE_MM)
    inner = np.array(clear[1].get_points("xy"))
    assert inner[:, 0].min() == pytest.approx(70 - CLEARANCE_MM)

    labels = _entities(doc, "TEXT", "LABELS")
    assert [t.dxf.text for t in labels] == layout.element_ids
    assert labels[0].dxf.height == pytest.approx(footprint / 3)
    titles = _entities(doc, "TEXT", "TITLE")
    assert [t.dxf.text for t in titles] == ["t"]
    assert titles[0].dxf.insert.y > 110  # above the panel
    assert _no_temp_files(tmp_path)


@pytest.mark.parametrize("with_aperture", [True, False])
def test_dxf_opens_zoomed_to_the_drawing(tmp_path, aperture, layout, with_aperture):
    """Header extents and the active viewport, read back with ezdxf (reference reader):
    $EXTMIN/$EXTMAX enclose the outline and every element circle, and the geometry's own
    extents as ezdxf.bbox computes them (text within 5 % of the span, whose width no two
    programs measure alike); they are no wider than that plus 5 %; the *Active viewport is
    centred on them and tall enough for them at its aspect ratio."""
    import ezdxf
    from ezdxf import bbox

    path = write_layout_dxf(
        tmp_path / "a.dxf",
        layout,
        aperture if with_aperture else None,
        footprint_mm=8.0,
        title="panel A, 10 GHz",
    )
    doc = ezdxf.readfile(path)

    def xy(v):
        return np.array([v[0], v[1]], dtype=float)

    lo, hi = xy(doc.header["$EXTMIN"]), xy(doc.header["$EXTMAX"])
    msp = doc.modelspace()
    geometry = bbox.extents(msp.query("CIRCLE LWPOLYLINE"))
    assert np.all(lo <= xy(geometry.extmin) + 1e-9)
    assert np.all(hi >= xy(geometry.extmax) - 1e-9)
    if with_aperture:
        xmin, ymin, xmax, ymax = (b * 1e3 for b in aperture.bounds)
        assert lo[0] <= xmin and lo[1] <= ymin and hi[0] >= xmax and hi[1] >= ymax
    everything = bbox.extents(msp)
    span = float(max(xy(everything.extmax) - xy(everything.extmin)))
    assert np.all(hi >= xy(everything.extmax) - 0.05 * span)
    assert np.all(hi <= xy(everything.extmax) + 0.05 * span)
    assert np.all(lo >= xy(everything.extmin) - 0.05 * span)
    vp = doc.viewports.get("*Active")[0]
    assert np.allclose([vp.dxf.center[0], vp.dxf.center[1]], (lo + hi) / 2)
    assert vp.dxf.height >= hi[1] - lo[1]
    assert vp.dxf.height * vp.dxf.aspect_ratio >= hi[0] - lo[0]


def test_dxf_default_footprint_and_no_labels(tmp_path, aperture, layout):
    path = tmp_path / "l.dxf"
    write_layout_dxf(path, layout, aperture, labels=False)
    doc = ezdxf.readfile(path)
    # reference: brute-force smallest pairwise distance (all N² pairs, numpy), not a k-d tree;
    # on this nearly equilateral 17 mm lattice it is 17.0 mm between neighbouring rows.
    xy = np.column_stack([layout.x, layout.y]) * 1e3
    dist = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    nearest = dist[~np.eye(len(xy), dtype=bool)].min()
    assert nearest == pytest.approx(17.0, abs=0.01)
    assert default_footprint_mm(layout) == pytest.approx(0.8 * nearest, rel=1e-12)
    radii = np.array([c.dxf.radius for c in _entities(doc, "CIRCLE", "ELEMENTS")])
    np.testing.assert_allclose(radii, 0.4 * nearest, rtol=1e-12)
    assert not _entities(doc, "TEXT", "LABELS")
    titles = _entities(doc, "TEXT", "TITLE")
    assert titles[0].dxf.text == f"{len(layout)} elements"


def test_dxf_without_aperture(tmp_path, layout):
    path = tmp_path / "bare.dxf"
    write_layout_dxf(path, layout)
    doc = ezdxf.readfile(path)
    assert not _entities(doc, "LWPOLYLINE", "OUTLINE")
    assert not _entities(doc, "LWPOLYLINE", "HOLES")
    assert not _entities(doc, "LWPOLYLINE", "CLEARANCE")
    assert len(_entities(doc, "CIRCLE", "ELEMENTS")) == len(layout)


def test_dxf_no_clearance_layer_content_when_zero(tmp_path, sites):
    ap = Aperture.from_mm(OUTLINE_MM)
    lay = Layout(x=[0.02, 0.05], y=[0.03, 0.03], ids=["A1", "B 2"])
    path = tmp_path / "z.dxf"
    write_layout_dxf(path, lay, ap, title="line one\nline two")
    doc = ezdxf.readfile(path)
    assert not _entities(doc, "LWPOLYLINE", "CLEARANCE")
    assert [t.dxf.text for t in _entities(doc, "TEXT", "LABELS")] == ["A1", "B 2"]
    titles = _entities(doc, "TEXT", "TITLE")
    assert sorted(t.dxf.text for t in titles) == ["line one", "line two"]
    top = max(titles, key=lambda t: t.dxf.insert.y)
    assert top.dxf.text == "line one"


@pytest.mark.parametrize("target", ["missing/out.dxf", "folder"])
def test_dxf_bad_target(tmp_path, layout, target):
    (tmp_path / "folder").mkdir()
    path = tmp_path / target
    with pytest.raises(OutputError) as info:
        write_layout_dxf(path, layout)
    msg = str(info.value)
    assert "\n" not in msg and str(path) in msg
    assert _no_temp_files(tmp_path) and _no_temp_files(tmp_path / "folder")


def test_dxf_failure_midway_leaves_nothing(tmp_path, layout, monkeypatch):
    path = tmp_path / "l.dxf"
    path.write_text("old")

    def boom(*args, **kwargs):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(ezdxf.document.Drawing, "encode", boom)
    with pytest.raises(RuntimeError):
        write_layout_dxf(path, layout)
    assert path.read_text() == "old"  # the old file is untouched
    assert _no_temp_files(tmp_path)


def test_dxf_failure_inside_atomic_write(tmp_path, layout, monkeypatch):
    """A failure while the temporary file is being written removes it."""
    import thinning.io.atomic as atomic

    real_fdopen = atomic.os.fdopen

    class Broken:
        def __init__(self, f):
            self.f = f

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.f.close()
            return False

        def write(self, data):
            self.f.write(data[:10])
            raise RuntimeError("interrupted")

    monkeypatch.setattr(atomic.os, "fdopen", lambda *a, **k: Broken(real_fdopen(*a, **k)))
    with pytest.raises(RuntimeError):
        dxf_mod.write_layout_dxf(tmp_path / "l.dxf", layout)
    assert list(tmp_path.iterdir()) == []


# -- figures ------------------------------------------------------------------------------------
def test_figures_svg_and_png(tmp_path, aperture, layout, sites):
    import matplotlib.image

    paths = write_layout_drawings(
        tmp_path, layout, aperture, title=layout_title(layout, frequency_hz=10e9), sites=sites
    )
    assert paths == [tmp_path / "layout.svg", tmp_path / "layout.png"]

    root = ET.parse(paths[0]).getroot()  # reference: the stdlib XML parser
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert root.get("width") and root.get("height")
    assert float(root.get("width").removesuffix("pt")) == pytest.approx(11.69 * 72)

    data = paths[1].read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"  # RFC 2083 §4.1.1
    w, h = struct.unpack(">II", data[16:24])
    assert abs(w - A4_150DPI_PX[0]) <= 2 and abs(h - A4_150DPI_PX[1]) <= 2
    img = matplotlib.image.imread(paths[1])
    assert img.shape[:2] == (h, w)
    assert _no_temp_files(tmp_path)


def test_svg_deterministic(tmp_path, aperture, layout):
    fig = layout_figure(layout, aperture, title="same")
    a = save_figure(fig, tmp_path / "a.svg").read_bytes()
    fig = layout_figure(layout, aperture, title="same")
    b = save_figure(fig, tmp_path / "b.svg", "svg").read_bytes()
    assert a == b


def test_figure_content(aperture, layout, sites):
    from matplotlib.collections import EllipseCollection

    fig = layout_figure(layout, aperture, footprint_mm=10.0, sites=sites)
    assert tuple(fig.get_size_inches()) == pytest.approx((11.69, 8.27))
    (ax,) = fig.axes
    assert ax.get_xlabel() == "x [mm]" and ax.get_ylabel() == "y [mm]"
    (coll,) = [c for c in ax.collections if isinstance(c, EllipseCollection)]
    assert len(coll.get_offsets()) == len(layout)
    assert [t.get_text() for t in ax.texts] == layout.element_ids  # ≤ 400: auto labels
    dashed = [ln for ln in ax.get_lines() if ln.get_linestyle() == "--"]
    assert len(dashed) == 2  # clearance: outer ring and around the hole
    assert ax.get_legend() is not None
    assert ax.get_title() == f"{len(layout)} elements"
    assert not layout_figure(layout, labels=False).axes[0].texts


def test_figure_without_aperture(tmp_path, layout):
    (path,) = write_layout_drawings(tmp_path, layout, stem="bare", formats=["png"])
    assert path.name == "bare.png" and path.stat().st_size > 0


@pytest.mark.parametrize("target", ["missing", "folder.svg"])
def test_figure_bad_target(tmp_path, layout, target):
    (tmp_path / "folder.svg").mkdir()
    fig = layout_figure(layout, labels=False)
    path = tmp_path / target / "x.svg" if target == "missing" else tmp_path / target
    with pytest.raises(OutputError) as info:
        save_figure(fig, path, "svg")
    assert "\n" not in str(info.value)
    assert _no_temp_files(tmp_path)


def test_figure_failure_midway_leaves_nothing(tmp_path, layout, monkeypatch):
    from matplotlib.figure import Figure

    def boom(*args, **kwargs):
        raise RuntimeError("render failed")

    monkeypatch.setattr(Figure, "savefig", boom)
    with pytest.raises(RuntimeError):
        write_layout_drawings(tmp_path, layout)
    assert list(tmp_path.iterdir()) == []


def test_bad_arguments(tmp_path, layout):
    fig = layout_figure(layout, labels=False)
    with pytest.raises(ValueError, match="format"):
        save_figure(fig, tmp_path / "x.bmp")
    with pytest.raises(ValueError, match="footprint_mm"):
        write_layout_dxf(tmp_path / "x.dxf", layout, footprint_mm=0)
    with pytest.raises(ValueError, match="formats"):
        write_layout_drawings(tmp_path, layout, formats=("svg", "gif"))
    assert list(tmp_path.iterdir()) == []
