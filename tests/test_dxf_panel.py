"""The panel read from a DXF drawing (thinning.geometry.dxf_panel).

Drawings are written with ezdxf (the writer) and read back; the rings are compared with the same
shapes built by shapely (the reference), and the lattice sites with those of the same polygon
typed in millimetres. The panels are invented for the tests.
"""

from __future__ import annotations

import math

import ezdxf
import numpy as np
import pytest
import shapely
from shapely import affinity
from shapely.geometry import LineString, Point, Polygon, box

from thinning.errors import GeometryError, SpecError
from thinning.geometry.aperture import Aperture
from thinning.geometry.dxf_panel import (
    SAGITTA_MM,
    _entity_piece,
    panel_from_spec_table,
    read_panel_dxf,
)
from thinning.geometry.lattice import Lattice
from thinning.spec import parse_spec

#: bulge of a quarter circle: tan(90°/4) (DXF reference, LWPOLYLINE group code 42)
QUARTER = math.tan(math.pi / 8)
#: shapely's reference circles: quad_segs segments per quarter; chord error r·(1 − cos(π/(4q)))
REF_QUAD_SEGS = 1024


def new_drawing(units: int = 4, layers=("OUTLINE", "HOLES")):
    """An empty ezdxf drawing with the given $INSUNITS and layers."""
    doc = ezdxf.new("R2010", units=units)
    doc.header["$INSUNITS"] = units
    for name in layers:
        doc.layers.add(name)
    return doc, doc.modelspace()


def write_panel_dxf(path, outline, holes=(), units: int = 4, outline_layer="OUTLINE",
                    holes_layer="HOLES"):  # fmt: skip
    """Write a panel drawing: the outline and each hole as a closed LWPOLYLINE.

    Points are [x, y] or [x, y, bulge] in the drawing's unit; usable for demos as well."""
    doc, msp = new_drawing(units, (outline_layer, holes_layer))
    msp.add_lwpolyline(outline, format="xyb", close=True, dxfattribs={"layer": outline_layer})
    for ring in holes:
        msp.add_lwpolyline(ring, format="xyb", close=True, dxfattribs={"layer": holes_layer})
    doc.saveas(path)
    return path


def _site_set(outline, holes, lattice):
    sites = lattice.sites_in(Aperture.from_mm(outline, holes))
    return set(zip(sites.col.tolist(), sites.row.tolist(), strict=True))


def _poly(ring):
    return Polygon(np.asarray(ring))


# -- the panel of test (1): 200 × 120 mm, corners rounded to 10 mm, a round hole, a slot and a
# rectangular cut-out (invented).
W, H, RC = 200.0, 120.0, 10.0
HOLE_C, HOLE_R = (60.0, 60.0), 12.3
SLOT_A, SLOT_B, SLOT_H = (120.0, 40.0), (160.0, 40.0), 6.1
CUT = (110.0, 70.0, 170.0, 95.0)


def _reference():
    """The same panel built by shapely (fine circles: chord error 12.3·(1 − cos(π/4096)) ≈
    4e-6 mm)."""
    q = REF_QUAD_SEGS
    outline = box(RC, RC, W - RC, H - RC).buffer(RC, quad_segs=q)
    hole = Point(HOLE_C).buffer(HOLE_R, quad_segs=q)
    slot = LineString([SLOT_A, SLOT_B]).buffer(SLOT_H, quad_segs=q)
    cut = box(*CUT)
    return outline, [hole, slot, cut]


def _write_curved_panel(path):
    """The panel as a designer might draw it: a bulged LWPOLYLINE, a CIRCLE, a LINE/ARC chain
    (one line reversed, the pieces out of order) and two open LWPOLYLINE pieces."""
    doc, msp = new_drawing()
    o = {"layer": "OUTLINE"}
    h = {"layer": "HOLES"}
    msp.add_lwpolyline(
        [
            (RC, 0, 0),
            (W - RC, 0, QUARTER),
            (W, RC, 0),
            (W, H - RC, QUARTER),
            (W - RC, H, 0),
            (RC, H, QUARTER),
            (0, H - RC, 0),
            (0, RC, QUARTER),
        ],
        format="xyb",
        close=True,
        dxfattribs=o,
    )
    msp.add_circle(HOLE_C, HOLE_R, dxfattribs=h)
    (x1, y), (x2, _) = SLOT_A, SLOT_B
    msp.add_arc((x1, y), SLOT_H, 90, 270, dxfattribs=h)
    msp.add_line((x1, y - SLOT_H), (x2, y - SLOT_H), dxfattribs=h)
    msp.add_line((x1, y + SLOT_H), (x2, y + SLOT_H), dxfattribs=h)  # drawn against the ring
    msp.add_arc((x2, y), SLOT_H, -90, 90, dxfattribs=h)
    a, b, c, d = CUT
    msp.add_lwpolyline([(a, b), (c, b), (c, d)], dxfattribs=h)
    msp.add_lwpolyline([(a, b), (a, d), (c, d)], dxfattribs=h)
    doc.saveas(path)


def test_curved_panel_matches_shapely_and_gives_the_same_sites(tmp_path):
    """Source: ezdxf as writer, shapely as reference. Every ring read back lies within the
    sagitta bound of the true shape (Hausdorff distance ≤ SAGITTA_MM plus the reference's
    own chord error, symmetric difference ≤ perimeter × that), and the sites of the drawing
    are those of the reference polygon typed in mm."""
    path = tmp_path / "panel.dxf"
    _write_curved_panel(path)
    drawing = read_panel_dxf(path)
    assert drawing.notes == []
    ref_outline, ref_holes = _reference()
    bound = SAGITTA_MM + 13.0 * (1 - math.cos(math.pi / (4 * REF_QUAD_SEGS))) + 1e-9
    got_outline = _poly(drawing.outline_mm)
    assert got_outline.hausdorff_distance(ref_outline) <= bound
    assert got_outline.symmetric_difference(ref_outline).area <= ref_outline.length * bound
    assert len(drawing.holes_mm) == 3
    for ref in ref_holes:  # each reference hole has one read hole within the bound
        near = [_poly(r) for r in drawing.holes_mm if _poly(r).hausdorff_distance(ref) <= bound]
        assert len(near) == 1
        assert near[0].symmetric_difference(ref).area <= ref.length * bound
    # orientation: outline counter-clockwise, holes clockwise (shapely's is_ccw)
    assert shapely.is_ccw(shapely.LinearRing(drawing.outline_mm))
    assert not any(shapely.is_ccw(shapely.LinearRing(r)) for r in drawing.holes_mm)
    # no closing point repeated
    assert drawing.outline_mm[0] != drawing.outline_mm[-1]
    typed_outline = np.asarray(ref_outline.exterior.coords).tolist()
    typed_holes = [np.asarray(r.exterior.coords).tolist() for r in ref_holes]
    for lattice in (
        Lattice.from_mm("rectangular", [4.7, 4.7], [1.3, 0.9]),
        Lattice.from_mm("triangular", [5.0, 5.0 * math.sqrt(3) / 2], [0.0, 0.0]),
    ):
        drawn = _site_set(drawing.outline_mm, drawing.holes_mm, lattice)
        typed = _site_set(typed_outline, typed_holes, lattice)
        assert len(drawn) > 500
        assert drawn == typed


def test_straight_panel_typed_in_the_spec_equals_the_drawing(tmp_path):
    """Source: ezdxf as writer and reader of float coordinates (shortest round-trip text).
    A straight-edged polygon drawn as a closed LWPOLYLINE (outline) and as a chain of LINEs
    (hole) reads back with exactly the typed vertices, and the spec gives the same sites from
    either (sites on the edges included: nothing is flattened)."""
    outline = [[0, 0], [150, 0], [150, 120], [75, 150], [0, 120]]
    hole = [[45, 30], [105, 30], [105, 60], [45, 60]]
    doc, msp = new_drawing()
    msp.add_lwpolyline(outline, close=True, dxfattribs={"layer": "OUTLINE"})
    for i in range(len(hole)):
        msp.add_line(hole[i - 1], hole[i], dxfattribs={"layer": "HOLES"})
    path = tmp_path / "panel.dxf"
    doc.saveas(path)
    drawing = read_panel_dxf(path)
    assert drawing.outline_mm == [[float(x), float(y)] for x, y in outline]
    assert Polygon(drawing.holes_mm[0]).equals(Polygon(hole))

    def spec(aperture):
        raw = {
            "array": {"frequency_ghz": 10.0, "lattice": "rectangular", "spacing_mm": 15.0},
            "aperture": aperture,
            "budget": {"fill": 0.5},
        }
        return parse_spec(raw, "spec.toml").sites()

    typed = spec({"outline_mm": outline, "holes_mm": [hole]})
    drawn = spec({"outline_mm": drawing.outline_mm, "holes_mm": drawing.holes_mm})
    assert np.array_equal(typed.col, drawn.col) and np.array_equal(typed.row, drawn.row)


@pytest.mark.parametrize("bulge", [1.0, -1.0])
def test_semicircle_bulge_area(tmp_path, bulge):
    """Source: exact identities. A bulge of ±1 is a half circle on the chord (DXF reference,
    group code 42: bulge = tan(θ/4)). The flattened half disc has its vertices on the circle,
    every chord within SAGITTA_MM of it, and the area of n equal chords,
    (n/2)·r²·sin(π/n), which is below πr²/2 by at most πr × sagitta."""
    r = 25.0
    path = write_panel_dxf(tmp_path / "half.dxf", [(0, 0, bulge), (2 * r, 0, 0)])
    ring = np.asarray(read_panel_dxf(path).outline_mm)
    centre = np.array([r, 0.0])
    assert np.allclose(np.hypot(*(ring - centre).T), r, rtol=0, atol=1e-12)
    arc = ring[np.abs(ring[:, 1]) > 0]  # the vertices inside the arc
    assert np.all(np.sign(arc[:, 1]) == -np.sign(bulge))  # +1: counter-clockwise, below
    n = len(ring) - 1  # chords on the arc (the diameter closes the ring)
    area = Polygon(ring).area
    assert area == pytest.approx(n / 2 * r**2 * math.sin(math.pi / n), rel=1e-12)
    assert 0 < math.pi * r**2 / 2 - area <= math.pi * r * SAGITTA_MM
    assert r * (1 - math.cos(math.pi / (2 * n))) <= SAGITTA_MM  # the chord error itself


def test_full_circle_keeps_its_quadrant_points(tmp_path):
    """Source: exact identity (cos/sin of multiples of π/2). A CIRCLE is a ring whose vertex
    count is a multiple of four starting at 0°, so the four points where a lattice row or
    column through the centre meets it are vertices, and its chord error is within the
    sagitta."""
    doc, msp = new_drawing()
    msp.add_circle((10.0, 20.0), 7.5, dxfattribs={"layer": "OUTLINE"})
    path = tmp_path / "disc.dxf"
    doc.saveas(path)
    ring = np.asarray(read_panel_dxf(path).outline_mm)
    n = len(ring)
    assert n % 4 == 0
    assert 7.5 * (1 - math.cos(math.pi / n)) <= SAGITTA_MM
    for q in ([17.5, 20.0], [10.0, 27.5], [2.5, 20.0], [10.0, 12.5]):
        assert np.min(np.hypot(*(ring - q).T)) < 1e-12


def test_ellipse_and_spline_use_ezdxf_flattening(tmp_path):
    """Source: shapely as reference (an ellipse is a circle scaled along one axis). A full
    ELLIPSE flattened by ezdxf to SAGITTA_MM stays within it of the true curve; a closed
    SPLINE is one hole; a TEXT label on the outline layer is skipped with a note."""
    doc, msp = new_drawing()
    msp.add_ellipse((50, 30), (40, 0), 0.5, dxfattribs={"layer": "OUTLINE"})
    msp.add_text("REV B", dxfattribs={"layer": "OUTLINE"})
    spline = msp.add_spline([(30, 30), (40, 35), (50, 30), (40, 25)], dxfattribs={"layer": "HOLES"})
    spline.closed = True
    doc.saveas(tmp_path / "oval.dxf")
    drawing = read_panel_dxf(tmp_path / "oval.dxf")
    unit = Point(0, 0).buffer(1.0, quad_segs=REF_QUAD_SEGS)
    ref = affinity.translate(affinity.scale(unit, 40, 20, origin=(0, 0)), 50, 30)
    bound = SAGITTA_MM + 40 * (1 - math.cos(math.pi / (4 * REF_QUAD_SEGS)))
    assert _poly(drawing.outline_mm).hausdorff_distance(ref) <= bound
    assert len(drawing.holes_mm) == 1
    assert any("skipped 1 TEXT" in n for n in drawing.notes)


def test_mirrored_entities_read_in_world_coordinates(tmp_path):
    """Source: ezdxf as reader (ARC.start_point/end_point, LWPOLYLINE.vertices_in_wcs give
    world coordinates of entities with extrusion (0, 0, −1), as CAD mirroring leaves them)."""
    doc, msp = new_drawing()
    flip = {"layer": "OUTLINE", "extrusion": (0, 0, -1)}
    arc = msp.add_arc((-30.0, 10.0), 5.0, 20, 140, dxfattribs=flip)
    poly = msp.add_lwpolyline([(-1, 2, 0.3), (-8, 2, 0), (-8, 9)], dxfattribs=flip)
    got = _entity_piece(arc, 1.0, "x.dxf", "layer OUTLINE").points
    assert np.allclose(got[0], (arc.start_point.x, arc.start_point.y), atol=1e-12)
    assert np.allclose(got[-1], (arc.end_point.x, arc.end_point.y), atol=1e-12)
    got = _entity_piece(poly, 1.0, "x.dxf", "layer OUTLINE").points
    wcs = np.array([(v.x, v.y) for v in poly.vertices_in_wcs()])
    for w in wcs:  # every world vertex is a vertex of the piece, in the same order
        assert np.min(np.hypot(*(got - w).T)) < 1e-12
    assert np.allclose(got[0], wcs[0], atol=1e-12) and np.allclose(got[-1], wcs[-1], atol=1e-12)


def test_inch_drawing_is_converted_and_noted(tmp_path):
    """Source: 1 in = 25.4 mm exactly (international inch, 1959); $INSUNITS 1 = inches (DXF
    reference, HEADER section)."""
    path = write_panel_dxf(
        tmp_path / "inch.dxf", [(0, 0), (4, 0), (4, 3), (0, 3)], [[(1, 1), (2, 1), (2, 2)]], units=1
    )
    drawing = read_panel_dxf(path)
    mm = [[0.0, 0.0], [101.6, 0.0], [101.6, 76.2], [0.0, 76.2]]
    assert np.allclose(drawing.outline_mm, mm, rtol=1e-15, atol=0)  # one rounding of x·25.4
    hole = np.array([[2, 2], [2, 1], [1, 1]]) * 25.4  # the drawn triangle, made clockwise
    assert np.allclose(drawing.holes_mm[0], hole, rtol=1e-15, atol=0)
    assert any("converted from inches to mm" in n for n in drawing.notes)


def test_unitless_drawing_is_read_as_millimetres_with_a_note(tmp_path):
    """Common practice: a drawing with $INSUNITS = 0 is taken in the project's unit, and said."""
    path = write_panel_dxf(tmp_path / "plain.dxf", [(0, 0), (4, 0), (4, 3)], units=0)
    drawing = read_panel_dxf(path)
    assert drawing.outline_mm == [[0.0, 0.0], [4.0, 0.0], [4.0, 3.0]]
    assert any("read as millimetres" in n for n in drawing.notes)


def test_layer_names_are_compared_case_insensitively(tmp_path):
    """Common practice (DXF layer names are case-insensitive in CAD programs)."""
    path = write_panel_dxf(
        tmp_path / "p.dxf", [(0, 0), (9, 0), (9, 9), (0, 9)], [[(3, 3), (4, 3), (4, 4)]],
        outline_layer="Panel_Outline", holes_layer="holes",
    )  # fmt: skip
    drawing = read_panel_dxf(path, outline_layer="PANEL_OUTLINE", holes_layer="HOLES")
    assert len(drawing.outline_mm) == 4 and len(drawing.holes_mm) == 1


# -- refusals: one line naming the file, the layer and the entity


def _refusal(path, *words, **kw):
    with pytest.raises(GeometryError) as info:
        read_panel_dxf(path, **kw)
    msg = str(info.value)
    assert "\n" not in msg
    for word in words:
        assert word in msg, msg
    return msg


def test_open_chain_is_refused_naming_the_entity_and_the_end(tmp_path):
    doc, msp = new_drawing()
    o = {"layer": "OUTLINE"}
    line = msp.add_line((0, 0), (120, 0), dxfattribs=o)
    msp.add_line((120, 0.002), (120, 80), dxfattribs=o)  # 2 µm short of the first line
    msp.add_line((120, 80), (0, 0), dxfattribs=o)
    path = tmp_path / "panel.dxf"
    doc.saveas(path)
    _refusal(
        path,
        f"{path}: layer OUTLINE: LINE #{line.dxf.handle}: open chain, end (120.000, 0.000) mm "
        "has no partner within 0.001 mm",
    )
    assert len(read_panel_dxf(path, tolerance_mm=0.01).outline_mm) == 3  # joined within 10 µm


def test_branch_is_refused(tmp_path):
    doc, msp = new_drawing()
    o = {"layer": "OUTLINE"}
    for a, b in [((0, 0), (10, 0)), ((10, 0), (10, 10)), ((10, 10), (0, 0)), ((10, 0), (20, 0))]:
        msp.add_line(a, b, dxfattribs=o)
    doc.saveas(tmp_path / "b.dxf")
    _refusal(tmp_path / "b.dxf", "layer OUTLINE: LINE #", "branch", "(10.000, 0.000)")


def test_two_outlines_are_refused_naming_both(tmp_path):
    doc, msp = new_drawing()
    a = msp.add_circle((0, 0), 10, dxfattribs={"layer": "OUTLINE"})
    b = msp.add_lwpolyline([(20, 0), (30, 0), (30, 9)], close=True, dxfattribs={"layer": "OUTLINE"})
    doc.saveas(tmp_path / "two.dxf")
    _refusal(
        tmp_path / "two.dxf",
        "layer OUTLINE: 2 closed outlines",
        f"CIRCLE #{a.dxf.handle}",
        f"LWPOLYLINE #{b.dxf.handle}",
    )


def test_self_intersecting_outline_is_refused_with_the_point(tmp_path):
    """Source: shapely's is_valid_reason (a bow tie crosses itself at its centre)."""
    doc, msp = new_drawing()
    bow = msp.add_lwpolyline(
        [(0, 0), (10, 10), (10, 0), (0, 10)], close=True, dxfattribs={"layer": "OUTLINE"}
    )
    doc.saveas(tmp_path / "bow.dxf")
    _refusal(
        tmp_path / "bow.dxf",
        f"layer OUTLINE: LWPOLYLINE #{bow.dxf.handle}: ring self-intersection at (5, 5) mm",
    )


def test_empty_or_missing_outline_layer_is_refused(tmp_path):
    doc, msp = new_drawing()
    msp.add_circle((0, 0), 5, dxfattribs={"layer": "HOLES"})
    msp.add_text("PANEL A", dxfattribs={"layer": "OUTLINE"})  # annotation only
    doc.saveas(tmp_path / "empty.dxf")
    _refusal(tmp_path / "empty.dxf", "layer OUTLINE: the outline layer is empty")
    _refusal(
        tmp_path / "empty.dxf", "layer RIM: the outline layer is not in the drawing",
        outline_layer="RIM",
    )  # fmt: skip


def test_missing_and_unreadable_files_are_refused(tmp_path):
    _refusal(tmp_path / "none.dxf", f"{tmp_path / 'none.dxf'}: no such file")
    bad = tmp_path / "bad.dxf"
    bad.write_text("this is not a drawing\n")
    _refusal(bad, f"{bad}: not a readable DXF drawing")


def test_hole_outside_and_across_the_outline_are_refused(tmp_path):
    doc, msp = new_drawing()
    msp.add_lwpolyline([(0, 0), (100, 0), (100, 50), (0, 50)], close=True,
                       dxfattribs={"layer": "OUTLINE"})  # fmt: skip
    inside = msp.add_circle((20, 20), 5, dxfattribs={"layer": "HOLES"})
    outside = msp.add_circle((150, 20), 5, dxfattribs={"layer": "HOLES"})
    doc.saveas(tmp_path / "out.dxf")
    _refusal(
        tmp_path / "out.dxf",
        f"layer HOLES: CIRCLE #{outside.dxf.handle}: the hole lies outside the outline",
    )
    outside.dxf.center = (100, 20)  # now across the right edge
    doc.saveas(tmp_path / "across.dxf")
    _refusal(
        tmp_path / "across.dxf",
        f"layer HOLES: CIRCLE #{outside.dxf.handle}: the hole crosses the outline",
        "at (100.000, ",
    )
    outside.dxf.center = (23, 20)  # overlaps the first hole
    doc.saveas(tmp_path / "overlap.dxf")
    _refusal(
        tmp_path / "overlap.dxf",
        f"layer HOLES: CIRCLE #{inside.dxf.handle} and CIRCLE #{outside.dxf.handle}: "
        "the holes overlap",
    )


def test_units_and_entities_not_read_are_refused(tmp_path):
    path = write_panel_dxf(tmp_path / "au.dxf", [(0, 0), (1, 0), (1, 1)], units=18)
    _refusal(path, "$INSUNITS: 18 (AstronomicalUnits)")
    doc, msp = new_drawing()
    doc.blocks.new("BOARD").add_circle((0, 0), 3)
    ref = msp.add_blockref("BOARD", (5, 5), dxfattribs={"layer": "OUTLINE"})
    doc.saveas(tmp_path / "block.dxf")
    _refusal(
        tmp_path / "block.dxf",
        f"layer OUTLINE: INSERT #{ref.dxf.handle}: INSERT entities are not read",
    )


# -- the spec keys


def test_spec_table_without_dxf_is_none_and_conflicts_are_refused(tmp_path):
    assert panel_from_spec_table({"outline_mm": [[0, 0], [1, 0], [1, 1]]}, tmp_path, "s") is None
    for extra in ({"outline_mm": [[0, 0], [1, 0], [1, 1]]}, {"holes_mm": []}):
        with pytest.raises(SpecError, match=r"^spec.toml: aperture.dxf: .*remove aperture\."):
            panel_from_spec_table({"dxf": "p.dxf", **extra}, tmp_path, "spec.toml")
    with pytest.raises(SpecError, match=r"aperture.dxf_holes_layer: given without aperture.dxf"):
        panel_from_spec_table({"dxf_holes_layer": "H"}, tmp_path, "spec.toml")
    with pytest.raises(SpecError) as info:
        panel_from_spec_table({"dxf": "drawings/none.dxf"}, tmp_path, "spec.toml")
    assert str(info.value) == (
        f"spec.toml: aperture.dxf: {tmp_path / 'drawings' / 'none.dxf'}: no such file"
    )


def test_spec_table_reads_relative_to_the_spec_folder_with_its_layers(tmp_path):
    (tmp_path / "cad").mkdir()
    write_panel_dxf(
        tmp_path / "cad" / "p.dxf", [(0, 0), (9, 0), (9, 9), (0, 9)], [[(3, 3), (4, 3), (4, 4)]],
        outline_layer="EDGE", holes_layer="CUT",
    )  # fmt: skip
    table = {"dxf": "cad/p.dxf", "dxf_outline_layer": "edge", "dxf_holes_layer": "cut"}
    drawing = panel_from_spec_table(table, tmp_path, "spec.toml")
    assert len(drawing.outline_mm) == 4 and len(drawing.holes_mm) == 1
    with pytest.raises(GeometryError, match=r"cad/p.dxf: layer OUTLINE: the outline layer is "):
        panel_from_spec_table({"dxf": "cad/p.dxf"}, tmp_path, "spec.toml")


def test_zero_length_pieces_are_skipped_and_a_wide_tolerance_keeps_arcs(tmp_path):
    """Common practice: a zero-length LINE (a CAD artefact) is skipped with a note, and the
    joining tolerance closes gaps without merging the closely spaced vertices of an arc (a
    10 mm circle has vertices 0.28 mm apart at a 1 µm sagitta: 2·√(2·r·s))."""
    doc, msp = new_drawing()
    msp.add_lwpolyline([(0, 0), (40, 0), (40, 40), (0, 40)], close=True,
                       dxfattribs={"layer": "OUTLINE"})  # fmt: skip
    msp.add_circle((20, 20), 10, dxfattribs={"layer": "HOLES"})
    dot = msp.add_line((5, 5), (5, 5), dxfattribs={"layer": "HOLES"})
    doc.saveas(tmp_path / "dot.dxf")
    fine = read_panel_dxf(tmp_path / "dot.dxf")
    wide = read_panel_dxf(tmp_path / "dot.dxf", tolerance_mm=0.5)
    assert any(f"skipped LINE #{dot.dxf.handle}" in n for n in fine.notes)
    assert wide.holes_mm == fine.holes_mm
    assert 10 * (1 - math.cos(math.pi / len(wide.holes_mm[0]))) <= SAGITTA_MM
