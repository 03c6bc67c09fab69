"""Tiled designs end to end: the files of a run, the cost of the constraint, sweeps in chips
and in elements per tile, the bundled tiled example.

Sources: the contract (../shared/conventions.md, "Contract additions": the tile, chip and
channel columns, tiles.csv, budgets in chips); exact identities between the files (counts,
digests); shapely as the reference for the drawn panel's area.
"""

from __future__ import annotations

import csv
import hashlib
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import shapely

from thinning.analysis.design import run_design
from thinning.analysis.sweep import run_sweep
from thinning.spec import load_spec

ROOT = Path(__file__).resolve().parents[1]

SPEC = """
name = "tile test panel"
[array]
frequency_ghz = 10.0
lattice = "rectangular"
spacing_mm = 15.0
origin_mm = [7.5, 7.5]
[aperture]
outline_mm = [[-120, -120], [120, -120], [120, 120], [-120, 120]]
holes_mm = [[[-10, -10], [10, -10], [10, 10], [-10, 10]]]
[budget]
chips = 30
[tiles]
size = [8, 8]
max_elements_per_tile = 40
channels_per_chip = 4
compare_unconstrained = true
[scan]
max_deg = 10
[search]
method = "genetic"
seed = 3
evaluations = 600
"""


def _rows(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def tiled_run(tmp_path_factory):
    d = tmp_path_factory.mktemp("tiled")
    (d / "panel.toml").write_text(SPEC)
    spec = load_spec(d / "panel.toml")
    res = run_design(spec, d / "out")
    return spec, res, d / "out"


def test_run_files_carry_tiles_chips_and_channels(tiled_run):
    """layout.csv gains tile, chip, channel; tiles.csv lists every tile with its count, and
    the counts agree with layout.csv (exact identity); every chip is whole (4 channels,
    budget in chips) and lies in one tile; layout.json lists tiles.csv's digest."""
    spec, res, out = tiled_run
    rows = _rows(out / "layout.csv")
    assert len(rows) == 120 and {"tile", "chip", "channel"} <= set(rows[0])
    tiles = _rows(out / "tiles.csv")
    per_tile = Counter(int(r["tile"]) for r in rows)
    for t in tiles:
        assert int(t["count"]) == per_tile.get(int(t["id"]), 0)
        assert int(t["count"]) <= int(t["limit"]) and int(t["count"]) % 4 == 0
    chips: dict[int, list] = {}
    for r in rows:
        chips.setdefault(int(r["chip"]), []).append((int(r["tile"]), int(r["channel"])))
    assert len(chips) == 30
    for members in chips.values():
        assert len(members) == 4 and len({t for t, _ in members}) == 1
        assert sorted(c for _, c in members) == [1, 2, 3, 4]
    meta = json.loads((out / "layout.json").read_text())
    digest = hashlib.sha256((out / "tiles.csv").read_bytes()).hexdigest()
    assert meta["files"]["tiles.csv"] == digest


def test_layout_json_states_the_cost_of_the_constraint(tiled_run):
    """The unconstrained comparison: same budget, same evaluations; the penalty is the
    difference of the two PSLs (exact); the plan's envelope bound is given beside."""
    spec, res, out = tiled_run
    t = json.loads((out / "layout.json").read_text())["tiles"]
    free = t["unconstrained"]
    assert free["evaluations"] == 600
    assert free["penalty_db"] == pytest.approx(res.metrics["psl_db"] - free["psl_db"], abs=1e-3)
    assert t["chips"] == 30 and t["counts"]["max"] <= 40
    assert t["full_tiles"] + t["partial_tiles"] == t["tiles"] == 4  # 16 x 16 sites
    assert np.isfinite(t["envelope_bound_db"])
    assert sum(t["counts"]["per_tile"]) == 120


def test_sweep_in_chips_and_per_tile(tmp_path):
    """Budgets in chips (k × 4 elements, whole chips in every tile) and in elements per tile
    (k in every full tile, the partial tiles at their scaled limit)."""
    spec_path = tmp_path / "panel.toml"
    spec_path.write_text(
        SPEC.replace("compare_unconstrained = true", "").replace(
            "evaluations = 600", "evaluations = 200"
        )
    )
    res = run_sweep(
        spec_path, None, None, tmp_path / "sw", budgets_chips="20,24", budgets_per_tile="12"
    )
    budgets = [r["elements"] for r in res.rows]
    assert 80 in budgets and 96 in budgets
    per_tile = [n for n in budgets if n not in (80, 96)]
    assert len(per_tile) == 1
    for r in res.rows:
        rows = _rows(res.folder / r["folder"] / "layout.csv")
        tiles = _rows(res.folder / r["folder"] / "tiles.csv")
        assert len(rows) == r["elements"]
        if r["elements"] in (80, 96):
            assert all(int(t["count"]) % 4 == 0 for t in tiles)
        else:
            assert all(int(t["count"]) == 12 for t in tiles if t["full"] == "1")


def test_bundled_tiled_example_reads_its_drawing():
    """layouts/tiled-panel.toml takes its outline from tiled-panel.dxf: the panel's area is
    the chamfered square less two bosses and a slot (shapely), and the plan respects the
    limits in whole chips."""
    spec = load_spec(ROOT / "layouts" / "tiled-panel.toml")
    ap = spec.aperture
    ref = shapely.Polygon(
        [
            (-210, -240),
            (210, -240),
            (240, -210),
            (240, 210),
            (210, 240),
            (-210, 240),
            (-240, 210),
            (-240, -210),
        ]
    )
    ref = ref.difference(shapely.Point(-120, 0).buffer(9, 256))
    ref = ref.difference(shapely.Point(120, 0).buffer(9, 256))
    slot = shapely.LineString([(-30, -190), (30, -190)]).buffer(10, 256)
    ref = ref.difference(slot)
    # the flattened arcs lie on the circles (chords inside): within 1e-4 of the true area
    assert ap.area * 1e6 == pytest.approx(ref.area, rel=1e-4)
    assert spec.elements(len(spec.sites())) == 512
    problem = spec.problem()
    grid = problem.tile_grid
    assert np.all(problem.tile_counts <= grid.limit) and np.all(problem.tile_counts % 4 == 0)
    assert problem.tile_counts.sum() == 512
    assert (
        spec.panel_drawing["sha256"]
        == hashlib.sha256((ROOT / "layouts" / "tiled-panel.dxf").read_bytes()).hexdigest()
    )
