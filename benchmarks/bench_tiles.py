#!/usr/bin/env python3
"""What tiles and chips cost: the same panel thinned free and under each tile rule.

The panel: 32 × 32 sites at half a wavelength (15 mm at 10 GHz), 8 × 8-site tiles (16 full
tiles), 512 elements (50 %), a 15° scan cone, the sidelobe region outside the first null. Every
case runs its spec's method (``genetic``, the default at 1,024 sites; ``modular`` for the
pattern cases) for the same time limit, seed 1 unless ``--seeds`` says more; PSL and ASL are
the full scoring's (:func:`thinning.analysis.score.score_layout`), not the search's own.

Cases (the rows): unconstrained; capacity 48 per tile; whole chips of 4 (capacity 48);
exactly 32 per tile; 4, 2 and 1 boards with all orientations (counts free within 48); 1 board
with no orientation (the repeated tile and its lobe at u = λ/(tile width) = 0.25); and the
best of random draws (unconstrained) at the evaluations of the 1-board run. For each: PSL, the
penalty against unconstrained, ASL, the count range over the tiles, the distinct full-tile
boards, the evaluations, and the issue's aim with met/not met.

``--large`` runs instead one large tiled panel: 256 × 256 sites (65,536) at the same pitch,
8 × 8-site tiles (1,024), at most 48 per tile, 32,768 elements, the ``density`` method (the
default from 4,096 sites): the time to read the spec and build the problem (the count plan's
programme), the run, the scored PSL and ASL, the plan's bound and the peak memory.

Usage::

    python benchmarks/bench_tiles.py [--time S] [--seeds N] [--cases LIST] [--json FILE]
                                     [--raw FILE] [--merge FILE,FILE] [--large]

``--time`` (default 60) is each case's limit. ``--raw`` writes this run's rows for a later
``--merge`` (two processes, one per core, each with a part of ``--cases``).
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import json
import platform
import statistics
import time
from pathlib import Path

import numpy as np

from thinning.analysis.design import score_spec_layout
from thinning.analysis.tile_figures import tile_period_lobe
from thinning.search import run_method
from thinning.spec import parse_spec

BASE = {
    "name": "tile benchmark panel",
    "array": {
        "frequency_ghz": 10.0,
        "lattice": "rectangular",
        "spacing_mm": 15.0,
        "origin_mm": [7.5, 7.5],
    },
    "aperture": {"outline_mm": [[-240, -240], [240, -240], [240, 240], [-240, 240]]},
    "budget": {"elements": 512},
    "scan": {"max_deg": 15},
}
T8 = {"size": [8, 8]}
CASES = {
    "unconstrained": None,
    "capacity-48": {**T8, "max_elements_per_tile": 48},
    "chips-4": {**T8, "max_elements_per_tile": 48, "channels_per_chip": 4, "whole_chips": True},
    "exact-32": {**T8, "elements_per_tile": 32},
    "boards-4": {**T8, "max_elements_per_tile": 48, "patterns": 4, "orientations": "all"},
    "boards-2": {**T8, "max_elements_per_tile": 48, "patterns": 2, "orientations": "all"},
    "boards-1": {**T8, "max_elements_per_tile": 48, "patterns": 1, "orientations": "all"},
    "boards-1-fixed": {**T8, "max_elements_per_tile": 48, "patterns": 1, "orientations": "none"},
}
#: The issue's aims: (kind, value): "penalty" ≤ value dB against unconstrained, "psl" ≤ value
#: dB, "random": below the best of random at equal evaluations.
AIMS = {
    "capacity-48": ("penalty", 0.5),
    "chips-4": ("penalty", 0.5),
    "exact-32": ("psl", -17.5),
    "boards-2": ("penalty", 3.0),
    "boards-1": ("random", None),
}


def spec_of(case: str, seed: int, limit: float):
    raw = json.loads(json.dumps(BASE))
    raw["search"] = {"seed": seed, "time_limit_s": limit}
    if CASES[case] is not None:
        raw["tiles"] = dict(CASES[case])
    return parse_spec(raw, f"bench-{case}.toml")


def run_case(case: str, seed: int, limit: float, evaluations=None) -> dict:
    if case == "random":
        spec = spec_of("unconstrained", seed, limit)
        problem = spec.problem()
        t = time.perf_counter()
        res = run_method(
            problem,
            "random",
            seed,
            {"draws": 10**9},
            max_evaluations=evaluations,
            time_limit_s=None,
        )
    else:
        spec = spec_of(case, seed, limit)
        t = time.perf_counter()
        problem = spec.problem()
        res = run_method(problem, spec.method, seed, spec.options, time_limit_s=limit)
    runtime = time.perf_counter() - t
    _, m = score_spec_layout(spec, problem.sites, res.mask)
    row = {
        "case": case,
        "seed": seed,
        "method": "random" if case == "random" else spec.method,
        "psl_db": round(m["psl_db"], 3),
        "asl_db": round(m["asl_db"], 3),
        "evaluations": int(res.evaluations),
        "runtime_s": round(runtime, 1),
    }
    grid = problem.tile_grid
    if grid is None:  # the counts a free layout puts on the 8 × 8 tiles, for comparison
        from thinning.geometry.tiles import TileGrid, TileRules

        grid = TileGrid(problem.sites, TileRules((8, 8)))
    table = grid.describe(res.mask)
    row["count_min"], row["count_max"] = int(table.count.min()), int(table.count.max())
    row["boards"] = int(table.full_boards)
    if case == "boards-1-fixed":
        lobe = tile_period_lobe(
            problem.sites.x[res.mask], problem.sites.y[res.mask], grid.period(), spec.wavelength
        )
        row["tile_lobe_db"] = lobe["level_db"]
        row["tile_lobe_uv"] = [lobe["u"], lobe["v"]]
    return row


def machine() -> str:
    return (
        f"{platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}, "
        f"numpy {np.__version__}"
    )


def run_large(limit: float) -> dict:
    """The 65,536-site tiled panel (``--large``), one run of the default method."""
    import resource

    raw = json.loads(json.dumps(BASE))
    raw["name"] = "large tiled panel"
    raw["aperture"] = {"outline_mm": [[-1920, -1920], [1920, -1920], [1920, 1920], [-1920, 1920]]}
    raw["budget"] = {"elements": 32768}
    raw["tiles"] = {"size": [8, 8], "max_elements_per_tile": 48}
    raw["search"] = {"seed": 1, "time_limit_s": limit}
    t0 = time.perf_counter()
    spec = parse_spec(raw, "bench-large.toml")
    problem = spec.problem()
    t1 = time.perf_counter()
    res = run_method(problem, spec.method, 1, spec.options, time_limit_s=limit)
    t2 = time.perf_counter()
    _, m = score_spec_layout(spec, problem.sites, res.mask)
    counts = problem.tile_grid.counts(res.mask)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # kB on Linux
    row = {
        "sites": int(problem.sites.x.size),
        "tiles": int(problem.tile_grid.n_tiles),
        "method": spec.method,
        "problem_s": round(t1 - t0, 1),
        "run_s": round(t2 - t1, 1),
        "psl_db": round(m["psl_db"], 3),
        "asl_db": round(m["asl_db"], 3),
        "envelope_bound_db": round(float(problem.tile_plan_bound_db), 3),
        "evaluations": int(res.evaluations),
        "count_min": int(counts.min()),
        "count_max": int(counts.max()),
        "peak_rss_mb": round(peak),
    }
    print(
        f"large tiled panel: {row['sites']:,} sites, {row['tiles']:,} tiles of 8 x 8, at most "
        f"48 per tile, 32,768 elements, {spec.method}, {limit:g} s\n"
        f"  spec and problem (count plan) {row['problem_s']} s, run {row['run_s']} s, "
        f"{row['evaluations']:,} evaluations\n"
        f"  PSL {row['psl_db']:.2f} dB (plan bound {row['envelope_bound_db']:.2f} dB), "
        f"ASL {row['asl_db']:.2f} dB, counts {row['count_min']}-{row['count_max']}, "
        f"peak memory {row['peak_rss_mb']:,} MB"
    )
    return row


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--time", type=float, default=60.0)
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--cases", default=",".join([*CASES, "random"]))
    ap.add_argument("--json", default=None)
    ap.add_argument("--raw", default=None)
    ap.add_argument("--merge", default=None)
    ap.add_argument("--large", action="store_true")
    args = ap.parse_args()
    if args.large:
        row = run_large(args.time)
        if args.json:
            p = Path(args.json)
            data = json.loads(p.read_text()) if p.exists() else {}
            data["tiles_large"] = {
                "machine": machine(),
                "date": time.strftime("%Y-%m-%d"),
                "time_limit_s": args.time,
                **row,
            }
            p.write_text(json.dumps(data, indent=1) + "\n")
        return
    rows = []
    if args.merge:
        for f in args.merge.split(","):
            rows += json.loads(Path(f).read_text())["rows"]
    else:
        cases = [c for c in args.cases.split(",") if c]
        # compile the kernels before the first timed run
        run_case("unconstrained", 99, 2.0)
        for seed in range(1, args.seeds + 1):
            for case in cases:
                if case == "random":
                    continue
                rows.append(run_case(case, seed, args.time))
                print(json.dumps(rows[-1]), flush=True)
            if "random" in cases:
                ref = [r for r in rows if r["case"] == "boards-1" and r["seed"] == seed]
                evals = ref[0]["evaluations"] if ref else 5000
                rows.append(run_case("random", seed, args.time, evaluations=evals))
                print(json.dumps(rows[-1]), flush=True)
    if args.raw:
        Path(args.raw).write_text(json.dumps({"rows": rows}, indent=1))
    summary = report(rows, args.time)
    if args.json:
        p = Path(args.json)
        data = json.loads(p.read_text()) if p.exists() else {}
        data["tiles"] = {"machine": machine(), "date": time.strftime("%Y-%m-%d"), **summary}
        p.write_text(json.dumps(data, indent=1) + "\n")


def plan_bound(case: str):
    """The envelope bound of the case's plan  [dB]: the density envelope's (the LP of the
    density method) for the unconstrained panel, the envelope under the tile limits that the
    tile counts were planned from for the tiled ones; None where the counts are given
    (exactly 32 per tile)."""
    from thinning.search import modular
    from thinning.search.density import optimised_envelope

    spec = spec_of(case, 1, 1.0)
    problem = spec.problem()
    if problem.tile_grid is None:
        return float(optimised_envelope(problem).bound_db)
    if spec.method == "modular":
        targets, _ = modular._plan_tile_counts(problem)
        modular.plan_boards(problem, targets, int(spec.tiles.patterns))
    return problem.tile_plan_bound_db


def report(rows, limit) -> dict:
    def med(case, key):
        vals = [r[key] for r in rows if r["case"] == case]
        return statistics.median(vals) if vals else None

    free = med("unconstrained", "psl_db")
    rand = med("random", "psl_db")
    print(
        f"\ntile benchmark: 32 x 32 sites, 8 x 8 tiles, 512 elements, 15 deg cone, "
        f"{limit:g} s per case (median over seeds), {platform.processor() or platform.machine()}"
    )
    print(
        f"{'case':<16}{'method':<9}{'PSL dB':>8}{'bound':>8}{'penalty':>9}{'ASL dB':>8}"
        f"{'counts':>9}{'boards':>7}{'evals':>8}  aim"
    )
    out = {"time_limit_s": limit, "cases": {}}
    for case in [*CASES, "random"]:
        psl = med(case, "psl_db")
        if psl is None:
            continue
        pen = None if free is None else psl - free
        aim = AIMS.get(case)
        verdict = ""
        if aim is not None:
            kind, v = aim
            if kind == "penalty" and pen is not None:
                verdict = f"penalty <= {v} dB: {'met' if pen <= v else 'NOT met'}"
            elif kind == "psl":
                verdict = f"PSL <= {v} dB: {'met' if psl <= v else 'NOT met'}"
            elif kind == "random" and rand is not None:
                verdict = (
                    f"below random at equal evaluations ({rand:.2f} dB): "
                    f"{'met' if psl < rand else 'NOT met'}"
                )
        r0 = [r for r in rows if r["case"] == case][0]
        counts = f"{r0['count_min']}-{r0['count_max']}"
        bound = plan_bound(case) if case != "random" else None
        print(
            f"{case:<16}{r0['method']:<9}{psl:>8.2f}"
            f"{'—' if bound is None else f'{bound:.2f}':>8}"
            f"{'' if pen is None else f'{pen:+.2f}':>9}{med(case, 'asl_db'):>8.2f}"
            f"{counts:>9}{r0['boards']:>7}{int(med(case, 'evaluations')):>8}  {verdict}"
        )
        if "tile_lobe_db" in r0:
            print(
                f"{'':<16}lobe of the repeated tile: {r0['tile_lobe_db']:.2f} dB at (u, v) = "
                f"({r0['tile_lobe_uv'][0]:.3f}, {r0['tile_lobe_uv'][1]:.3f}); the tile period "
                "predicts u or v = 0.25"
            )
        out["cases"][case] = {
            "psl_db": psl,
            "envelope_bound_db": None if bound is None else round(bound, 3),
            "penalty_db": None if pen is None else round(pen, 3),
            "asl_db": med(case, "asl_db"),
            "counts": counts,
            "boards": r0["boards"],
            "evaluations": int(med(case, "evaluations")),
            "aim": verdict,
        }
    print(
        "bound: the peak of the expected pattern of draws from the density envelope the "
        "counts were planned from (under the tile limits; for boards, each tile filled "
        "uniformly to its board's count); a layout can beat it.\n"
        "The issue quotes, for this panel, an unconstrained 60 s design at -24.3 dB and an "
        "annealing search at -16.9 dB for exactly 32 per tile (not measured here)."
    )
    out["seeds"] = sorted({r["seed"] for r in rows})
    out["rows"] = rows
    return out


if __name__ == "__main__":
    np.seterr(all="ignore")
    main()
