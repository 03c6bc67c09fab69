#!/usr/bin/env python3
"""Time one pattern evaluation against the bare FFT it is built on.

For a 64 × 64 and a 256 × 256 half-wavelength lattice (50 % random occupancy) at 4×
oversampling this prints, per evaluation:

* the bare ``scipy.fft.rfft2`` of the same padded grid (float32),
* the engine's transform alone (the pruned two-step FFT),
* a full evaluation (transform, sidelobe region, main-beam cut, peak and mean, the best
  candidate lobes refined on the exact pattern) — what the search calls — by the compiled
  route (thinning/engine/fastpath/, the default) and by the numpy route (the same figures),
* a detailed evaluation (every candidate lobe refined) — what ``thinning score`` reports,

and the ratio of each to the bare transform, all measured in this one run (the median of
repeated timings): once for a single grid, and once per grid for a stack of 64 grids (the
search evaluates whole generations in one call, and the bare transform gets the same stack).
Usage: ``python benchmarks/bench_engine.py [--repeat N] [--json FILE]`` (``--json`` merges
the figures into FILE, e.g. benchmarks/results.json).
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
import time
from pathlib import Path

import numpy as np
import scipy.fft

from thinning.engine.pattern import FFTPatternEngine


def median_time(fn, repeat):
    fn()  # warm up caches and FFT plans
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=200)
    ap.add_argument("--json", default=None, help="merge the figures into this JSON file")
    args = ap.parse_args()
    lam = 0.03
    rows = []
    for n in (64, 256):
        for batch in (1, 64 if n == 64 else 8):
            rng = np.random.default_rng(n)
            a = (rng.random((batch, n, n)) < 0.5).astype(np.float32)
            eng = FFTPatternEngine((n, n), (lam / 2, lam / 2), lam, math.radians(30), 4.0)
            pr, pc = eng.pad
            rep = max(5, args.repeat // ((1 if n == 64 else 16) * batch))
            per = 1e3 / batch  # ms per grid

            def bare(a=a, pr=pr, pc=pc):
                return scipy.fft.rfft2(a, s=(pr, pc))

            t_bare = median_time(bare, rep) * per
            t_power = median_time(lambda a=a, eng=eng: eng.power(a), rep) * per
            eng.evaluate(a)  # load the compiled loops before timing
            t_full = median_time(lambda a=a, eng=eng: eng.evaluate(a), rep) * per
            eng.compiled = False
            t_numpy = median_time(lambda a=a, eng=eng: eng.evaluate(a), rep) * per
            eng.compiled = True
            t_detail = (
                (median_time(lambda a=a, eng=eng: eng.detail(a[0]), max(5, rep // 4)) * 1e3)
                if batch == 1
                else None
            )
            rows.append(
                {
                    "lattice": f"{n}x{n}",
                    "padded": f"{pr}x{pc}",
                    "batch": batch,
                    "bare_rfft2_ms": t_bare,
                    "engine_transform_ms": t_power,
                    "evaluate_ms": t_full,
                    "evaluate_numpy_route_ms": t_numpy,
                    "detail_ms": t_detail,
                    "evaluate_over_bare": t_full / t_bare,
                    "numpy_route_over_bare": t_numpy / t_bare,
                    "detail_over_bare": None if t_detail is None else t_detail / t_bare,
                }
            )
    import numba

    machine = (
        f"{platform.machine()}, {os.cpu_count()} CPUs, python "
        f"{platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, "
        f"numba {numba.__version__}"
    )
    print(f"machine: {machine}")
    print(
        f"{'lattice':>9} {'padded':>9} {'batch':>5} {'bare FFT':>10} {'transform':>10} "
        f"{'evaluate':>10} {'numpy rt':>10} {'detail':>10} {'eval/bare':>10} {'numpy/bare':>10} "
        f"{'detail/bare':>12}"
    )
    for r in rows:
        det = "" if r["detail_ms"] is None else f"{r['detail_ms']:>8.3f}ms"
        dob = "" if r["detail_over_bare"] is None else f"{r['detail_over_bare']:>12.2f}"
        print(
            f"{r['lattice']:>9} {r['padded']:>9} {r['batch']:>5} {r['bare_rfft2_ms']:>8.3f}ms "
            f"{r['engine_transform_ms']:>8.3f}ms {r['evaluate_ms']:>8.3f}ms "
            f"{r['evaluate_numpy_route_ms']:>8.3f}ms {det:>10} "
            f"{r['evaluate_over_bare']:>10.2f} {r['numpy_route_over_bare']:>10.2f} {dob:>12}"
        )
    print(
        "times per grid; 'evaluate' = transform, sidelobe region, main-beam cut, peak and "
        "mean, refinement of the best candidate lobes on the exact pattern, by the compiled "
        "route; 'numpy rt' = the same by the numpy route"
    )
    if args.json:
        path = Path(args.json)
        data = json.loads(path.read_text()) if path.exists() else {}
        data["bench_engine"] = {"machine": machine, "date": time.strftime("%Y-%m-%d"), "rows": rows}
        path.write_text(json.dumps(data, indent=2) + "\n")


if __name__ == "__main__":
    main()
