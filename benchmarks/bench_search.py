#!/usr/bin/env python3
"""Search methods on a published case and on a planar panel; prints figures, checks nothing.

(a) The GA thinning case of Haupt, "Thinned arrays using genetic algorithms", IEEE TAP 42(7),
    1994 (references.md row 13, from memory): a 200-site half-wavelength linear array with
    154 elements on (77 %), broadside, sidelobe region outside the first null; Haupt reports
    PSL −22.09 dB for the centre-symmetric array, and Keizer's iterative FFT (row 14) about
    1 dB lower. ``genetic`` runs with and without centre symmetry (``mirror-x``), and with
    the two end elements pinned on (Haupt kept the ends on to keep the beamwidth of the filled
    aperture; common practice). The PSL is printed as the search saw it and as
    :func:`thinning.analysis.score.score_layout` measures it on the final layout.
(b) A circular aperture of about 800 half-wavelength square-lattice sites at 50 % fill,
    broadside: ``random``, ``density`` and ``genetic`` at the same number of evaluations.

Usage::

    python benchmarks/bench_search.py [--quick] [--evaluations N] [--workers N] [--seed S]
                                      [--seeds N] [--only haupt|planar] [--json FILE]

``--evaluations`` sets the budget of every run (default 60 000 for (a), 20 000 for (b));
``--quick`` divides the defaults by 10. ``--seeds N`` (default 5) adds genetic runs of case
(b) for seeds 1..N with their scored PSL and its mean (one seed is one sample of a random
search). ``--json`` merges the figures into FILE (e.g. benchmarks/results.json).
"""

from __future__ import annotations

import os

# as the thinning command does (thinning/cli/__init__.py): one BLAS thread per process
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import math
import platform
import time

import numpy as np

from thinning.analysis.score import score_layout
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.search import run_method
from thinning.search.problem import ThinningProblem
from thinning.units import wavelength as wavelength_of

FREQ = 10e9  # [Hz]
LAM = wavelength_of(FREQ)  # [m] ≈ 30 mm
PITCH_MM = LAM * 1e3 / 2  # half a wavelength  [mm]
HAUPT_PSL_DB = -22.09  # Haupt 1994, 200 elements, 77 % on, centre-symmetric (memory)


def _run(problem, method, seed, evaluations, workers, options=None):
    t = time.perf_counter()
    res = run_method(problem, method, seed, options, max_evaluations=evaluations, workers=workers)
    seconds = time.perf_counter() - t
    layout = Layout.from_sites(problem.sites, res.mask)
    score = score_layout(layout, FREQ, problem.scan_max, sites=len(problem.sites))
    return res, score, seconds


RESULTS: dict = {}


def haupt(args, evaluations):
    m, n = 200, 154
    sites = Lattice.from_mm("linear", [PITCH_MM]).linear_sites(m)
    ends = np.zeros(m, dtype=bool)
    ends[[0, -1]] = True
    cases = [("none", None), ("mirror-x", None), ("mirror-x", ends), ("none", ends)]
    print(
        f"(a) Haupt 1994: {m} sites, {n} on ({n / m:.0%}), λ/2, broadside; "
        f"target PSL ≤ {HAUPT_PSL_DB} dB; {evaluations} evaluations, seed {args.seed}"
    )
    print(
        f"{'symmetry':<10} {'ends':<7} {'PSL search':>11} {'PSL score':>10} {'ASL':>8} "
        f"{'evals':>7} {'s':>6}  stop"
    )
    for symmetry, pinned in cases:
        problem = ThinningProblem(sites, n, LAM, 0.0, symmetry=symmetry, pinned=pinned)
        res, score, seconds = _run(problem, "genetic", args.seed, evaluations, args.workers)
        print(
            f"{symmetry:<10} {'pinned' if pinned is not None else 'free':<7} "
            f"{res.psl_db:11.2f} {score.psl_db:10.2f} {score.asl_db:8.2f} "
            f"{res.evaluations:7d} {seconds:6.1f}  {res.stopped_by}"
        )
        reached = [h for h in res.history if h["best_psl_db"] <= HAUPT_PSL_DB]
        RESULTS.setdefault("haupt", []).append(
            {
                "symmetry": symmetry,
                "ends_pinned": pinned is not None,
                "psl_search_db": res.psl_db,
                "psl_score_db": score.psl_db,
                "evaluations": res.evaluations,
                "seconds": round(seconds, 2),
                "stopped_by": res.stopped_by,
                "evaluations_to_target": reached[0]["evaluations"] if reached else None,
            }
        )
        if reached:
            print(
                f"{'':<18} reached {HAUPT_PSL_DB} dB after {reached[0]['evaluations']} "
                f"evaluations, {reached[0]['seconds']:.1f} s"
            )


def planar(args, evaluations):
    radius_mm = 16.2 * PITCH_MM  # ≈ 830 sites
    theta = np.linspace(0.0, 2 * math.pi, 256, endpoint=False)
    outline = np.column_stack([radius_mm * np.cos(theta), radius_mm * np.sin(theta)])
    sites = Lattice.from_mm("rectangular", [PITCH_MM, PITCH_MM]).sites_in(
        Aperture.from_mm(outline.tolist())
    )
    n = len(sites) // 2
    problem = ThinningProblem(sites, n, LAM, 0.0)
    print(
        f"\n(b) circular aperture, {len(sites)} sites on a λ/2 square lattice, {n} on "
        f"(50 %), broadside; {evaluations} evaluations each, seed {args.seed}"
    )
    print(
        f"{'method':<9} {'PSL search':>11} {'PSL score':>10} {'ASL':>8} {'evals':>7} {'s':>6}  stop"
    )
    for method in ("random", "density", "genetic"):
        res, score, seconds = _run(problem, method, args.seed, evaluations, args.workers)
        RESULTS.setdefault("planar", []).append(
            {
                "method": method,
                "sites": len(sites),
                "elements": n,
                "psl_search_db": res.psl_db,
                "psl_score_db": score.psl_db,
                "evaluations": res.evaluations,
                "seconds": round(seconds, 2),
            }
        )
        print(
            f"{method:<9} {res.psl_db:11.2f} {score.psl_db:10.2f} {score.asl_db:8.2f} "
            f"{res.evaluations:7d} {seconds:6.1f}  {res.stopped_by}"
        )
    if args.seeds > 1:  # the spread of the genetic search over seeds 1..N
        scored = []
        for seed in range(1, args.seeds + 1):
            _, score, _ = _run(problem, "genetic", seed, evaluations, args.workers)
            scored.append(score.psl_db)
        RESULTS["planar_genetic_seeds"] = {"seeds": args.seeds, "psl_score_db": scored}
        print(
            f"genetic, seeds 1-{args.seeds}: scored PSL "
            + ", ".join(f"{x:.2f}" for x in scored)
            + f" dB; mean {np.mean(scored):.2f} dB"
        )


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a tenth of the default budgets")
    ap.add_argument("--evaluations", type=int, help="evaluations per run (both cases)")
    ap.add_argument("--workers", type=int, default=1, help="evaluation processes")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument(
        "--seeds", type=int, default=5, help="case (b): also run genetic for seeds 1..N"
    )
    ap.add_argument("--only", choices=("haupt", "planar"), help="run one case only")
    ap.add_argument("--json", default=None, help="merge the figures into this JSON file")
    args = ap.parse_args()
    scale = 10 if args.quick else 1
    print(
        f"# {platform.processor() or platform.machine()}, Python {platform.python_version()}"
        f", workers {args.workers}"
    )
    if args.only in (None, "haupt"):
        haupt(args, args.evaluations or 60_000 // scale)
    if args.only in (None, "planar"):
        planar(args, args.evaluations or 20_000 // scale)
    if args.json:
        import json
        from pathlib import Path

        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        entry = data.setdefault("bench_search", {})  # --only keeps the other case's figures
        entry.update(
            {
                "machine": f"{platform.machine()}, Python {platform.python_version()}",
                "date": time.strftime("%Y-%m-%d"),
                "seed": args.seed,
                "workers": args.workers,
                **RESULTS,
            }
        )
        path.write_text(json.dumps(data, indent=2) + "\n")


if __name__ == "__main__":
    main()
