#!/usr/bin/env python3
"""Speed and memory at scale, each figure measured in this one run and printed.

1. Swap moves: K single-swap moves of a 64 × 64 half-filled lattice scored by updating the
   stored transform (``ThinningProblem.evaluate_swaps``) against full evaluations of the
   same layouts, one by one and as one batch; and the largest PSL difference.
2. Workers: one generation of 64 and of 128 genomes (64 × 64 lattice) evaluated with
   ``--workers 1`` and ``--workers 2``: the speed-up.
3. Scale: ``thinning score`` of a 65,536-site (256 × 256) layout against a bare script that
   only reads the CSV, takes the 4× padded FFT and a masked maximum (benchmarks/bare_score.py);
   ``thinning design`` on a 16,384-site aperture with a 60 s time limit. Wall time and peak
   RSS of each process.

Usage: ``python benchmarks/bench_scale.py [--quick] [--json FILE]``. ``--quick`` shortens the
design run to 10 s. Results are also merged into benchmarks/results.json with ``--json``.
"""

from __future__ import annotations

import os

# as the thinning command does (thinning/cli/__init__.py): one BLAS thread per process
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse
import json
import math
import os
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def timed(fn, repeat=5):
    fn()
    out = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return statistics.median(out)


def bench_swaps():
    from thinning.aperture import Aperture
    from thinning.lattice import Lattice
    from thinning.problem import ThinningProblem

    ap = Aperture.from_mm([[0, 0], [945, 0], [945, 945], [0, 945]], [], 0)
    sites = Lattice.from_mm("rectangular", [15, 15]).sites_in(ap)  # 64 × 64 at λ/2, 10 GHz
    p = ThinningProblem(sites, len(sites) // 2, 0.03, math.radians(20))
    rng = np.random.default_rng(0)
    g = p.random_genomes(rng, 1)[0]
    k = 64
    off = rng.choice(np.flatnonzero(g), k)
    on = rng.choice(np.flatnonzero(~g), k)
    trial = np.repeat(g[None], k, 0)
    trial[np.arange(k), off] = False
    trial[np.arange(k), on] = True
    t_swap = timed(lambda: p.evaluate_swaps(g, off, on)) / k
    t_batch = timed(lambda: p.evaluate(trial)) / k
    t_single = timed(lambda: p.evaluate(trial[:1]), 20)
    d = np.abs(p.evaluate_swaps(g, off, on).psl_db - p.evaluate(trial).psl_db).max()
    return {
        "lattice": "64x64",
        "moves": k,
        "swap_ms_per_move": t_swap * 1e3,
        "full_single_ms": t_single * 1e3,
        "full_batched_ms_per_layout": t_batch * 1e3,
        "speedup_vs_single_full": t_single / t_swap,
        "speedup_vs_batched_full": t_batch / t_swap,
        "max_psl_difference_db": float(d),
    }


def bench_workers():
    from thinning.aperture import Aperture
    from thinning.lattice import Lattice
    from thinning.problem import ThinningProblem
    from thinning.search import Tracker

    ap = Aperture.from_mm([[0, 0], [945, 0], [945, 945], [0, 945]], [], 0)
    sites = Lattice.from_mm("rectangular", [15, 15]).sites_in(ap)
    p = ThinningProblem(sites, len(sites) // 2, 0.03, math.radians(20))
    rng = np.random.default_rng(1)
    out = []
    for pop in (64, 128):
        g = p.random_genomes(rng, pop)
        times = {}
        results = {}
        for w in (1, 2):
            with Tracker(p, workers=w) as tr:
                tr.evaluate(g[:32])  # start the pool and warm the FFT plans
                times[w] = timed(lambda tr=tr, g=g: tr.evaluate(g), 9)
                results[w] = tr.evaluate(g).objective
        out.append(
            {
                "population": pop,
                "seconds_1_worker": times[1],
                "seconds_2_workers": times[2],
                "speedup": times[1] / times[2],
                "identical": bool(np.array_equal(results[1], results[2])),
            }
        )
    return out


def run_measured(cmd):
    """Run a command; wall time and the child's peak RSS (MiB, from getrusage)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    if r.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {r.stderr.strip()[-300:]}")
    # ru_maxrss is the largest child so far (KiB on Linux): run the big ones first
    return wall, max(peak, before) / 1024, r.stdout


def bench_scale(quick):
    thinning = str(Path(sys.executable).with_name("thinning"))
    tmp = Path(tempfile.mkdtemp(prefix="bench-scale-"))
    csv_path = tmp / "big.csv"
    with open(csv_path, "w") as f:
        f.write("x_mm,y_mm\n")
        for j in range(256):
            f.write("".join(f"{i * 15:.6f},{j * 15:.6f}\n" for i in range(256)))
    res = {}
    # each measurement in a fresh process; the bare script first (smallest peak)
    wall_b, rss_b, out_b = run_measured(
        [sys.executable, str(HERE / "bare_score.py"), str(csv_path), "10", "30"]
    )
    wall_s, rss_s, _ = run_measured(
        [thinning, "score", str(csv_path), "--freq-ghz", "10", "--scan-max-deg", "30", "--json"]
    )
    res["score_65536"] = {
        "seconds": wall_s,
        "peak_rss_mib": rss_s,
        "bare_seconds": wall_b,
        "ratio_to_bare": wall_s / wall_b,
        "bare_psl_db": float(out_b),
    }
    side = 128 * 15
    spec = tmp / "big.toml"
    limit = 10 if quick else 60
    spec.write_text(
        '[array]\nfrequency_ghz = 10.0\nlattice = "rectangular"\nspacing_mm = [15.0, 15.0]\n'
        f"[aperture]\noutline_mm = [[0, 0], [{side - 1}, 0], [{side - 1}, {side - 1}], "
        f"[0, {side - 1}]]\n[budget]\nfill = 0.5\n[scan]\nmax_deg = 20.0\n"
        f'[search]\nmethod = "genetic"\nseed = 1\nevaluations = 100000000\n'
        f"time_limit_s = {limit}\n"
    )
    wall_d, rss_d, _ = run_measured(
        [thinning, "design", str(spec), "--out", str(tmp / "d"), "--quiet"]
    )
    meta = json.loads((tmp / "d" / "layout.json").read_text())
    res["design_16384"] = {
        "time_limit_s": limit,
        "seconds": wall_d,
        "peak_rss_mib": rss_d,
        "evaluations": meta["evaluations"],
        "psl_db": meta["psl_db"],
        "sites": meta["candidate_sites"],
    }
    return res


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--json", default=None, help="merge the figures into this JSON file")
    args = ap.parse_args()
    machine = (
        f"{platform.machine()}, {os.cpu_count()} CPUs, Python "
        f"{platform.python_version()}, numpy {np.__version__}"
    )
    print(f"machine: {machine}")
    s = bench_swaps()
    print(
        f"swap move (64 x 64, 4x): {s['swap_ms_per_move']:.3f} ms per move; full evaluation "
        f"{s['full_single_ms']:.3f} ms alone, {s['full_batched_ms_per_layout']:.3f} ms per "
        f"layout in a batch of 64 -> {s['speedup_vs_single_full']:.1f}x / "
        f"{s['speedup_vs_batched_full']:.1f}x faster; max PSL difference "
        f"{s['max_psl_difference_db']:.4f} dB"
    )
    w = bench_workers()
    for r in w:
        print(
            f"generation of {r['population']}: 1 worker {r['seconds_1_worker']:.3f} s, "
            f"2 workers {r['seconds_2_workers']:.3f} s -> {r['speedup']:.2f}x "
            f"(identical results: {r['identical']})"
        )
    sc = bench_scale(args.quick)
    a, d = sc["score_65536"], sc["design_16384"]
    print(
        f"thinning score, 65,536 sites: {a['seconds']:.2f} s, peak RSS {a['peak_rss_mib']:.0f} "
        f"MiB; bare read+FFT+max {a['bare_seconds']:.2f} s -> ratio {a['ratio_to_bare']:.2f}"
    )
    print(
        f"thinning design, {d['sites']:,} sites, {d['time_limit_s']} s limit: "
        f"{d['seconds']:.1f} s, peak RSS {d['peak_rss_mib']:.0f} MiB, "
        f"{d['evaluations']:,} evaluations, PSL {d['psl_db']:.2f} dB"
    )
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        data["bench_scale"] = {
            "machine": machine,
            "date": time.strftime("%Y-%m-%d"),
            "swap": s,
            "workers": w,
            "scale": sc,
        }
        path.write_text(json.dumps(data, indent=2) + "\n")


if __name__ == "__main__":
    main()
