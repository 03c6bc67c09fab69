#!/usr/bin/env python3
"""Time one pattern evaluation against the bare FFT it is built on.

For a 64 × 64 and a 256 × 256 half-wavelength lattice (50 % random occupancy) at 4×
oversampling this prints, per evaluation:

* the bare ``scipy.fft.rfft2`` of the same padded grid (float32),
* the engine's transform alone (the pruned two-step FFT),
* a full evaluation (transform, sidelobe region, main-beam cut, peak and mean, refinement
  of the highest sample on the exact pattern) — what the search calls,
* a detailed evaluation (every candidate lobe refined) — what ``thinning score`` reports,

and the ratio of each to the bare transform, all measured in this one run (the median of
repeated timings). Usage: ``python benchmarks/bench_engine.py [--repeat N]``.
"""

from __future__ import annotations

import argparse
import json
import math
import platform
import statistics
import time

import numpy as np
import scipy.fft

from thinning.pattern import FFTPatternEngine


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
    ap.add_argument("--json", action="store_true", help="print the figures as JSON too")
    args = ap.parse_args()
    lam = 0.03
    rows = []
    for n in (64, 256):
        rng = np.random.default_rng(n)
        a = (rng.random((n, n)) < 0.5).astype(np.float32)
        eng = FFTPatternEngine((n, n), (lam / 2, lam / 2), lam, math.radians(30), 4.0)
        pr, pc = eng.pad
        rep = max(5, args.repeat // (1 if n == 64 else 16))
        bare = median_time(lambda a=a, pr=pr, pc=pc: scipy.fft.rfft2(a, s=(pr, pc)), rep)
        power = median_time(lambda a=a, eng=eng: eng.power(a), rep)
        full = median_time(lambda a=a, eng=eng: eng.evaluate(a), rep)
        detail = median_time(lambda a=a, eng=eng: eng.detail(a), max(5, rep // 4))
        rows.append(
            {
                "lattice": f"{n}x{n}",
                "padded": f"{pr}x{pc}",
                "bare_rfft2_ms": bare * 1e3,
                "engine_transform_ms": power * 1e3,
                "evaluate_ms": full * 1e3,
                "detail_ms": detail * 1e3,
                "evaluate_over_bare": full / bare,
                "detail_over_bare": detail / bare,
            }
        )
    print(
        f"machine: {platform.machine()}, {platform.processor() or 'cpu'}, "
        f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}"
    )
    print(
        f"{'lattice':>9} {'padded':>9} {'bare FFT':>10} {'transform':>10} {'evaluate':>10} "
        f"{'detail':>10} {'eval/bare':>10} {'detail/bare':>12}"
    )
    for r in rows:
        print(
            f"{r['lattice']:>9} {r['padded']:>9} {r['bare_rfft2_ms']:>8.3f}ms "
            f"{r['engine_transform_ms']:>8.3f}ms {r['evaluate_ms']:>8.3f}ms "
            f"{r['detail_ms']:>8.3f}ms "
            f"{r['evaluate_over_bare']:>10.2f} {r['detail_over_bare']:>12.2f}"
        )
    if args.json:
        print(json.dumps(rows, indent=2))


if __name__ == "__main__":
    main()
