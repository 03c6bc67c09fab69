#!/usr/bin/env python3
"""The least a scoring script can do, as a yardstick for ``thinning score``.

Reads a layout CSV (x_mm, y_mm columns), puts the elements on their grid, takes the 4×
zero-padded FFT and the maximum of |AF|² over the disc |(u, v)| ≤ 1 + sin θmax outside a
fixed main-beam radius (the filled aperture's first null). No validation, no refinement, no
directivity, no beamwidth. Usage: ``python bare_score.py LAYOUT.csv FREQ_GHZ SCAN_DEG``.
"""

import csv
import math
import sys

import numpy as np
import scipy.fft


def main():
    path, f_ghz, scan_deg = sys.argv[1], float(sys.argv[2]), float(sys.argv[3])
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    x = np.array([float(r["x_mm"]) for r in rows]) * 1e-3
    y = np.array([float(r["y_mm"]) for r in rows]) * 1e-3
    lam = 0.299792458 / f_ghz
    ux, uy = np.unique(x), np.unique(y)
    gx, gy = np.diff(ux).min(), np.diff(uy).min()
    c = np.rint((x - ux[0]) / gx).astype(int)
    r = np.rint((y - uy[0]) / gy).astype(int)
    grid = np.zeros((r.max() + 1, c.max() + 1), np.float32)
    grid[r, c] = 1.0
    pr, pc = 4 * grid.shape[0], 4 * grid.shape[1]
    p = np.abs(scipy.fft.rfft2(grid, s=(pr, pc))) ** 2
    u = np.arange(p.shape[1]) * lam / (gx * pc)
    v = np.fft.fftfreq(pr) * lam / gy
    rr = np.hypot(u[None, :], v[:, None])
    null = lam / (grid.shape[1] * gx)
    region = (rr <= 1 + math.sin(math.radians(scan_deg))) & (rr >= null)
    print(f"{10 * np.log10(p[region].max() / p[0, 0]):.2f}")


if __name__ == "__main__":
    main()
