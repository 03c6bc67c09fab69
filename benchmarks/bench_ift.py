#!/usr/bin/env python3
"""Iterative Fourier thinning against the genetic search, measured in one run and printed.

1. The planar case of bench_search.py: a circular aperture of about 800 half-wavelength
   sites at 50 % fill, broadside; ``ift``, ``genetic`` and ``genetic`` seeded with a quarter
   of IFT layouts, with the same time each (an IFT trial runs up to 30 FFT iterations for
   one evaluated layout, so equal evaluations would not be equal work).
2. A 16,384-site (128 × 128) square aperture at 50 %, scan 20°: each method with the same
   time limit (large apertures are where a genetic search stalls).

Figures are scored by ``thinning.analysis.score.score_layout`` (refined on the exact pattern).
Usage: ``python benchmarks/bench_ift.py [--quick] [--json FILE]``.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import json
import math
import platform
import time
from pathlib import Path

import numpy as np

from thinning.analysis.score import score_layout
from thinning.geometry.aperture import Aperture
from thinning.geometry.lattice import Lattice
from thinning.geometry.layout import Layout
from thinning.search import run_method
from thinning.search.problem import ThinningProblem

LAM = 0.03
FREQ = 299792458.0 / LAM


def circle_problem():
    r = 16.25 * LAM / 2  # about 830 sites at λ/2
    pts = [
        [1e3 * r * math.cos(t), 1e3 * r * math.sin(t)]
        for t in np.linspace(0, 2 * math.pi, 256, endpoint=False)
    ]
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(Aperture.from_mm(pts))
    return ThinningProblem(sites, len(sites) // 2, LAM, 0.0), sites


def square_problem():
    side = 128 * 15 - 1
    ap = Aperture.from_mm([[0, 0], [side, 0], [side, side], [0, side]])
    sites = Lattice.from_mm("rectangular", [15.0, 15.0]).sites_in(ap)
    return ThinningProblem(sites, len(sites) // 2, LAM, math.radians(20)), sites


def run(problem, sites, method, options, evaluations=None, time_limit=None, scan=0.0):
    t = time.perf_counter()
    r = run_method(
        problem, method, 1, options, max_evaluations=evaluations, time_limit_s=time_limit
    )
    wall = time.perf_counter() - t
    sc = score_layout(Layout.from_sites(sites, r.mask), FREQ, scan)
    return {
        "method": method + ("+ift seeds" if options.get("seed_ift_fraction") else ""),
        "psl_db": sc.psl_db,
        "asl_db": sc.asl_db,
        "evaluations": r.evaluations,
        "seconds": round(wall, 2),
        "stopped_by": r.stopped_by,
    }


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--json", default=None)
    args = ap.parse_args()
    machine = f"{platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}"
    print(f"machine: {machine}", flush=True)
    out = {}
    p, s = circle_problem()
    t_planar = 8 if args.quick else 30
    rows = [
        run(p, s, "ift", {}, None, t_planar),
        run(p, s, "genetic", {}, None, t_planar),
        run(p, s, "genetic", {"seed_ift_fraction": 0.25}, None, t_planar),
    ]
    print(f"\ncircular aperture, {len(s)} sites, {p.elements} on, {t_planar} s each")
    for r in rows:
        print(
            f"  {r['method']:<20} PSL {r['psl_db']:7.2f} dB  ASL {r['asl_db']:7.2f} dB  "
            f"{r['evaluations']:>7,} evaluations  {r['seconds']:6.1f} s"
        )
    out["planar_800"] = rows
    p, s = square_problem()
    limit = 15 if args.quick else 60
    rows = [
        run(p, s, "ift", {}, None, limit, math.radians(20)),
        run(p, s, "genetic", {}, None, limit, math.radians(20)),
    ]
    print(f"\nsquare aperture, {len(s):,} sites, {p.elements:,} on, scan 20 deg, {limit} s each")
    for r in rows:
        print(
            f"  {r['method']:<20} PSL {r['psl_db']:7.2f} dB  ASL {r['asl_db']:7.2f} dB  "
            f"{r['evaluations']:>7,} evaluations  {r['seconds']:6.1f} s"
        )
    out["square_16384"] = rows
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        data["bench_ift"] = {"machine": machine, "date": time.strftime("%Y-%m-%d"), **out}
        path.write_text(json.dumps(data, indent=2) + "\n")


if __name__ == "__main__":
    main()
