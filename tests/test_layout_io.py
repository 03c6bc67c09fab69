"""Layouts, grid fitting, the layout CSV format and atomic output.

Sources of the expected values: every layout here is hand-constructed geometry (positions
built as origin + index·pitch, so the grid, origin and indices are known exactly), and the
file checks are exact identities (what is written is what is read back, to the 1 nm
resolution of the format). Tolerances are stated beside each check.
"""

from __future__ import annotations

import json
import math
import os
import stat
import sys

import numpy as np
import pytest

from thinning.errors import LayoutError, OutputError
from thinning.geometry.lattice import Lattice, Sites
from thinning.geometry.layout import GridFit, Layout
from thinning.io.atomic import atomic_open, atomic_write, atomic_write_json
from thinning.io.layout_csv import read_layout_csv, write_layout_csv

MM = 1e-3
UM = 1e-6


def _noise(rng, n, amplitude=0.3 * UM):
    """Uniform position noise in ±amplitude per axis (hypot ≤ 0.43 µm < the 1 µm tolerance)."""
    return rng.uniform(-amplitude, amplitude, n)


# -- grid_fit on hand-constructed geometry -----------------------------------------------------


def _assert_fit(fit: GridFit, pitch, origin, col, row, pitch_tol, origin_tol):
    assert fit is not None
    np.testing.assert_allclose(fit.pitch, pitch, rtol=0, atol=pitch_tol)
    np.testing.assert_allclose(fit.origin, origin, rtol=0, atol=origin_tol)
    np.testing.assert_array_equal(fit.col, col)
    np.testing.assert_array_equal(fit.row, row)
    assert fit.col.dtype == np.int64 and fit.row.dtype == np.int64
    assert fit.residual <= 1 * UM


def test_grid_fit_rectangular_negative_origin_with_noise():
    # Hand-constructed: 13 × 9 grid, pitch (4.3, 5.1) mm, index (0, 0) at (-30.7, -12.2) mm,
    # ±0.3 µm noise. Least squares over ≥ 9 lines pins the pitch to well under 0.1 µm
    # (worst case 2·0.3 µm / 8 pitches = 0.075 µm) and the origin to within the noise.
    rng = np.random.default_rng(1)
    col, row = np.meshgrid(np.arange(13), np.arange(9))
    col, row = col.ravel(), row.ravel()
    perm = rng.permutation(col.size)  # the fit must not depend on the element order
    col, row = col[perm], row[perm]
    x = -30.7 * MM + col * 4.3 * MM + _noise(rng, col.size)
    y = -12.2 * MM + row * 5.1 * MM + _noise(rng, col.size)
    fit = Layout(x, y).grid_fit()
    _assert_fit(fit, (4.3 * MM, 5.1 * MM), (-30.7 * MM, -12.2 * MM), col, row, 0.1 * UM, 0.3 * UM)
    assert not fit.linear
    assert fit.shape == (9, 13)


def test_grid_fit_exact_rectangular_is_exact():
    # Exact identity: noise-free positions give back the construction to rounding (1e-15 m).
    col, row = np.meshgrid(np.arange(5), np.arange(4))
    col, row = col.ravel(), row.ravel()
    fit = Layout(col * 7.5 * MM, row * 6.0 * MM).grid_fit()
    _assert_fit(fit, (7.5 * MM, 6.0 * MM), (0.0, 0.0), col, row, 1e-15, 1e-15)


def test_grid_fit_triangular_checkerboard():
    # Hand-constructed triangular lattice (conventions.md "Lattices"): rows at pitch dy, sites
    # at pitch dx, odd rows shifted by dx/2. It must fit the grid (dx/2, dy) as the
    # checkerboard col = 2·i + (j mod 2), row = j.
    rng = np.random.default_rng(2)
    dx = 6.0 * MM
    dy = dx * math.sqrt(3) / 2
    i, j = np.meshgrid(np.arange(10), np.arange(7))
    i, j = i.ravel(), j.ravel()
    x = -25.0 * MM + i * dx + (j % 2) * dx / 2 + _noise(rng, i.size)
    y = -3.0 * MM + j * dy + _noise(rng, i.size)
    fit = Layout(x, y).grid_fit()
    _assert_fit(fit, (dx / 2, dy), (-25.0 * MM, -3.0 * MM), 2 * i + j % 2, j, 0.1 * UM, 0.3 * UM)
    assert np.all((fit.col - fit.row) % 2 == 0)


def test_grid_fit_linear_thinned():
    # Hand-constructed linear array along x at y = 3 mm: a random 30 of 60 sites at 5 mm
    # pitch, including the end sites so the expected origin and indices are known exactly.
    rng = np.random.default_rng(3)
    k = np.sort(np.concatenate([[0, 59], rng.choice(np.arange(1, 59), 28, replace=False)]))
    k = k[rng.permutation(k.size)]
    x = -40.0 * MM + k * 5.0 * MM + _noise(rng, k.size)
    y = 3.0 * MM + _noise(rng, k.size)
    layout = Layout(x, y)
    assert layout.is_linear
    fit = layout.grid_fit()
    _assert_fit(
        fit, (5.0 * MM, 0.0), (-40.0 * MM, 3.0 * MM), k, np.zeros_like(k), 0.1 * UM, 0.3 * UM
    )
    assert fit.linear and fit.shape == (1, 60)


def test_grid_fit_thinned_planar_subset():
    # Hand-constructed: a random 35 % of a 40 × 30 grid (pitch 5.2 × 4.9 mm), with the corner
    # (0, 0) kept so that index 0 is the smallest x and y. The fit must give the original
    # indices. A subset keeps adjacent columns and rows, so the pitch is not a multiple.
    rng = np.random.default_rng(4)
    col, row = np.meshgrid(np.arange(40), np.arange(30))
    col, row = col.ravel(), row.ravel()
    keep = rng.random(col.size) < 0.35
    keep[0] = True
    col, row = col[keep], row[keep]
    x = 11.0 * MM + col * 5.2 * MM + _noise(rng, col.size)
    y = -7.0 * MM + row * 4.9 * MM + _noise(rng, col.size)
    fit = Layout(x, y).grid_fit()
    _assert_fit(fit, (5.2 * MM, 4.9 * MM), (11.0 * MM, -7.0 * MM), col, row, 0.05 * UM, 0.3 * UM)


def test_grid_fit_pitch_below_smallest_gap():
    # Hand-constructed linear positions 0, 3, 5, 8 × 2.5 mm: the smallest gap is 2 pitches,
    # so the fit must divide it (d = 2) to find the 2.5 mm grid.
    k = np.array([0, 3, 5, 8])
    fit = Layout(k * 2.5 * MM, np.zeros(4)).grid_fit()
    _assert_fit(fit, (2.5 * MM, 0.0), (0.0, 0.0), k, np.zeros(4, int), 1e-15, 1e-15)


def test_grid_fit_rejects_jitter_and_irrational_positions():
    # 10 µm jitter is ten times the 1 µm tolerance: no grid.
    rng = np.random.default_rng(5)
    col, row = np.meshgrid(np.arange(8), np.arange(8))
    x = col.ravel() * 5 * MM + rng.normal(0, 10 * UM, 64)
    y = row.ravel() * 5 * MM + rng.normal(0, 10 * UM, 64)
    assert Layout(x, y).grid_fit() is None
    # x at 0, 5 and 5·(1 + √2) mm: the best rational approximations of √2 with denominators
    # ≤ 8 (7/5, 10/7, 11/8, 3/2) miss it by ≥ 14 µm at this pitch, far outside 1 µm.
    x = np.array([0.0, 5.0, 5.0 * (1 + math.sqrt(2))]) * MM
    assert Layout(x, np.array([0.0, 5.0, 10.0]) * MM).grid_fit() is None


def test_grid_fit_degenerate_cases():
    # A single element: documented choice pitch (1 mm, 0), linear, index (0, 0).
    fit = Layout([0.012], [-0.004]).grid_fit()
    assert fit.pitch == (1e-3, 0.0) and fit.linear and fit.shape == (1, 1)
    assert fit.origin == (0.012, -0.004)
    # A column along y: gx takes the y pitch (any pitch is exact along a constant axis).
    fit = Layout(np.full(4, 2 * MM), np.arange(4) * 4 * MM).grid_fit()
    assert fit.pitch == pytest.approx((4 * MM, 4 * MM), abs=1e-15)
    assert not fit.linear and fit.shape == (4, 1)
    # Two elements on one grid point (0.3 µm apart): no one-to-one grid, so None.
    assert Layout([0.0, 0.3 * UM, 5 * MM], [0.0, 0.0, 0.0]).grid_fit() is None
    # More than 50 million grid points (10 µm pitch over 1 km): refused.
    assert Layout([0.0, 10 * UM, 1000.0], [0.0, 0.0, 0.0]).grid_fit() is None


def test_from_sites_keeps_order_and_indices():
    # The Sites order (rows from the top, left to right) is the layout order; the grid fit
    # of a triangular lattice's sites must give back the lattice's grid pitch and the sites'
    # indices shifted to start at 0 (exact identity of the construction).
    lat = Lattice("triangular", 6 * MM, 5.2 * MM, origin=(-1 * MM, 2 * MM))
    i, j = np.meshgrid(np.arange(-3, 4), np.arange(-2, 3))
    col, row = lat.grid_index(i.ravel(), j.ravel())
    sites = Sites(lat, col, row)
    mask = np.arange(len(sites)) % 3 != 1
    amp = np.linspace(0.5, 1.0, len(sites))
    layout = Layout.from_sites(sites, mask=mask, amplitude=amp)
    np.testing.assert_array_equal(layout.x, sites.x[mask])
    np.testing.assert_array_equal(layout.y, sites.y[mask])
    np.testing.assert_array_equal(layout.col, sites.col[mask])
    np.testing.assert_array_equal(layout.row, sites.row[mask])
    np.testing.assert_array_equal(layout.weights, amp[mask])
    assert layout.element_ids == [str(k) for k in range(1, int(mask.sum()) + 1)]
    fit = layout.grid_fit()
    np.testing.assert_allclose(fit.pitch, lat.grid_pitch, rtol=0, atol=1e-15)
    np.testing.assert_array_equal(fit.col, layout.col - layout.col.min())
    np.testing.assert_array_equal(fit.row, layout.row - layout.row.min())
    full = Layout.from_sites(sites)
    assert len(full) == len(sites) and full.amplitude is None
    np.testing.assert_array_equal(full.weights, np.ones(len(sites)))


def test_layout_rejects_inconsistent_arrays():
    with pytest.raises(LayoutError, match="y: has 2 values for 3"):
        Layout([0, 1, 2], [0, 1])
    with pytest.raises(LayoutError, match="at least one element"):
        Layout([], [])
    with pytest.raises(LayoutError, match="amplitude"):
        Layout([0, 1], [0, 0], amplitude=[0.0, 0.0])


# -- CSV round trip ----------------------------------------------------------------------------


def test_csv_round_trip_exact(tmp_path):
    # Exact identity: write then read gives the same layout to the 1 nm resolution of the
    # format (checked to 1e-9 m), same ids, indices, weights and order.
    rng = np.random.default_rng(6)
    n = 50
    layout = Layout(
        x=rng.uniform(-0.3, 0.3, n),
        y=rng.uniform(-0.2, 0.2, n),
        amplitude=rng.uniform(0, 1, n),
        ids=np.array([f"E{k:03d}" for k in range(n)]),
        row=rng.integers(-5, 5, n),
        col=rng.integers(0, 9, n),
    )
    path = tmp_path / "layout.csv"
    write_layout_csv(path, layout, extra_columns={"note": ["a,b"] * n, "gain": [1.5] * n})
    back = read_layout_csv(path)
    np.testing.assert_allclose(back.x, layout.x, rtol=0, atol=1e-9)
    np.testing.assert_allclose(back.y, layout.y, rtol=0, atol=1e-9)
    np.testing.assert_array_equal(back.amplitude, layout.amplitude)  # repr round-trips
    np.testing.assert_array_equal(back.ids, layout.ids)
    np.testing.assert_array_equal(back.row, layout.row)
    np.testing.assert_array_equal(back.col, layout.col)
    assert back.source == str(path)
    first = path.read_bytes()
    write_layout_csv(path, layout, extra_columns={"note": ["a,b"] * n, "gain": [1.5] * n})
    assert path.read_bytes() == first  # deterministic bytes


def test_csv_written_text(tmp_path):
    # Hand-computed expected file: default ids, empty row/col, no amplitude column, negative
    # zero normalised, 6 decimals, \n endings.
    layout = Layout(x=[-1e-12, 0.0125], y=[-0.0, -0.0031234567])
    path = tmp_path / "layout.csv"
    write_layout_csv(path, layout)
    assert path.read_bytes() == (
        b"id,x_mm,y_mm,row,col\n1,0.000000,0.000000,,\n2,12.500000,-3.123457,,\n"
    )
    back = read_layout_csv(path)
    assert back.row is None and back.col is None and back.ids is not None


def test_csv_reader_accepts_bom_spaces_blank_lines_and_unknown_columns(tmp_path):
    path = tmp_path / "in.csv"
    path.write_bytes("\ufeff note , x_mm , y_mm\nfoo,1.5,2\n\nbar,-1,0\n".encode())
    layout = read_layout_csv(path)
    np.testing.assert_allclose(layout.x, [1.5e-3, -1e-3], rtol=0, atol=1e-15)
    np.testing.assert_allclose(layout.y, [2e-3, 0.0], rtol=0, atol=1e-15)
    assert layout.ids is None and layout.amplitude is None


# -- CSV errors: file, line and column in one line ---------------------------------------------

CSV_ERRORS = [
    # (content, line, column, fragment of the reason)
    ("x_mm,y_mm\n1,2\nnot-a-number,3\n", 3, "x_mm", "'not-a-number' is not a number"),
    ("x_mm,y_mm\n1,nan\n", 2, "y_mm", "'nan' is not finite"),
    ("x_mm,y_mm\n1,2\n3,-inf\n", 3, "y_mm", "is not finite"),
    ("x_mm,y_mm\n1,\n", 2, "y_mm", "empty cell"),
    ("x_mm,y_mm,id\n1,2,a\n3,4\n", 3, "id", "the row has 2 fields"),
    ("x_mm,y_mm\n1,2,3\n", 2, "3", "extra field"),
    ("x,y_mm\n1,2\n", 1, "x_mm", "missing from the header"),
    ("x_mm,y_mm,x_mm\n1,2,3\n", 1, "x_mm", "appears twice"),
    ("x_mm,y_mm,amplitude\n1,2,1\n3,4,-0.5\n", 3, "amplitude", "negative"),
    ("x_mm,y_mm,amplitude\n1,2,0\n3,4,0\n", "lines 2-3", "amplitude", "every weight is zero"),
    ("x_mm,y_mm,row,col\n0,0,1.5,0\n", 2, "row", "'1.5' is not an integer"),
    ("x_mm,y_mm,row,col\n0,0,1,0\n5,0,,1\n", 3, "row", "empty cell"),
    ("x_mm,y_mm,row,col\n0,0,1,x\n", 2, "col", "'x' is not a number"),
    ("x_mm,y_mm\n0,0\n5,0\n0.0005,0\n", 4, "x_mm/y_mm", "same position as line 2"),
    ("id,x_mm,y_mm\na,0,0\nb,5,0\na,10,0\n", 4, "id", "id 'a' already used on line 2"),
    ("x_mm,y_mm\n", 1, None, "no data rows"),
]


@pytest.mark.parametrize(("content", "line", "column", "reason"), CSV_ERRORS)
def test_csv_errors_name_file_line_column(tmp_path, content, line, column, reason):
    path = tmp_path / "layout.csv"
    path.write_text(content, encoding="utf-8", newline="")
    with pytest.raises(LayoutError) as info:
        read_layout_csv(path)
    msg = str(info.value)
    assert "\n" not in msg
    assert msg.startswith(str(path))
    assert (line if isinstance(line, str) else f"line {line}") in msg
    if column is not None:
        assert f"column {column}:" in msg
    assert reason in msg


@pytest.mark.parametrize(
    ("content", "reason"),
    [(b"", "empty"), (b"  \n\n", "empty"), (b"x_mm,y_mm\n1,2\n\xff,3\n", "line 3: not UTF-8")],
)
def test_csv_file_level_errors(tmp_path, content, reason):
    path = tmp_path / "layout.csv"
    path.write_bytes(content)
    with pytest.raises(LayoutError, match=reason) as info:
        read_layout_csv(path)
    assert str(path) in str(info.value)


def test_csv_missing_file_and_folder(tmp_path):
    with pytest.raises(LayoutError, match=r"nope\.csv: no such file"):
        read_layout_csv(tmp_path / "nope.csv")
    with pytest.raises(LayoutError, match="is a folder"):
        read_layout_csv(tmp_path)


def test_csv_write_into_missing_folder(tmp_path):
    target = tmp_path / "missing" / "layout.csv"
    with pytest.raises(OutputError, match="does not exist") as info:
        write_layout_csv(target, Layout([0.0], [0.0]))
    assert str(target) in str(info.value)
    assert not (tmp_path / "missing").exists()


# -- atomic output -----------------------------------------------------------------------------


@pytest.mark.parametrize("exc", [RuntimeError, KeyboardInterrupt])
def test_atomic_open_failure_leaves_nothing(tmp_path, exc):
    target = tmp_path / "out.csv"
    with pytest.raises(exc):
        with atomic_open(target) as f:
            f.write("half a file")
            raise exc("stop")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("exc", [RuntimeError, KeyboardInterrupt])
def test_atomic_open_failure_keeps_old_file(tmp_path, exc):
    target = tmp_path / "out.csv"
    target.write_text("old\n")
    with pytest.raises(exc):
        with atomic_open(target) as f:
            f.write("new, half")
            raise exc("stop")
    assert target.read_text() == "old\n"
    assert list(tmp_path.iterdir()) == [target]


def test_atomic_write_replaces_and_sets_permissions(tmp_path):
    target = tmp_path / "out.txt"
    atomic_write(target, "a\nb\n")
    assert target.read_bytes() == b"a\nb\n"
    umask = os.umask(0)
    os.umask(umask)
    if sys.platform != "win32":
        assert stat.S_IMODE(target.stat().st_mode) == 0o666 & ~umask
    atomic_write(target, b"\x00\x01")
    assert target.read_bytes() == b"\x00\x01"
    assert list(tmp_path.iterdir()) == [target]


def test_atomic_write_errors(tmp_path):
    with pytest.raises(OutputError, match="does not exist"):
        atomic_write(tmp_path / "no" / "x.txt", "x")
    with pytest.raises(OutputError, match="is a folder"):
        atomic_write(tmp_path, "x")


@pytest.mark.skipif(
    sys.platform == "win32" or os.geteuid() == 0, reason="needs a non-root POSIX user"
)
def test_atomic_write_unwritable_folder(tmp_path):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        with pytest.raises(OutputError, match="Permission denied"):
            atomic_write(locked / "x.txt", "x")
    finally:
        locked.chmod(0o700)


def test_atomic_write_json(tmp_path):
    # Hand-written expected text: indent 2, given key order, null for non-finite floats,
    # numpy values as plain JSON, trailing newline.
    target = tmp_path / "layout.json"
    atomic_write_json(
        target,
        {
            "z": np.float64(np.nan),
            "a": [1, np.int64(2), float("inf")],
            "b": np.array([0.5]),
            "ok": True,
        },
    )
    text = target.read_text(encoding="utf-8")
    expected = (
        '{\n  "z": null,\n  "a": [\n    1,\n    2,\n    null\n  ],\n'
        '  "b": [\n    0.5\n  ],\n  "ok": true\n}\n'
    )
    assert text == expected
    assert json.loads(text)["a"] == [1, 2, None]
