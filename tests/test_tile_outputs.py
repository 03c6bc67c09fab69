"""What a tiled layout hands over: layout.csv's tile/chip/channel columns, tiles.csv, the
DXF's TILES and CHIPS layers, the count map and the report's tiles section.

References named beside each check: the Python standard library's ``csv`` module as the CSV
reader, ezdxf's reader (``ezdxf.readfile``) for the DXF, ``xml.etree.ElementTree`` for the
SVG, the PNG specification (RFC 2083 §4.1.1: IHDR width and height as big-endian uint32) for
the PNG, and exact identities (counts summing to N, every element on one chip).
"""

from __future__ import annotations

import csv
import json
import struct
import xml.etree.ElementTree as ET

import ezdxf
import numpy as np
import pytest

from thinning.cli import main
from thinning.geometry.aperture import Aperture
from thinning.geometry.chips import group_chips
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.geometry.tiles import TileGrid, TileRules, Tiling
from thinning.io.layout_csv import read_layout_csv, write_layout_csv
from thinning.io.tiles_csv import tile_columns, write_tiles_csv
from thinning.outputs import dxf as dxf_mod
from thinning.outputs.deliver import write_drawings
from thinning.outputs.dxf import write_layout_dxf
from thinning.outputs.report import build_report
from thinning.outputs.tile_map import tile_map_svg, write_tile_map_png
from thinning.outputs.tile_report import tiles_html

# a 355 × 250 mm panel with a corner cut and a hole: full tiles, and tiles cut by the outline
# and by the hole (sites every 15 mm from (0, 0))
OUTLINE_MM = [[-5, -5], [350, -5], [350, 200], [300, 245], [-5, 245]]
HOLE_MM = [[130, 130], [160, 130], [160, 160], [130, 160]]


@pytest.fixture(scope="module")
def panel():
    aperture = Aperture.from_mm(OUTLINE_MM, [HOLE_MM])
    sites = Lattice.from_mm("rectangular", [15, 15]).sites_in(aperture)
    grid = TileGrid(sites, TileRules((8, 8), max_elements_per_tile=48, channels_per_chip=4))
    rng = np.random.default_rng(4)
    mask = rng.random(len(sites)) < 0.55
    # within every tile's limit
    for t in range(grid.n_tiles):
        on = np.flatnonzero(mask & (grid.tile_of_site == t))
        mask[on[grid.limit[t] :]] = False
    layout = Layout.from_sites(sites, mask)
    tile = grid.tile_of_site[mask]
    chips = group_chips(layout.x, layout.y, tile, 4, n_tiles=grid.n_tiles)
    tiling = Tiling.of_mask(grid, mask, chips=chips)
    return aperture, sites, layout, tiling


def test_panel_has_full_and_partial_tiles(panel):
    _, _, layout, tiling = panel
    assert tiling.grid.full.any() and (~tiling.grid.full).any()
    assert tiling.table.count.sum() == len(layout)  # exact identity


# -- layout.csv ---------------------------------------------------------------------------------
def test_layout_csv_columns_round_trip(panel, tmp_path, capsys):
    """tile/chip/channel written 1-based, read back by the csv module; the layout reader
    ignores them, and ``thinning score`` still reads the file."""
    _, _, layout, tiling = panel
    path = tmp_path / "layout.csv"
    cols = tile_columns(tiling)
    assert list(cols) == ["tile", "chip", "channel"]
    write_layout_csv(path, layout, extra_columns=cols)
    with path.open(newline="") as f:
        rows = list(csv.DictReader(f))  # reference reader: the csv module
    assert [int(r["tile"]) for r in rows] == [int(t) + 1 for t in tiling.element_tile]
    assert [int(r["chip"]) for r in rows] == tiling.chips.chip.tolist()
    assert [int(r["channel"]) for r in rows] == tiling.chips.channel.tolist()
    back = read_layout_csv(path)
    np.testing.assert_allclose(back.x, layout.x, atol=1e-9)
    np.testing.assert_allclose(back.y, layout.y, atol=1e-9)
    assert main(["score", str(path), "--freq-ghz", "10", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["elements"] == len(layout)


def test_tile_columns_without_chips(panel):
    _, _, _, tiling = panel
    bare = Tiling(tiling.grid, tiling.table, tiling.element_site, tiling.element_tile)
    assert list(tile_columns(bare)) == ["tile"]


# -- tiles.csv ----------------------------------------------------------------------------------
def test_tiles_csv(panel, tmp_path):
    """One row per tile; counts sum to N and equal the elements of layout.csv in each tile
    (exact identities); the chips column sums to the chips; read by the csv module."""
    _, _, layout, tiling = panel
    grid = tiling.grid
    write_tiles_csv(tmp_path / "tiles.csv", tiling)
    write_layout_csv(tmp_path / "layout.csv", layout, extra_columns=tile_columns(tiling))
    with (tmp_path / "tiles.csv").open(newline="") as f:
        rows = list(csv.DictReader(f))
    with (tmp_path / "layout.csv").open(newline="") as f:
        per_tile = np.bincount([int(r["tile"]) for r in csv.DictReader(f)])
    assert len(rows) == grid.n_tiles
    assert list(rows[0]) == [
        "id",
        "a",
        "b",
        "pattern",
        "orientation",
        "count",
        "limit",
        "full",
        "chips",
        "x_mm",
        "y_mm",
    ]
    assert sum(int(r["count"]) for r in rows) == len(layout)
    assert sum(int(r["chips"]) for r in rows) == tiling.chips.n_chips
    for t, r in enumerate(rows):
        assert int(r["id"]) == t + 1
        assert (int(r["a"]), int(r["b"])) == (grid.a[t], grid.b[t])
        assert int(r["count"]) == (per_tile[t + 1] if t + 1 < len(per_tile) else 0)
        assert int(r["count"]) <= int(r["limit"]) == grid.limit[t]
        assert int(r["full"]) == int(grid.full[t])
        assert int(r["pattern"]) == tiling.table.pattern[t]
        assert r["orientation"] == tiling.table.orientation[t]
        assert int(r["chips"]) == -(-int(r["count"]) // 4)
        np.testing.assert_allclose(
            [float(r["x_mm"]), float(r["y_mm"])], grid.centre(t) * 1e3, atol=1e-6
        )
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


# -- DXF ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("bulk", [False, True])
def test_dxf_tiles_and_chips_layers(panel, tmp_path, monkeypatch, bulk):
    """Read back with ezdxf (reference reader): TILES holds a rectangle and an id per tile,
    CHIPS a point and a circle per chip and a line per element, from its chip's centre to
    the element (to 0.001 mm); the same through the text-written path of large layouts."""
    aperture, _, layout, tiling = panel
    if bulk:
        monkeypatch.setattr(dxf_mod, "BULK_ELEMENTS", 10)
    path = write_layout_dxf(tmp_path / "layout.dxf", layout, aperture, tiling=tiling)
    doc = ezdxf.readfile(path)
    assert doc.audit().has_errors is False
    msp = doc.modelspace()
    grid, chips = tiling.grid, tiling.chips
    assert {"TILES", "CHIPS"} <= {layer.dxf.name for layer in doc.layers}
    boxes = msp.query('LWPOLYLINE[layer=="TILES"]')
    texts = msp.query('TEXT[layer=="TILES"]')
    assert len(boxes) == len(texts) == grid.n_tiles
    assert sorted(int(t.dxf.text) for t in texts) == list(range(1, grid.n_tiles + 1))
    for box in boxes:
        assert box.closed
    first = np.array([(p[0], p[1]) for p in boxes[0].get_points("xy")])
    np.testing.assert_allclose(first, grid.corners(0) * 1e3, atol=1e-3)
    assert len(msp.query('POINT[layer=="CHIPS"]')) == chips.n_chips
    assert len(msp.query('CIRCLE[layer=="CHIPS"]')) == chips.n_chips
    lines = msp.query('LINE[layer=="CHIPS"]')
    assert len(lines) == len(layout)
    ends = {(round(e.dxf.end.x, 3), round(e.dxf.end.y, 3)): e for e in lines}
    for k, (x, y) in enumerate(np.column_stack([layout.x, layout.y]) * 1e3):
        line = ends[(round(x, 3), round(y, 3))]
        cx, cy = chips.centre[chips.chip[k] - 1] * 1e3
        assert (line.dxf.start.x, line.dxf.start.y) == pytest.approx((cx, cy), abs=1e-3)
    assert len(msp.query('CIRCLE[layer=="ELEMENTS"]')) == len(layout)


def test_dxf_without_tiling_has_no_tile_layers(panel, tmp_path):
    aperture, _, layout, _ = panel
    doc = ezdxf.readfile(write_layout_dxf(tmp_path / "l.dxf", layout, aperture))
    assert "TILES" not in doc.layers and "CHIPS" not in doc.layers


# -- count map ----------------------------------------------------------------------------------
def test_tile_map_svg(panel):
    """Parsed by ElementTree: one shaded rectangle per tile, with its count written in it."""
    aperture, _, _, tiling = panel
    root = ET.fromstring(tile_map_svg(tiling, aperture))
    rects = root.findall(".//rect")
    assert len(rects) == tiling.grid.n_tiles
    groups = root.findall("g")
    counts = [int(g.findall("text")[0].text) for g in groups]
    assert counts == tiling.table.count.tolist()
    dashed = [r.get("stroke-dasharray") is not None for r in rects]
    assert dashed == (~tiling.grid.full).tolist()
    assert root.find("path[@class='outline']") is not None


def test_tile_map_png_and_drawings(panel, tmp_path):
    """tiles.png written with the drawings of a tiled layout: a PNG (RFC 2083 signature and
    IHDR)."""
    aperture, sites, layout, tiling = panel
    files = write_drawings(tmp_path, layout, aperture, sites=sites, tiling=tiling)
    assert {p.name for p in files} == {"layout.dxf", "layout.svg", "layout.png", "tiles.png"}
    data = (tmp_path / "tiles.png").read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    w, h = struct.unpack(">II", data[16:24])
    assert w > 300 and h > 300
    assert write_tile_map_png(tmp_path / "t.png", tiling).exists()


# -- report -------------------------------------------------------------------------------------
def _tiles_metrics(unconstrained=True, repeat=True) -> dict:
    """A hand-made ``metrics["tiles"]`` with every key of the contract."""
    return {
        "rules": TileRules(
            (8, 8), max_elements_per_tile=48, channels_per_chip=4, orientations="none"
        ).to_dict(),
        "tiles": 16,
        "full_tiles": 12,
        "partial_tiles": 4,
        "partial_rule": "a partial tile's limit is the full limit times its share of "
        "usable positions, rounded down",
        "counts": {"min": 12, "max": 48, "mean": 32.0},
        "limit_full": 48,
        "boards_full": 7,
        "boards_partial": 4,
        "chips": 130,
        "longest_chip_distance_mm": 10.61,
        "unconstrained": None
        if not unconstrained
        else {
            "psl_db": -24.3,
            "asl_db": -31.0,
            "penalty_db": 0.42,
            "time_limit_s": 20.0,
            "evaluations": 5000,
        },
        "repeat_lobe": None
        if not repeat
        else {"u": 0.125, "v": 0.0, "level_db": -14.2, "predicted_u": 0.125, "predicted_v": 0.0},
        "notes": ["an invented note"],
    }


def _section(text: str) -> str:
    return text.split('<h2 id="tiles">')[1].split("</section>")[0]


def test_report_tiles_section(tmp_path, panel):
    aperture, _, _, tiling = panel
    m = {"psl_db": -23.88, "asl_db": -30.5, "tiles": _tiles_metrics()}
    svg = tile_map_svg(tiling, aperture)
    text = build_report(tmp_path / "r.html", metrics=m, tile_map=svg).read_text()
    assert 'href="#tiles"' in text
    sec = _section(text)
    for needle in (
        "8 × 8",
        "at most 48",
        "4 channels per chip",
        "16: 12 full, 4 partial",
        "12 to 48",
        "7 distinct full-tile board(s), 4 partial variant(s)",
        "130",
        "10.61 mm",
        "−23.88 dB",
        "−24.30 dB",
        "0.42 dB",
        "Grating-like lobe",
        "u = 0.125",
        "−14.20 dB",
        "an invented note",
        "share of usable positions",
        '<svg viewBox="',
    ):
        assert needle in sec, needle


def test_report_tiles_section_without_comparison(tmp_path):
    m = {"psl_db": -20.0, "tiles": _tiles_metrics(unconstrained=False, repeat=False)}
    sec = _section(build_report(tmp_path / "r.html", metrics=m).read_text())
    assert "compare_unconstrained = true" in sec and "--compare-unconstrained" in sec
    assert "Grating-like" not in sec and "<svg" not in sec
    assert "not measured" in sec


def test_report_without_tiles_has_no_section(tmp_path):
    text = build_report(tmp_path / "r.html", metrics={"psl_db": -20.0}).read_text()
    assert 'id="tiles"' not in text


def test_tiles_html_negative_penalty_is_explained():
    t = _tiles_metrics()
    t["unconstrained"]["penalty_db"] = -0.3
    assert "bounds the cost" in tiles_html(t, {"psl_db": -24.6})


def test_report_for_layout_draws_the_count_map(tmp_path, panel):
    """The route write_deliverables takes: report_for_layout with the tiling puts the count
    map (one rectangle per tile) into the tiles section."""
    from thinning.analysis.score import score_layout
    from thinning.outputs.report import report_for_layout

    aperture, sites, layout, tiling = panel
    metrics = score_layout(layout, 10e9, 0.0, 1.0).to_dict()
    metrics["tiles"] = _tiles_metrics(unconstrained=False, repeat=False)
    path = report_for_layout(
        tmp_path / "r.html", layout, 10e9, aperture=aperture, metrics=metrics, tiling=tiling
    )
    sec = _section(path.read_text())
    assert sec.count("<rect ") == tiling.grid.n_tiles
