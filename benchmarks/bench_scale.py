#!/usr/bin/env python3
"""Speed and memory at scale, each figure measured in this one run and printed.

1. Swap moves: K single-swap moves of a 64 × 64 half-filled lattice scored from the stored
   transform (``ThinningProblem.evaluate_swaps``) against full evaluations of the same
   layouts, one by one and as one batch: with the base's transform kept, after an accepted
   move, on a new base, over a local search; and the largest PSL difference. Then the time
   per swap move and per full evaluation as a 20 s genetic run spends them, and swap moves
   of that run's optimised layout (kept, and as a new base).
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
    from thinning.geometry.aperture import Aperture
    from thinning.geometry.lattice import Lattice
    from thinning.search.problem import ThinningProblem

    ap = Aperture.from_mm([[0, 0], [945, 0], [945, 945], [0, 945]], [], 0)
    sites = Lattice.from_mm("rectangular", [15, 15]).sites_in(ap)  # 64 × 64 at λ/2, 10 GHz
    p = ThinningProblem(sites, len(sites) // 2, 0.03, math.radians(20))
    rng = np.random.default_rng(0)
    g = p.random_genomes(rng, 1)[0]
    k = 64

    def moves(genome):
        off = rng.choice(np.flatnonzero(genome), k, replace=False)
        on = rng.choice(np.flatnonzero(~genome), k, replace=False)
        trial = np.repeat(genome[None], k, 0)
        trial[np.arange(k), off] = False
        trial[np.arange(k), on] = True
        return off, on, trial

    off, on, trial = moves(g)
    p.evaluate_swaps(g, off, on)  # load the compiled loops
    # (a) the base layout's transform kept from the previous batch of moves
    t_warm = timed(lambda: p.evaluate_swaps(g, off, on), 9) / k
    # (b) the base one accepted move away from the last: its transform updated, not taken
    g2 = g.copy()
    g2[off[0]], g2[on[0]] = False, True
    off2, on2, _ = moves(g2)
    flip = [g, g2]

    def after_accept():
        flip.reverse()
        b = flip[0]
        o, n = (off2, on2) if b is g2 else (off, on)
        p.evaluate_swaps(b, o, n)

    p.evaluate_swaps(g2, off2, on2)
    t_accept = timed(after_accept, 9) / k

    # (c) a new base, nothing kept
    def cold():
        p._swap_cache = None
        p.evaluate_swaps(g, off, on)

    t_cold = timed(cold, 9) / k
    # (d) a local search as the genetic method runs it: batches of 64 moves, the best
    # accepted when it improves the objective; every move's time counted
    p._swap_cache = None
    base = p.random_genomes(rng, 1)[0]
    value = float(p.evaluate(base[None]).objective[0])
    accepted = 0
    t = time.perf_counter()
    for _ in range(40):
        o, n, tr = moves(base)
        ev = p.evaluate_swaps(base, o, n)
        j = int(np.argmin(ev.objective))
        if ev.objective[j] < value:
            base, value = tr[j], float(ev.objective[j])
            accepted += 1
    t_climb = (time.perf_counter() - t) / (40 * k)
    t_batch = timed(lambda: p.evaluate(trial)) / k
    t_single = timed(lambda: p.evaluate(trial[:1]), 20)
    # (e) inside a genetic run (20 s): the time per swap move and per full evaluation, as
    # the search itself spends them (its bases are optimised layouts, whose many near-peak
    # lobes make a move dearer than on the random layout above)
    from thinning.search import run_method

    spent = {"swap": [0.0, 0], "full": [0.0, 0]}
    q = ThinningProblem(sites, len(sites) // 2, 0.03, math.radians(20))
    full_eval, swap_eval = q.evaluate, q.evaluate_swaps

    def counted_full(genomes):
        t0 = time.perf_counter()
        out = full_eval(genomes)
        spent["full"][0] += time.perf_counter() - t0
        spent["full"][1] += len(np.atleast_2d(genomes))
        return out

    def counted_swaps(base, off_genes, on_genes):
        t0 = time.perf_counter()
        out = swap_eval(base, off_genes, on_genes)
        spent["swap"][0] += time.perf_counter() - t0
        spent["swap"][1] += len(off_genes)
        return out

    q.evaluate, q.evaluate_swaps = counted_full, counted_swaps
    run = run_method(q, "genetic", 1, {}, time_limit_s=20, workers=1)
    ga_full = spent["full"][0] / spent["full"][1]
    ga_swap = spent["swap"][0] / spent["swap"][1]
    # (f) the run's optimised layout as the base (many lobes near its peak): kept, and new
    best = run.genome
    o_off, o_on, o_trial = moves(best)
    p.evaluate_swaps(best, o_off, o_on)
    t_opt_kept = timed(lambda: p.evaluate_swaps(best, o_off, o_on), 9) / k

    def cold_optimised():
        p._swap_cache = None
        p.evaluate_swaps(best, o_off, o_on)

    t_opt_new = timed(cold_optimised, 9) / k
    t_opt_full = timed(lambda: p.evaluate(o_trial)) / k
    d = max(
        float(np.abs(p.evaluate_swaps(g, off, on).psl_db - p.evaluate(trial).psl_db).max()),
        float(np.abs(ev.psl_db - p.evaluate(tr).psl_db).max()),
    )
    return {
        "lattice": "64x64",
        "moves": k,
        "swap_ms_per_move": t_warm * 1e3,
        "swap_after_accept_ms_per_move": t_accept * 1e3,
        "swap_new_base_ms_per_move": t_cold * 1e3,
        "swap_in_climb_ms_per_move": t_climb * 1e3,
        "climb_batches": 40,
        "climb_accepted": accepted,
        "full_single_ms": t_single * 1e3,
        "full_batched_ms_per_layout": t_batch * 1e3,
        "speedup_vs_single_full": t_single / t_warm,
        "speedup_vs_batched_full": t_batch / t_warm,
        "speedup_after_accept_vs_batched_full": t_batch / t_accept,
        "speedup_new_base_vs_batched_full": t_batch / t_cold,
        "speedup_in_climb_vs_batched_full": t_batch / t_climb,
        "max_psl_difference_db": d,
        "genetic_run_s": 20,
        "genetic_run_psl_db": run.psl_db,
        "genetic_full_evaluations": spent["full"][1],
        "genetic_swap_moves": spent["swap"][1],
        "genetic_full_ms_per_layout": ga_full * 1e3,
        "genetic_swap_ms_per_move": ga_swap * 1e3,
        "genetic_swap_speedup": ga_full / ga_swap,
        "optimised_base_swap_ms_per_move": t_opt_kept * 1e3,
        "optimised_base_new_swap_ms_per_move": t_opt_new * 1e3,
        "optimised_full_batched_ms_per_layout": t_opt_full * 1e3,
        "optimised_speedup_kept": t_opt_full / t_opt_kept,
        "optimised_speedup_new_base": t_opt_full / t_opt_new,
    }


def bench_workers():
    from thinning.geometry.aperture import Aperture
    from thinning.geometry.lattice import Lattice
    from thinning.search import Tracker
    from thinning.search.problem import ThinningProblem

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


#: Runs a command and writes its peak RSS (KiB) to a file. A child forked from this large
#: benchmark process would count this process's pages in its own peak; one forked from this
#: small launcher counts only the launcher's few MiB.
_LAUNCHER = (
    "import resource, subprocess, sys, time\n"
    "t = time.perf_counter()\n"
    "r = subprocess.run(sys.argv[2:])\n"
    "t = time.perf_counter() - t\n"
    "rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss\n"
    "open(sys.argv[1], 'w').write(f'{t} {rss}')\n"
    "sys.exit(r.returncode)\n"
)


def run_measured(cmd):
    """Run a command; its wall time (timed by the launcher) and its own peak RSS (MiB)."""
    with tempfile.TemporaryDirectory() as d:
        rss_file = Path(d) / "rss"
        r = subprocess.run(
            [sys.executable, "-S", "-c", _LAUNCHER, str(rss_file), *cmd],
            capture_output=True,
            text=True,
        )
        if r.returncode != 0:
            raise SystemExit(f"{' '.join(cmd)} failed: {r.stderr.strip()[-300:]}")
        wall, rss = rss_file.read_text().split()
        return float(wall), int(rss) / 1024, r.stdout  # ru_maxrss: KiB on Linux


def bench_scale(quick):
    thinning = str(Path(sys.executable).with_name("thinning"))
    tmp = Path(tempfile.mkdtemp(prefix="bench-scale-"))
    csv_path = tmp / "big.csv"
    with open(csv_path, "w") as f:
        f.write("x_mm,y_mm\n")
        for j in range(256):
            f.write("".join(f"{i * 15:.6f},{j * 15:.6f}\n" for i in range(256)))
    res = {}
    # each measurement in a fresh process
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
        f"swap move (64 x 64, 4x), ms per move: {s['swap_ms_per_move']:.4f} with the base's "
        f"transform kept, {s['swap_after_accept_ms_per_move']:.4f} after an accepted move "
        f"(transform updated), {s['swap_new_base_ms_per_move']:.4f} on a new base, "
        f"{s['swap_in_climb_ms_per_move']:.4f} in a local search ({s['climb_accepted']} of "
        f"{s['climb_batches']} batches accepted)"
    )
    print(
        f"  full evaluation {s['full_single_ms']:.3f} ms alone, "
        f"{s['full_batched_ms_per_layout']:.3f} ms per layout in a batch of 64 -> swap "
        f"{s['speedup_vs_single_full']:.1f}x / {s['speedup_vs_batched_full']:.1f}x faster "
        f"(kept), {s['speedup_after_accept_vs_batched_full']:.1f}x (after accept), "
        f"{s['speedup_new_base_vs_batched_full']:.1f}x (new base), "
        f"{s['speedup_in_climb_vs_batched_full']:.1f}x (local search) than one in a batch; "
        f"max PSL difference {s['max_psl_difference_db']:.2e} dB"
    )
    print(
        f"  inside a {s['genetic_run_s']} s genetic run (PSL {s['genetic_run_psl_db']:.2f} dB): "
        f"{s['genetic_full_evaluations']:,} full evaluations at "
        f"{s['genetic_full_ms_per_layout']:.4f} ms, {s['genetic_swap_moves']:,} swap moves at "
        f"{s['genetic_swap_ms_per_move']:.4f} ms -> {s['genetic_swap_speedup']:.1f}x"
    )
    print(
        f"  on that run's optimised layout: {s['optimised_base_swap_ms_per_move']:.4f} ms per "
        f"move kept, {s['optimised_base_new_swap_ms_per_move']:.4f} ms on it as a new base; "
        f"full evaluation {s['optimised_full_batched_ms_per_layout']:.3f} ms in a batch -> "
        f"{s['optimised_speedup_kept']:.1f}x / {s['optimised_speedup_new_base']:.1f}x"
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
