"""The classes of a tiled problem: one per tile orbit and orbit size.

Every search method keeps the count of each class of genes exactly
(:mod:`thinning.search.problem`); cutting the classes by tile as well as by orbit size fixes
every tile's count. With a symmetry the tile grid must map onto itself (tiles that are images
of one another, a *tile orbit*, carry the same count), and the orbit sizes in a tile set the
granularity of its count (a mirror pair inside one tile adds 2). :func:`composition` splits a
count over the orbit sizes, as close as possible to the same fill in each.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from ..errors import SpecError, where

__all__ = ["composition", "tile_orbits", "tile_units", "tile_class_layout"]


def tile_orbits(problem, partners) -> np.ndarray:
    """The tile orbit of every tile (T,) under the problem's symmetry ``partners`` (the image
    of each site under each operation, −1 where none); refuses a tile grid that the symmetry
    does not map onto itself."""
    grid = problem.tile_grid
    t_of = grid.tile_of_site
    orbit = np.arange(grid.n_tiles)
    for img in partners:
        ok = img >= 0
        src_t, dst_t = t_of[ok], t_of[img[ok]]
        # a well-defined tile map: every site of a tile lands in one and the same tile
        first = np.full(grid.n_tiles, -1)
        first[src_t] = dst_t
        if np.any(first[src_t] != dst_t):
            raise SpecError(
                f"{where(problem.source, 'tiles.origin_mm')}the tile grid is not symmetric "
                f"under {problem.symmetry}: place the tile origin so that tile boundaries are "
                "symmetric about the panel's centre"
            )
        for _ in range(4):
            lo = np.minimum(orbit[src_t], orbit[dst_t])
            np.minimum.at(orbit, src_t, lo)
            np.minimum.at(orbit, dst_t, lo)
            orbit = orbit[orbit]
    _, ids = np.unique(orbit, return_inverse=True)
    return ids.ravel()


def tile_units(problem, t_orbit, size_of_gene, group_of_gene) -> np.ndarray:
    """The granularity of each tile orbit's per-tile count: a whole chip's channels with
    ``whole_chips``, times what the orbit sizes allow (a mirror pair inside one tile adds 2)."""
    step = problem.tile_grid.rules.step
    n_groups = int(t_orbit.max()) + 1
    per = np.bincount(t_orbit, minlength=n_groups)
    units = np.full(n_groups, step, np.int64)
    for g in range(n_groups):
        sizes = np.unique(size_of_gene[group_of_gene == g])
        if sizes.size:
            gcd = int(np.gcd.reduce((sizes // per[g]).astype(np.int64)))
            units[g] = step * gcd // math.gcd(step, gcd)
    return units


def tile_class_layout(problem, counts, t_orbit, size_of_gene, group_of_gene):
    """(gene_class, class_sizes, class_ones) with one class per tile orbit and orbit size,
    the counts of each tile orbit split over its orbit sizes
    (:func:`composition`)."""
    grid = problem.tile_grid
    n_groups = int(t_orbit.max()) + 1
    per = np.bincount(t_orbit, minlength=n_groups)
    pinned = np.bincount(t_orbit[grid.tile_of_site[problem.pinned_sites]], minlength=n_groups)
    first_tile = np.array([np.flatnonzero(t_orbit == g)[0] for g in range(n_groups)])
    gene_class = np.zeros(size_of_gene.size, np.int64)
    sizes_out, ones_out = [], []
    for g in range(n_groups):
        genes = np.flatnonzero(group_of_gene == g)
        need = int(counts[first_tile[g]]) * int(per[g]) - int(pinned[g])
        sizes = np.unique(size_of_gene[genes])
        avail = np.array([(size_of_gene[genes] == s).sum() for s in sizes])
        t = int(first_tile[g])
        ones = (
            composition(
                need,
                sizes,
                avail,
                need,
                problem.source,
                problem.symmetry,
            )
            if sizes.size
            else np.zeros(0, np.int64)
        )
        if not sizes.size and need:
            raise SpecError(
                f"{where(problem.source, 'tiles')}tile {t + 1} has no free sites for its "
                f"{need} elements"
            )
        for s, o in zip(sizes, ones, strict=True):
            gene_class[genes[size_of_gene[genes] == s]] = len(sizes_out)
            sizes_out.append(int(s))
            ones_out.append(int(o))
    return gene_class, np.array(sizes_out, np.int64), np.array(ones_out, np.int64)


def composition(need, sizes, avail, n, src, symmetry) -> np.ndarray:
    """How many orbits of each size to switch on: Σ sizeₖ·onesₖ = need, 0 ≤ onesₖ ≤ availₖ,
    as close as possible to the same fill in every class."""
    sizes = [int(s) for s in sizes]
    avail = [int(a) for a in avail]
    total = sum(s * a for s, a in zip(sizes, avail, strict=True))
    if need > total:
        raise SpecError(
            f"{where(src, 'budget.elements')}{n}: more than the sites available "
            f"({total} free after constraints)"
        )
    if not sizes:
        return np.zeros(0, dtype=np.int64)
    f = need / total if total else 0.0
    best, best_err = None, math.inf
    # search the larger classes near their proportional share; the size-1 (or smallest) class
    # takes the remainder
    (*big,) = range(1, len(sizes))
    ranges = []
    for k in big:
        centre = f * avail[k]
        lo = max(0, int(math.floor(centre)) - 3)
        hi = min(avail[k], int(math.ceil(centre)) + 3)
        ranges.append(range(lo, hi + 1) if lo <= hi else range(0))
    for combo in itertools.product(*ranges) if ranges else [()]:
        rest = need - sum(sizes[k] * c for k, c in zip(big, combo, strict=True))
        if rest < 0 or rest % sizes[0] or rest // sizes[0] > avail[0]:
            continue
        ones = [rest // sizes[0], *combo]
        err = sum((o - f * a) ** 2 for o, a in zip(ones, avail, strict=True))
        if err < best_err:
            best, best_err = ones, err
    if best is None:
        for combo in itertools.product(*[range(avail[k] + 1) for k in big]):
            rest = need - sum(sizes[k] * c for k, c in zip(big, combo, strict=True))
            if 0 <= rest and rest % sizes[0] == 0 and rest // sizes[0] <= avail[0]:
                best = [rest // sizes[0], *combo]
                break
    if best is None:
        raise SpecError(
            f"{where(src, 'budget.elements')}{n}: cannot be met exactly with symmetry "
            f"{symmetry!r} (symmetric groups of {', '.join(map(str, sizes))} sites); "
            "choose a budget that fits or another symmetry"
        )
    return np.array(best, dtype=np.int64)
