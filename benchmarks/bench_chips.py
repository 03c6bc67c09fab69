#!/usr/bin/env python3
"""Chip grouping (``thinning.geometry.chips.group_chips``): time and compactness, printed.

1. The panel of the tiles benchmark: 32 × 32 half-wavelength sites (15 mm) in 8 × 8 tiles,
   512 elements drawn at random (seed 1), 4 and 8 channels per chip: time, chips, the longest
   element-to-chip-centre distance (in pitches; a 2 × 2 quad's is 1/√2 = 0.707), and the
   same with every tile the same board (congruent tiles grouped once).
2. Quality against enumeration: 12 elements in 3 chips of 4 (random points and random
   subsets of a 5 × 5 lattice patch, 20 cases): how often the grouping's longest distance is
   above the optimum found by enumerating every partition, and by how much at worst.

Usage: ``python benchmarks/bench_chips.py [--json FILE]``.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import itertools
import json
import platform
import time

import numpy as np

from thinning.geometry.chips import group_chips

PITCH = 0.015  # [m]


def _panel(same_board: bool):
    rng = np.random.default_rng(1)
    i, j = (a.ravel() for a in np.meshgrid(np.arange(32), np.arange(32)))
    tile = (j // 8) * 4 + i // 8
    if same_board:
        local = rng.choice(64, 32, replace=False)
        mask = np.isin((j % 8) * 8 + i % 8, local)
    else:
        mask = np.zeros(i.size, bool)
        mask[rng.choice(i.size, 512, replace=False)] = True
    return i[mask] * PITCH, j[mask] * PITCH, tile[mask]


def _radius(pts):
    return float(np.hypot(*(pts - pts.mean(axis=0)).T).max())


def _partitions(items, sizes):
    if not items:
        yield []
        return
    first, rest = items[0], items[1:]
    for sz in sorted(set(sizes), reverse=True):
        rem = list(sizes)
        rem.remove(sz)
        for comb in itertools.combinations(rest, sz - 1):
            left = [x for x in rest if x not in comb]
            for p in _partitions(left, rem):
                yield [[first, *comb], *p]


def _optimum(pts, c):
    n, k = len(pts), -(-len(pts) // c)
    best = np.inf
    sizes = {
        tuple(sorted(v, reverse=True))
        for v in itertools.combinations_with_replacement(range(1, c + 1), k)
        if sum(v) == n
    }
    for sv in sizes:
        for part in _partitions(list(range(n)), list(sv)):
            best = min(best, max(_radius(pts[g]) for g in part))
    return best


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--json")
    args = ap.parse_args()
    rows = []
    group_chips([0.0, 1.0], [0.0, 0.0], [0, 0], 4)  # imports
    for same in (False, True):
        x, y, tile = _panel(same)
        for c in (4, 8):
            t0 = time.perf_counter()
            g = group_chips(x, y, tile, c, n_tiles=16)
            dt = time.perf_counter() - t0
            row = {
                "panel": "one board" if same else "random",
                "channels": c,
                "elements": len(x),
                "chips": g.n_chips,
                "longest_pitches": round(g.longest / PITCH, 3),
                "mean_radius_pitches": round(float(g.radius.mean()) / PITCH, 3),
                "time_s": round(dt, 3),
            }
            rows.append(row)
            print(
                f"{row['panel']:9s}  C={c}  {len(x)} elements  {g.n_chips} chips  longest "
                f"{row['longest_pitches']:.3f} pitch  mean radius "
                f"{row['mean_radius_pitches']:.3f}  {dt:.2f} s"
            )
    above, worst, cases = 0, 1.0, 20
    cells = np.array(list(itertools.product(range(5), range(5))), float) * PITCH
    for seed in range(cases):
        rng = np.random.default_rng(seed)
        pts = cells[rng.choice(25, 12, replace=False)] if seed % 2 else rng.random((12, 2))
        g = group_chips(pts[:, 0], pts[:, 1], np.zeros(12, int), 4)
        opt = _optimum(pts, 4)
        if g.longest > opt * (1 + 1e-9):
            above += 1
            worst = max(worst, g.longest / opt)
    print(
        f"12 elements, 3 chips of 4, {cases} cases: above the enumerated optimum in {above}, "
        f"worst ratio {worst:.3f}"
    )
    if args.json:
        out = {
            "machine": platform.platform(),
            "date": time.strftime("%Y-%m-%d"),
            "panels": rows,
            "quality": {"cases": cases, "above_optimum": above, "worst_ratio": worst},
        }
        with open(args.json, "w") as f:
            json.dump(out, f, indent=2)


if __name__ == "__main__":
    main()
