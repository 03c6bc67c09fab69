"""Chips: every tile's elements in ⌈n/C⌉ compact chips of at most C channels."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from thinning.errors import GeometryError
from thinning.geometry.chips import group_chips

PITCH = 0.015  # [m]


def _radius(pts):
    return float(np.hypot(*(pts - pts.mean(axis=0)).T).max())


def _brute_longest(pts, c):
    """The least longest element-to-centre distance over every split into ⌈n/c⌉ chips of at
    most c elements, by enumeration (every partition of n ≤ 2c elements into two chips)."""
    n = len(pts)
    assert -(-n // c) == 2
    best = math.inf
    for size in range(n - c, c + 1):
        for rest in itertools.combinations(range(1, n), size - 1):
            a = [0, *rest]
            b = [i for i in range(n) if i not in a]
            best = min(best, max(_radius(pts[a]), _radius(pts[b])))
    return best


def _check_partition(groups, tile, c):
    """Every element in exactly one chip, no chip over c, ⌈n/c⌉ chips per tile (identities)."""
    k = groups.n_chips
    assert groups.chip.min() == 1 and groups.chip.max() == k
    sizes = np.bincount(groups.chip - 1, minlength=k)
    assert sizes.min() >= 1 and sizes.max() <= c
    n_t = np.bincount(tile, minlength=groups.per_tile.size)
    np.testing.assert_array_equal(groups.per_tile, -(-n_t // c))
    # a chip's elements share its tile; channels 1..size within each chip
    np.testing.assert_array_equal(groups.tile_of_chip[groups.chip - 1], tile)
    for j in range(k):
        ch = np.sort(groups.channel[groups.chip == j + 1])
        np.testing.assert_array_equal(ch, np.arange(1, len(ch) + 1))
    # chips numbered tile by tile in tile order
    assert np.all(np.diff(groups.tile_of_chip) >= 0)


def test_partition_identities_random_tiles():
    """Exact identities on a random panel: each element in one chip, ≤ C per chip,
    ⌈n_t/C⌉ chips per tile; centres are the means; longest is the largest radius."""
    rng = np.random.default_rng(5)
    i, j = np.meshgrid(np.arange(16), np.arange(16))
    keep = rng.random(i.size) < 0.6
    x, y = (i.ravel()[keep] * PITCH, j.ravel()[keep] * PITCH)
    tile = (j.ravel()[keep] // 8) * 2 + i.ravel()[keep] // 8
    for c in (1, 3, 4, 8):
        g = group_chips(x, y, tile, c, n_tiles=4)
        _check_partition(g, tile, c)
        xy = np.column_stack([x, y])
        for k in range(g.n_chips):
            pts = xy[g.chip == k + 1]
            np.testing.assert_allclose(g.centre[k], pts.mean(axis=0), atol=1e-15)
            assert g.radius[k] == pytest.approx(_radius(pts), abs=1e-15)
        assert g.longest == pytest.approx(g.radius.max(), abs=0)


def test_empty_tile_gets_no_chip():
    x = np.array([0.0, PITCH, 5 * PITCH])
    tile = np.array([0, 0, 2])
    g = group_chips(x, np.zeros(3), tile, 4, n_tiles=3)
    np.testing.assert_array_equal(g.per_tile, [1, 0, 1])
    np.testing.assert_array_equal(g.chip, [1, 1, 2])


def test_block_of_16_splits_into_quads():
    """A 4 × 4 block with C = 4: the four 2 × 2 quads, longest distance pitch/√2 (geometry:
    four lattice points are at best a unit square, whose corners lie pitch/√2 from its
    centre, and the four quads tile the block)."""
    i, j = np.meshgrid(np.arange(4), np.arange(4))
    x, y = i.ravel() * PITCH, j.ravel() * PITCH
    g = group_chips(x, y, np.zeros(16, int), 4)
    assert g.longest == pytest.approx(PITCH / math.sqrt(2), rel=1e-12)
    for k in range(1, 5):
        sel = g.chip == k
        assert np.ptp(i.ravel()[sel]) == 1 and np.ptp(j.ravel()[sel]) == 1
    # numbered bottom row first, left to right; channels counter-clockwise from +x
    np.testing.assert_allclose(g.centre / PITCH, [[0.5, 0.5], [2.5, 0.5], [0.5, 2.5], [2.5, 2.5]])
    first = np.flatnonzero(g.chip == 1)
    order = [(i.ravel()[e], j.ravel()[e]) for e in first[np.argsort(g.channel[first])]]
    assert order == [(1, 1), (0, 1), (0, 0), (1, 0)]


@pytest.mark.parametrize("seed", range(12))
def test_longest_distance_matches_enumeration(seed):
    """8 elements, C = 4: the longest distance equals the optimum over every partition
    (brute-force enumeration, 35 splits of 4 + 4)."""
    rng = np.random.default_rng(seed)
    if seed % 2:
        pts = rng.random((8, 2)) * 0.06
    else:  # 8 sites of a 5 × 5 lattice patch
        cells = np.array(list(itertools.product(range(5), range(5))), float) * PITCH
        pts = cells[rng.choice(25, 8, replace=False)]
    g = group_chips(pts[:, 0], pts[:, 1], np.zeros(8, int), 4)
    assert g.longest == pytest.approx(_brute_longest(pts, 4), rel=1e-12)


def test_congruent_tiles_get_the_same_chips():
    """A board and the same board turned 180° and shifted: the same chips, channel for
    channel (the grouping belongs to the board)."""
    rng = np.random.default_rng(2)
    cells = np.array(list(itertools.product(range(6), range(6))), float) * PITCH
    a = cells[rng.choice(36, 20, replace=False)]
    b = -a + [1.0, 0.3]  # turned 180°, moved
    xy = np.vstack([a, b])
    tile = np.repeat([0, 1], 20)
    g = group_chips(xy[:, 0], xy[:, 1], tile, 4)
    assert g.per_tile.tolist() == [5, 5]
    np.testing.assert_array_equal(g.channel[:20], g.channel[20:])
    np.testing.assert_allclose(np.sort(g.radius[:5]), np.sort(g.radius[5:]), rtol=1e-9)
    pairs = {(int(p), int(q)) for p, q in zip(g.chip[:20], g.chip[20:], strict=True)}
    assert len(pairs) == 5  # chip for chip


def test_deterministic():
    rng = np.random.default_rng(9)
    xy = rng.random((40, 2))
    tile = (xy[:, 0] > 0.5).astype(int)
    g1 = group_chips(xy[:, 0], xy[:, 1], tile, 4)
    g2 = group_chips(xy[:, 0], xy[:, 1], tile, 4)
    np.testing.assert_array_equal(g1.chip, g2.chip)
    np.testing.assert_array_equal(g1.channel, g2.channel)


def test_bad_input():
    with pytest.raises(GeometryError, match="channels_per_chip"):
        group_chips([0.0, 1.0], [0.0, 0.0], [0, 0], 0)
    with pytest.raises(GeometryError, match="values"):
        group_chips([0.0, 1.0], [0.0], [0, 0], 4)
