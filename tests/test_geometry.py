"""Aperture validation, site selection, lattices and grating lobes, checked against the outside.

References used here, named beside each check:
- shapely (the reference geometry library): ``explain_validity``, ``Polygon.covers`` /
  ``contains``, ``distance``; every site set is recomputed with it in millimetres, on integer
  or exactly representable coordinates, independently of the metre conversion in `thinning`.
- hand counts, worked out in the comments.
- closed forms: centred hexagonal numbers 3n(n+1)+1; the Gauss circle count by brute force;
  the index of an integer lattice = gcd of the 2×2 minors of its generators.
- references.md row 10 (grating-lobe-free scan limits; Sharp 1961 and Mailloux ch. 1, from
  memory, but the limits are also exact consequences of the reciprocal lattice, so the tests
  bracket them tightly: ±0.1 % in spacing).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from shapely.geometry import LinearRing, Point, Polygon
from shapely.validation import explain_validity

from thinning.errors import GeometryError, InputError
from thinning.geometry.aperture import BOUNDARY_TOLERANCE, Aperture
from thinning.geometry.lattice import (
    Lattice,
    Sites,
    generated_lattice,
    grating_lobe_positions,
    reciprocal_basis,
)

RECT_MM = [[0, 0], [150, 0], [150, 120], [0, 120]]  # 150 × 120 mm panel
PITCH_MM = 15.0
SQRT3 = math.sqrt(3.0)


def _site_set(sites: Sites) -> set[tuple[int, int]]:
    return set(zip(sites.col.tolist(), sites.row.tolist(), strict=True))


def _grid_points_mm(outline_mm, pitch_x, pitch_y, origin=(0.0, 0.0)):
    """Every (col, row, x_mm, y_mm) of a rectangular index grid over the outline's box."""
    xs, ys = np.asarray(outline_mm, dtype=float).T
    c0 = math.floor((xs.min() - origin[0]) / pitch_x) - 1
    c1 = math.ceil((xs.max() - origin[0]) / pitch_x) + 1
    r0 = math.floor((ys.min() - origin[1]) / pitch_y) - 1
    r1 = math.ceil((ys.max() - origin[1]) / pitch_y) + 1
    for r in range(r0, r1 + 1):
        for c in range(c0, c1 + 1):
            yield c, r, origin[0] + c * pitch_x, origin[1] + r * pitch_y


def _shapely_reason(geom) -> tuple[str, str, str]:
    """shapely's reason, split into (what, x, y): "Self-intersection[5 5]" → (…, "5", "5")."""
    m = re.fullmatch(r"(.*)\[(\S+) (\S+)\]", explain_validity(geom))
    assert m, explain_validity(geom)
    return m.group(1).strip().lower(), m.group(2), m.group(3)


def _refused(*args, **kwargs) -> str:
    with pytest.raises(GeometryError) as info:
        Aperture.from_mm(*args, **kwargs)
    msg = str(info.value)
    assert "\n" not in msg and msg.strip() == msg  # one line, as the CLI prints it
    return msg


# -- Aperture.from_mm -----------------------------------------------------------------------


def test_valid_aperture_with_holes_matches_shapely():
    holes = [[[40, 40], [80, 40], [80, 80], [40, 80]], [[100, 20], [130, 20], [115, 50]]]
    ap = Aperture.from_mm(RECT_MM, holes, edge_clearance_mm=2.5)
    ref = Polygon(RECT_MM, holes)  # shapely, in mm
    assert ref.is_valid
    # area 150·120 − 40·40 − ½·30·30 = 18000 − 1600 − 450 = 15950 mm² (hand) = shapely's
    assert ref.area == pytest.approx(15950.0)
    assert ap.area == pytest.approx(ref.area * 1e-6, rel=1e-12)
    assert ap.bounds == pytest.approx((0.0, 0.0, 0.150, 0.120), abs=1e-15)
    assert ap.edge_clearance == pytest.approx(2.5e-3, rel=1e-15)
    assert Polygon(ap.outline_mm()).equals(Polygon(RECT_MM))
    assert len(ap.holes_mm()) == 2
    for got, want in zip(ap.holes_mm(), holes, strict=True):
        assert Polygon(got).equals(Polygon(want))


def test_closed_ring_with_repeated_first_point_is_accepted():
    ap = Aperture.from_mm(RECT_MM + [RECT_MM[0]])
    assert ap.area == pytest.approx(150 * 120 * 1e-6)  # hand: 150 mm × 120 mm


def test_bow_tie_outline_refused_with_shapelys_reason():
    bow_tie = [[0, 0], [100, 100], [100, 0], [0, 100]]
    assert not LinearRing(bow_tie).is_valid  # shapely agrees it is invalid
    what, x, y = _shapely_reason(LinearRing(bow_tie))  # "Ring Self-intersection[50 50]"
    msg = _refused(bow_tie, source="panel.toml")
    assert msg.startswith("panel.toml: aperture.outline_mm: ")
    assert what in msg and f"({x}, {y}) mm" in msg
    assert (x, y) == ("50", "50")  # hand: the diagonals cross at the centre


def test_hole_outside_outline_refused_naming_the_hole():
    inside = [[10, 10], [20, 10], [20, 20]]
    outside = [[200, 200], [210, 200], [210, 210]]
    what, x, y = _shapely_reason(Polygon(RECT_MM, [outside]))  # "Hole lies outside shell[…]"
    msg = _refused(RECT_MM, [inside, outside])
    assert "aperture.holes_mm[1]" in msg
    assert what in msg and f"({x}, {y}) mm" in msg


def test_hole_crossing_outline_refused_with_location():
    crossing = [[140, 40], [160, 40], [160, 60], [140, 60]]  # pokes out of the right edge
    what, x, y = _shapely_reason(Polygon(RECT_MM, [crossing]))  # shapely: self-intersection
    msg = _refused(RECT_MM, [crossing])
    assert "aperture.holes_mm[0]" in msg
    assert what in msg and f"({x}, {y}) mm" in msg
    assert x == "150"  # hand: the crossing points lie on the edge x = 150


def test_overlapping_holes_refused_with_location():
    a = [[10, 10], [30, 10], [30, 30], [10, 30]]
    b = [[20, 20], [40, 20], [40, 40], [20, 40]]
    what, x, y = _shapely_reason(Polygon(RECT_MM, [a, b]))
    msg = _refused(RECT_MM, [a, b])
    assert "aperture.holes_mm" in msg and what in msg and f"({x}, {y}) mm" in msg


@pytest.mark.parametrize(
    "outline",
    [[[0, 0], [1, 1]], [[0, 0], [1, 1], [0, 0]], [[0, 0], [0, 0], [0, 0], [5, 5]]],
    ids=["two-points", "closed-two-points", "repeated-points"],
)
def test_fewer_than_three_distinct_points_refused(outline):
    msg = _refused(outline)
    assert "aperture.outline_mm" in msg and "at least 3" in msg


def test_collinear_outline_refused_with_shapelys_reason():
    line = [[0, 0], [10, 0], [20, 0]]
    what, x, y = _shapely_reason(LinearRing(line))  # shapely: a degenerate (invalid) ring
    msg = _refused(line)
    assert "aperture.outline_mm" in msg and what in msg and f"({x}, {y}) mm" in msg


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_non_finite_coordinate_refused_naming_point(bad):
    msg = _refused([[0, 0], [100, bad], [100, 100]])
    assert "aperture.outline_mm" in msg and "point 1" in msg and "finite" in msg
    msg = _refused(RECT_MM, [[[10, 10], [20, 10], [bad, 20]]])
    assert "aperture.holes_mm[0]" in msg and "point 2" in msg


@pytest.mark.parametrize(
    "outline",
    [
        [["a", 0], [1, 1], [2, 0]],
        [[0, 0], [1]],
        [0, 0, 10, 0, 10, 10],
        None,
        "abc",
        np.array([["a", "b"], ["c", "d"], ["e", "f"]]),  # multi-line repr
    ],
    ids=["string", "ragged", "flat", "none", "text", "ndarray-of-str"],
)
def test_non_numeric_outline_refused(outline):
    msg = _refused(outline)
    assert "aperture.outline_mm" in msg and "[x, y] pairs" in msg


@pytest.mark.parametrize("clearance", [-1.0, -1e-9, math.nan, math.inf, "wide"])
def test_bad_clearance_refused(clearance):
    msg = _refused(RECT_MM, edge_clearance_mm=clearance)
    assert "aperture.edge_clearance_mm" in msg


def test_geometry_error_is_an_input_error():
    with pytest.raises(InputError):  # and hence ValueError, for callers catching that
        Aperture.from_mm([[0, 0], [1, 1]])
    assert issubclass(GeometryError, ValueError)


# -- site selection ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("clearance_mm", "nx", "ny"),
    [
        # hand counts on the 150 × 120 mm panel, sites at x = 0, 15, …, 150 (11) and
        # y = 0, 15, …, 120 (9); a site needs clearance ≤ x ≤ 150 − clearance, likewise in y.
        (0.0, 11, 9),  # boundary sites count: 11 × 9 = 99
        (7.5, 9, 7),  # x = 15 … 135 (9), y = 15 … 105 (7): 63
        (15.0, 9, 7),  # x = 15 sits exactly 15 mm from the edge and counts: still 63
        (15.01, 7, 5),  # x = 30 … 120 (7), y = 30 … 90 (5): 35
        # x ∈ [59.99, 90.01] holds 60, 75, 90; y ∈ [59.99, 60.01] holds 60 alone: 3
        (59.99, 3, 1),
    ],
)
def test_rectangle_site_count_by_hand(clearance_mm, nx, ny):
    ap = Aperture.from_mm(RECT_MM, edge_clearance_mm=clearance_mm)
    sites = Lattice.from_mm("rectangular", [PITCH_MM, PITCH_MM]).sites_in(ap)
    assert len(sites) == nx * ny
    assert sites.grid_shape == (ny, nx)


def test_origin_offset_by_half_pitch_rectangle_count():
    # hand: origin (7.5, 7.5) mm puts sites at 7.5, 22.5, …, 142.5 (10) × 7.5 … 112.5 (8)
    ap = Aperture.from_mm(RECT_MM)
    lat = Lattice.from_mm("rectangular", [PITCH_MM, PITCH_MM], origin_mm=(7.5, 7.5))
    assert len(lat.sites_in(ap)) == 80


L_SHAPE_MM = [[0, 0], [150, 0], [150, 60], [75, 60], [75, 120], [0, 120]]
L_HOLES_MM = [
    [[17, 17], [58, 17], [58, 43], [17, 43]],
    [[100, 10], [140, 10], [120, 50]],
    [[20, 80], [50, 80], [50, 110], [20, 110]],  # sides on x = 20, 50: not on the grid
]


@pytest.mark.parametrize("clearance_mm", [0.0, 3.0, 7.5, 11.0])
def test_sites_match_shapely_distance_check(clearance_mm):
    """Every grid point is usable exactly when shapely says it is inside and clear of edges."""
    ap = Aperture.from_mm(L_SHAPE_MM, L_HOLES_MM, edge_clearance_mm=clearance_mm)
    sites = Lattice.from_mm("rectangular", [10.0, 10.0]).sites_in(ap)
    ref = Polygon(L_SHAPE_MM, L_HOLES_MM)  # shapely, in mm, integer coordinates
    expected = set()
    for c, r, x, y in _grid_points_mm(L_SHAPE_MM, 10.0, 10.0):
        p = Point(x, y)
        d = ref.boundary.distance(p)
        if clearance_mm == 0:
            ok = ref.covers(p)  # the boundary counts with zero clearance
        else:
            # keep the reference away from ties, so the 1 nm tolerance cannot matter
            assert abs(d - clearance_mm) > 1e-3 or not ref.covers(p)
            ok = ref.covers(p) and d >= clearance_mm
        if ok:
            expected.add((c, r))
    assert _site_set(sites) == expected
    # and directly: every site centre is inside and ≥ clearance from the outline and each hole
    for x, y in zip(sites.x * 1e3, sites.y * 1e3, strict=True):
        p = Point(x, y)
        assert Polygon(L_SHAPE_MM).buffer(1e-6).covers(p)
        assert Polygon(L_SHAPE_MM).exterior.distance(p) >= clearance_mm - 1e-6
        for h in L_HOLES_MM:
            assert not Polygon(h).contains(p)
            assert LinearRing(h).distance(p) >= clearance_mm - 1e-6


@pytest.mark.parametrize(
    ("hole", "n_removed"),
    [
        # hand: x, y ∈ {45, 60, 75} strictly inside (40, 80): 3 × 3 = 9
        ([[40, 40], [80, 40], [80, 80], [40, 80]], 9),
        # hand: sides on the grid (x, y = 30, 90); with zero clearance the 16 sites on the
        # sides stay, the 3 × 3 strictly inside go
        ([[30, 30], [90, 30], [90, 90], [30, 90]], 9),
        (
            [[20, 20], [130, 25], [60, 100]],
            None,
        ),  # a slanted triangle: shapely's count only
    ],
)
def test_holes_remove_exactly_the_sites_shapely_says_they_contain(hole, n_removed):
    lat = Lattice.from_mm("rectangular", [PITCH_MM, PITCH_MM])
    full = _site_set(lat.sites_in(Aperture.from_mm(RECT_MM)))
    holed = _site_set(lat.sites_in(Aperture.from_mm(RECT_MM, [hole])))
    removed = full - holed
    assert holed <= full
    # shapely: Polygon.contains excludes the boundary, matching "an edge counts" at clearance 0
    in_hole = {(c, r) for c, r in full if Polygon(hole).contains(Point(c * 15.0, r * 15.0))}
    assert removed == in_hole
    if n_removed is not None:
        assert len(removed) == n_removed


def _hexagon_mm(circumradius: float) -> list[list[float]]:
    return [
        [circumradius * math.cos(k * math.pi / 3), circumradius * math.sin(k * math.pi / 3)]
        for k in range(6)
    ]


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 6])
@pytest.mark.parametrize("margin", [0.0, 0.5], ids=["on-outline", "half-pitch-margin"])
def test_hexagon_on_triangular_lattice_gives_centred_hexagonal_numbers(n, margin):
    """n rings around a centre site: 3n(n+1)+1 sites (centred hexagonal numbers, closed form).

    The sites within n rings of the origin fill a hexagon with corners at n·d along the lattice
    directions. A hexagon of circumradius n·d holds them (ring n on its sides, which count at
    zero clearance); ring n + 1 lies on the hexagon of circumradius (n + 1)·d, so a
    circumradius of (n + ½)·d holds exactly the same sites with no site on the outline.
    """
    d = 10.0
    lat = Lattice.from_mm("triangular", [d, d * SQRT3 / 2])
    ap = Aperture.from_mm(_hexagon_mm((n + margin) * d))
    sites = lat.sites_in(ap)
    assert len(sites) == 3 * n * (n + 1) + 1  # 7, 19, 37, 61, 91, 127
    # every site within n·d of the centre, and the six corners of ring n present
    assert np.hypot(sites.x, sites.y).max() == pytest.approx(n * d * 1e-3, rel=1e-12)


@pytest.mark.parametrize("k", [1, 2, 3, 4, 5, 7, 10, 12])
def test_circle_on_square_lattice_gives_gauss_circle_count(k):
    """Square lattice of pitch p inside a circle of radius R = k·p: the Gauss circle count.

    Reference: brute-force count of integer (i, j) with i² + j² ≤ k² (known values, from
    memory, OEIS A000328: 5, 13, 29, 49, 81 for k = 1…5, 317 for k = 10). The outline is a
    regular N-gon with vertices on radius R′ = p·√(k² + ½): its inradius R′·cos(π/N) is ≥ R,
    so every point with i² + j² ≤ k² is inside, and R′ < p·√(k² + 1), the next possible
    distance of an integer point, so none with i² + j² > k² is. Hence the count is exact.
    """
    p, nv = 5.0, 720
    r_out = p * math.sqrt(k * k + 0.5)
    assert r_out * math.cos(math.pi / nv) > k * p + 1e-3  # inradius clears R
    assert r_out < p * math.sqrt(k * k + 1) - 1e-3  # circumradius below the next point
    outline = [
        [r_out * math.cos(2 * math.pi * t / nv), r_out * math.sin(2 * math.pi * t / nv)]
        for t in range(nv)
    ]
    sites = Lattice.from_mm("rectangular", [p, p]).sites_in(Aperture.from_mm(outline))
    brute = {(i, j) for i in range(-k, k + 1) for j in range(-k, k + 1) if i * i + j * j <= k * k}
    assert _site_set(sites) == brute
    memory = {1: 5, 2: 13, 3: 29, 4: 49, 5: 81, 10: 317}  # OEIS A000328 (memory)
    if k in memory:
        assert len(brute) == memory[k]


@pytest.mark.parametrize("kind", ["rectangular", "triangular"])
def test_origin_offset_shifts_sites_exactly(kind):
    ox, oy = 3.7, -2.2  # mm
    spacing = [PITCH_MM, PITCH_MM * SQRT3 / 2] if kind == "triangular" else [15.0, 15.0]
    base_lat = Lattice.from_mm(kind, spacing)
    moved_lat = Lattice.from_mm(kind, spacing, origin_mm=(ox, oy))
    base = base_lat.sites_in(Aperture.from_mm(RECT_MM))
    moved = moved_lat.sites_in(Aperture.from_mm([[x + ox, y + oy] for x, y in RECT_MM]))
    # the same indices (boundary sites included), positions shifted by the origin exactly
    np.testing.assert_array_equal(moved.col, base.col)
    np.testing.assert_array_equal(moved.row, base.row)
    np.testing.assert_array_equal(moved.x, base.x + moved_lat.origin[0])
    np.testing.assert_array_equal(moved.y, base.y + moved_lat.origin[1])


@pytest.mark.parametrize("kind", ["rectangular", "triangular"])
def test_sites_order_rows_from_top_left_to_right(kind):
    spacing = [10.0, 10.0 * SQRT3 / 2] if kind == "triangular" else [10.0, 10.0]
    sites = Lattice.from_mm(kind, spacing).sites_in(Aperture.from_mm(L_SHAPE_MM, L_HOLES_MM))
    x, y = sites.x, sites.y
    assert np.all(np.diff(y) <= 0)  # rows from the top
    same_row = np.diff(y) == 0
    assert np.all(np.diff(x)[same_row] > 0)  # left to right within a row
    # the order does not depend on the order the indices come in
    rng = np.random.default_rng(1)
    perm = rng.permutation(len(sites))
    again = Sites(sites.lattice, sites.col[perm], sites.row[perm])
    np.testing.assert_array_equal(again.col, sites.col)
    np.testing.assert_array_equal(again.row, sites.row)


def test_rectangle_first_and_last_sites():
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(Aperture.from_mm(RECT_MM))
    assert (sites.x[0], sites.y[0]) == pytest.approx((0.0, 0.120))  # top-left corner (hand)
    assert (sites.x[-1], sites.y[-1]) == pytest.approx((0.150, 0.0))  # bottom-right corner


@pytest.mark.parametrize("kind", ["rectangular", "triangular", "linear"])
def test_to_grid_and_flat_index_consistent(kind):
    spacing = {"rectangular": [10.0, 10.0], "triangular": [10.0, 8.0], "linear": 10.0}[kind]
    lat = Lattice.from_mm(kind, spacing)
    if kind == "linear":
        sites = lat.linear_sites(9)
    else:
        sites = lat.sites_in(Aperture.from_mm(L_SHAPE_MM, L_HOLES_MM))
    m = len(sites)
    values = np.arange(1, m + 1, dtype=float)  # 0 marks an empty grid cell
    grid = sites.to_grid(values, dtype=np.float64)
    R, C = sites.grid_shape
    assert grid.shape == (R, C)
    r0, c0 = sites.grid_corner
    np.testing.assert_array_equal(grid[sites.row - r0, sites.col - c0], values)
    np.testing.assert_array_equal(grid.ravel()[sites.flat_index], values)
    assert len(set(sites.flat_index.tolist())) == m
    assert np.count_nonzero(grid) == m
    # grid row 0 is the lowest row (rows go up in y)
    assert np.all(sites.y[sites.row == r0] == sites.y.min())
    # leading axes are carried through
    stack = sites.to_grid(np.stack([values, 2 * values, -values]))
    assert stack.shape == (3, R, C) and stack.dtype == np.float32
    np.testing.assert_array_equal(stack[1], 2 * grid)


def test_linear_sites():
    lat = Lattice.from_mm("linear", 12.5, origin_mm=(-30.0, 4.0))
    sites = lat.linear_sites(8)
    assert len(sites) == 8
    # conventions.md: linear sites at i·dx along x (plus the origin)
    np.testing.assert_allclose(sites.x, (-30.0 + 12.5 * np.arange(8)) * 1e-3, rtol=0, atol=1e-15)
    np.testing.assert_array_equal(sites.y, np.full(8, lat.origin[1]))
    assert sites.grid_shape == (1, 8)
    assert len(Lattice.from_mm("linear", [12.5]).linear_sites(np.int64(3))) == 3


@pytest.mark.parametrize("count", [0, -1, 2.5, True, "8", None])
def test_linear_sites_bad_count(count):
    with pytest.raises(GeometryError, match="aperture.sites"):
        Lattice.from_mm("linear", 10.0).linear_sites(count)


def test_linear_sites_need_a_linear_lattice():
    with pytest.raises(GeometryError, match="aperture.sites"):
        Lattice.from_mm("rectangular", [10.0, 10.0]).linear_sites(5)


def test_linear_lattice_in_aperture_uses_one_row():
    # hand: sites at x = 0, 15, …, 150 on y = 0 (the bottom edge, which counts): 11
    sites = Lattice.from_mm("linear", 15.0).sites_in(Aperture.from_mm(RECT_MM))
    assert len(sites) == 11 and np.all(sites.y == 0)


@pytest.mark.parametrize(
    ("outline", "clearance"),
    [
        ([[1, 1], [14, 1], [7, 10]], 0.0),  # a triangle between the 15 mm grid points
        (RECT_MM, 61.0),  # the panel is 120 mm high: nothing is 61 mm from both long edges
    ],
)
def test_aperture_holding_no_site_raises(outline, clearance):
    ap = Aperture.from_mm(outline, edge_clearance_mm=clearance)
    with pytest.raises(GeometryError, match="no lattice site") as info:
        Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap, source="panel.toml")
    assert str(info.value).startswith("panel.toml: aperture: ")


@pytest.mark.parametrize(
    ("kind", "spacing", "field"),
    [
        ("rectangular", [0, 15], "array.spacing_mm[0]"),
        ("rectangular", [15, -1], "array.spacing_mm[1]"),
        ("triangular", [math.nan, 15], "array.spacing_mm[0]"),
        ("triangular", [15, math.inf], "array.spacing_mm[1]"),
        ("rectangular", [15, "x"], "array.spacing_mm[1]"),
        ("rectangular", 15, "array.spacing_mm"),  # a planar lattice needs [dx, dy]
        ("linear", 0, "array.spacing_mm"),
        ("linear", [math.nan], "array.spacing_mm"),
        ("hexagonal", [15, 15], "array.lattice"),
    ],
)
def test_bad_lattice_spec_refused(kind, spacing, field):
    with pytest.raises(GeometryError) as info:
        Lattice.from_mm(kind, spacing, source="panel.toml")
    assert str(info.value).startswith(f"panel.toml: {field}: ")


@pytest.mark.parametrize(
    "args",
    [
        ("rectangular", 0.0, 0.01),
        ("rectangular", 0.01, -0.01),
        ("triangular", math.nan, 0.01),
        ("linear", -0.01),
        ("square", 0.01, 0.01),
    ],
)
def test_bad_lattice_refused(args):
    with pytest.raises(GeometryError):
        Lattice(*args)
    with pytest.raises(GeometryError):
        Lattice("rectangular", 0.01, 0.01, origin=(math.nan, 0.0))


def test_lattice_values_become_floats():
    lat = Lattice("rectangular", "0.015", 1, origin=[0, "0.002"])
    assert (lat.dx, lat.dy, lat.origin) == (0.015, 1.0, (0.0, 0.002))
    assert hash(lat) == hash(Lattice("rectangular", 0.015, 1.0, (0.0, 0.002)))


# -- the triangular lattice -----------------------------------------------------------------


def test_triangular_sites_are_the_checkerboard_and_match_the_definition():
    dx = 10.0
    dy = dx * SQRT3 / 2
    lat = Lattice.from_mm("triangular", [dx, dy])
    sites = lat.sites_in(Aperture.from_mm(RECT_MM))
    assert np.all((sites.col - sites.row) % 2 == 0)  # col ≡ row (mod 2)
    # conventions.md: rows at pitch dy, sites at pitch dx in a row, every other row offset by
    # dx/2. Enumerate that directly (i along the row, j the row) and keep what shapely covers.
    ref = Polygon(RECT_MM)
    expected = set()
    for j in range(-1, int(120 / dy) + 2):
        for i in range(-2, int(150 / dx) + 2):
            x, y = i * dx + (j % 2) * dx / 2, j * dy
            if ref.buffer(1e-6).covers(Point(x, y)):
                expected.add((round(x, 6), round(y, 6)))
    got = {(round(x, 6), round(y, 6)) for x, y in zip(sites.x * 1e3, sites.y * 1e3, strict=True)}
    assert got == expected
    # (i, j) ↔ (col, row) round trip
    i, j = lat.lattice_index(sites.col, sites.row)
    np.testing.assert_allclose(sites.x * 1e3, i * dx + (j % 2) * dx / 2, atol=1e-9)
    c, r = lat.grid_index(i, j)
    np.testing.assert_array_equal(c, sites.col)
    np.testing.assert_array_equal(r, sites.row)


def test_equilateral_triangular_nearest_neighbours_at_dx():
    dx = 10.0
    lat = Lattice.from_mm("triangular", [dx, dx * SQRT3 / 2])
    sites = lat.sites_in(Aperture.from_mm(_hexagon_mm(3 * dx)))  # 37 sites, 3 rings
    xy = np.column_stack([sites.x, sites.y]) * 1e3
    dist = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    np.fill_diagonal(dist, np.inf)
    np.testing.assert_allclose(dist.min(axis=1), dx, rtol=1e-12)  # every site: nearest at dx
    # an interior site has six neighbours at dx (geometry of the equilateral lattice)
    centre = int(np.argmin(np.hypot(xy[:, 0], xy[:, 1])))
    assert np.sum(np.isclose(dist[centre], dx, rtol=1e-12)) == 6
    # the primitive vectors have equal length dx at 60° (math)
    a1, a2 = lat.basis.T * 1e3
    assert np.linalg.norm(a1) == pytest.approx(dx) and np.linalg.norm(a2) == pytest.approx(dx)
    assert a1 @ a2 == pytest.approx(dx * dx / 2)  # cos 60° = ½
    assert lat.cell_area == pytest.approx(abs(np.linalg.det(lat.basis)), rel=1e-12)


# -- generated_lattice ------------------------------------------------------------------------


def _minor_gcd(col, row) -> int:
    """Index of the lattice the differences generate = gcd of their 2×2 minors (math)."""
    d = np.column_stack([np.asarray(col) - col[0], np.asarray(row) - row[0]]).tolist()
    g = 0
    for a in range(len(d)):
        for b in range(a + 1, len(d)):
            g = math.gcd(g, d[a][0] * d[b][1] - d[a][1] * d[b][0])
    return g


def _check_generated(col, row, basis):
    """The basis is in Hermite normal form and spans exactly the generated lattice."""
    h, p, g = basis[0, 0], basis[0, 1], basis[1, 1]
    assert basis[1, 0] == 0 and h > 0 and g > 0 and 0 <= p < h
    # every difference is an integer combination of the basis ...
    diff = np.vstack([np.asarray(col) - col[0], np.asarray(row) - row[0]]).astype(float)
    coef = np.linalg.solve(basis.astype(float), diff)
    np.testing.assert_allclose(coef, np.round(coef), atol=1e-9)
    # ... and the index agrees with the gcd of minors, so the two lattices are equal
    assert h * g == _minor_gcd(col, row)


def test_generated_lattice_of_full_rectangular_and_triangular_sets():
    rect = Lattice.from_mm("rectangular", [10.0, 10.0]).sites_in(Aperture.from_mm(RECT_MM))
    b = generated_lattice(rect.col, rect.row)
    np.testing.assert_array_equal(b, [[1, 0], [0, 1]])
    assert round(np.linalg.det(b)) == 1
    tri_lat = Lattice.from_mm("triangular", [10.0, 10.0 * SQRT3 / 2])
    tri = tri_lat.sites_in(Aperture.from_mm(RECT_MM))
    b = generated_lattice(tri.col, tri.row)
    np.testing.assert_array_equal(b, [[2, 1], [0, 1]])  # the checkerboard {(2, 0), (1, 1)}
    assert round(np.linalg.det(b)) == 2
    # scaled by the grid pitch, it is the triangular lattice's own primitive basis
    gx, gy = tri_lat.grid_pitch
    np.testing.assert_allclose(np.diag([gx, gy]) @ b, tri_lat.basis, rtol=1e-15)


@pytest.mark.parametrize(
    ("keep", "expected"),
    [
        (lambda c, r: c % 2 == 0, [[2, 0], [0, 1]]),  # every 2nd column: det 2
        (lambda c, r: r % 2 == 0, [[1, 0], [0, 2]]),  # every 2nd row: det 2
        (lambda c, r: (c % 2 == 0) & (r % 3 == 0), [[2, 0], [0, 3]]),  # det 6
        (lambda c, r: (c + r) % 2 == 0, [[2, 1], [0, 1]]),  # checkerboard: det 2
        (lambda c, r: (c + 2 * r) % 5 == 0, [[5, 3], [0, 1]]),  # (c, r) = (3, 1) mod 5: det 5
    ],
)
def test_generated_lattice_of_sub_lattices(keep, expected):
    c, r = np.meshgrid(np.arange(-6, 13), np.arange(-4, 11))
    c, r = c.ravel(), r.ravel()
    mask = keep(c, r)
    b = generated_lattice(c[mask], r[mask])
    np.testing.assert_array_equal(b, expected)
    _check_generated(c[mask], r[mask], b)


def test_generated_lattice_of_random_subsets():
    rng = np.random.default_rng(7)
    for _ in range(20):
        gens = rng.integers(-4, 5, size=(2, 2))
        if round(np.linalg.det(gens)) == 0:
            continue
        mn = rng.integers(-5, 6, size=(2, 12))
        pts = gens @ mn + rng.integers(-50, 50, size=(2, 1))  # a translated subset
        b = generated_lattice(pts[0], pts[1])
        if _minor_gcd(pts[0], pts[1]) == 0:
            continue
        _check_generated(pts[0], pts[1], b)


def test_generated_lattice_degenerate_sets():
    np.testing.assert_array_equal(generated_lattice([4], [7]), np.zeros((2, 2)))  # one site
    np.testing.assert_array_equal(generated_lattice([0, 4, 10], [3, 3, 3]), [[2, 0], [0, 0]])
    np.testing.assert_array_equal(generated_lattice([5, 5, 5], [0, 4, 6]), [[0, 0], [0, 2]])


# -- reciprocal basis and grating lobes ---------------------------------------------------------


@pytest.mark.parametrize(
    "basis",
    [
        np.array([[0.015, 0.0], [0.0, 0.012]]),  # rectangular
        np.array([[0.010, 0.005], [0.0, 0.010 * SQRT3 / 2]]),  # equilateral triangular
        np.array([[0.013, -0.004], [0.002, 0.009]]),  # oblique
    ],
)
def test_reciprocal_basis_duality(basis):
    lam = 0.0125
    b = reciprocal_basis(basis, lam)
    # the docstring's convention: bᵢ·aⱼ = λ·δᵢⱼ (math)
    np.testing.assert_allclose(b.T @ basis, lam * np.eye(2), rtol=0, atol=1e-15)


def test_reciprocal_basis_rank_one():
    lam = 0.03
    b = reciprocal_basis(np.array([[0.02, 0.0], [0.0, 0.0]]), lam)  # a row along x
    np.testing.assert_allclose(b, [[1.5, 0.0], [0.0, 0.0]])  # λ/d = 0.03/0.02 (hand)
    b = reciprocal_basis(np.array([[0.0, 0.0], [0.0, 0.02]]), lam)  # a column along y
    np.testing.assert_allclose(b, [[0.0, 0.0], [1.5, 0.0]])
    np.testing.assert_array_equal(reciprocal_basis(np.zeros((2, 2)), lam), np.zeros((2, 2)))


SCAN_DEG = [0.0, 30.0, 45.0, 60.0]


def _square(d):
    return np.array([[d, 0.0], [0.0, d]])


def _equilateral(d):
    return np.array([[d, d / 2], [0.0, d * SQRT3 / 2]])


@pytest.mark.parametrize("theta_deg", SCAN_DEG)
def test_square_lattice_grating_lobe_limit(theta_deg):
    """references.md row 10 (Sharp 1961; Mailloux ch. 1, memory): d/λ < 1/(1 + sin θmax).

    The limit is also exact (the nearest reciprocal vectors have length λ/d), so ±0.1 % in d
    brackets it.
    """
    lam = 0.01
    th = math.radians(theta_deg)
    limit = lam / (1 + math.sin(th))
    assert len(grating_lobe_positions(_square(0.999 * limit), lam, th)) == 0
    lobes = grating_lobe_positions(_square(1.001 * limit), lam, th)
    # just past the limit: the four nearest replicas (±λ/d, 0), (0, ±λ/d) enter (hand)
    assert len(lobes) == 4
    np.testing.assert_allclose(np.hypot(*lobes.T), lam / (1.001 * limit), rtol=1e-12)


@pytest.mark.parametrize("theta_deg", SCAN_DEG)
def test_equilateral_lattice_grating_lobe_limit(theta_deg):
    """references.md row 10: nearest-neighbour d/λ < 2/(√3·(1 + sin θmax)), ±0.1 % bracket."""
    lam = 0.01
    th = math.radians(theta_deg)
    limit = lam * 2 / (SQRT3 * (1 + math.sin(th)))
    assert len(grating_lobe_positions(_equilateral(0.999 * limit), lam, th)) == 0
    lobes = grating_lobe_positions(_equilateral(1.001 * limit), lam, th)
    assert len(lobes) == 6  # the six nearest replicas of the hexagonal reciprocal lattice
    np.testing.assert_allclose(np.hypot(*lobes.T), 2 * lam / (SQRT3 * 1.001 * limit), rtol=1e-12)


@pytest.mark.parametrize("theta_deg", SCAN_DEG)
def test_linear_and_column_grating_lobe_limit(theta_deg):
    """A row (or a single column) of sites at pitch d: the square-lattice limit, one axis."""
    lam = 0.01
    th = math.radians(theta_deg)
    limit = lam / (1 + math.sin(th))
    for d, n in ((0.999 * limit, 0), (1.001 * limit, 2)):
        row = grating_lobe_positions(np.array([[d, 0.0], [0.0, 0.0]]), lam, th)
        col = grating_lobe_positions(np.array([[0.0, 0.0], [0.0, d]]), lam, th)
        assert len(row) == len(col) == n
        if n:
            np.testing.assert_allclose(np.abs(row[:, 0]), lam / d)  # (±λ/d, 0)
            np.testing.assert_allclose(np.abs(col[:, 1]), lam / d)  # (0, ±λ/d)
    assert grating_lobe_positions(np.zeros((2, 2)), lam, th).shape == (0, 2)  # one site


def test_grating_lobes_on_the_horizon_count_and_hand_counted_set():
    lam = 0.01
    # d = λ at broadside: replicas at |G| = 1 exactly, on the horizon, which counts (docstring)
    assert len(grating_lobe_positions(_square(lam), lam, 0.0)) == 4
    # d/λ = 1.2, θmax = 30°: radius 1.5, |G| = |(m, n)|/1.2 ≤ 1.5 ⇔ m² + n² ≤ 3.24:
    # (±1, 0), (0, ±1), (±1, ±1) — 8 lobes (hand), nearest first
    lobes = grating_lobe_positions(_square(1.2 * lam), lam, math.radians(30))
    assert len(lobes) == 8
    r = np.hypot(*lobes.T)
    assert np.all(np.diff(r) >= 0)
    np.testing.assert_allclose(r[:4], 1 / 1.2)
    np.testing.assert_allclose(r[4:], math.sqrt(2) / 1.2)
    # each is a reciprocal-lattice vector: integer coordinates in units of λ/d (math)
    np.testing.assert_allclose(lobes * 1.2, np.round(lobes * 1.2), atol=1e-12)


def test_thinned_triangular_layout_lobes_follow_its_generated_lattice():
    """Grid indices → generated lattice → physical basis → the lattice's own lobes."""
    lam = 0.02
    d = 0.6 * lam  # 0.6 λ, equilateral: limit at θmax = 30° is 2/(√3·1.5) = 0.770 λ (row 10)
    lat = Lattice("triangular", d, d * SQRT3 / 2)
    sites = lat.sites_in(Aperture.from_mm(RECT_MM))
    gx, gy = lat.grid_pitch
    basis = np.diag([gx, gy]) @ generated_lattice(sites.col, sites.row)
    assert len(grating_lobe_positions(basis, lam, math.radians(30))) == 0
    # keep the sub-lattice spanned by 2·a₁ and a₂, i.e. grid indices (4, 0) and (1, 1):
    # col − row ≡ 0 (mod 4), half the sites. Its cell is twice as wide, (2d, 0) at 1.2 λ, so
    # its reciprocal lattice is denser and lobes enter the 30° cone.
    keep = (sites.col - sites.row) % 4 == 0
    sub = generated_lattice(sites.col[keep], sites.row[keep])
    np.testing.assert_array_equal(sub, [[4, 1], [0, 1]])  # HNF of {(4, 0), (1, 1)}, det 4
    _check_generated(sites.col[keep], sites.row[keep], sub)
    assert len(grating_lobe_positions(np.diag([gx, gy]) @ sub, lam, math.radians(30))) > 0


def test_boundary_tolerance_is_a_nanometre():
    assert BOUNDARY_TOLERANCE == 1e-9  # [m]; documents the scale the tests above rely on
