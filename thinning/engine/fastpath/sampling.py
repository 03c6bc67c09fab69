"""Error diffusion of on-probabilities on the lattice grid (compiled).

Part of :mod:`thinning.engine.fastpath`; used by :mod:`thinning.search.sampling`. The grid is
scanned row by row, alternate rows in opposite directions (serpentine); each cell is switched
on when its probability plus the error carried to it reaches its threshold (one half, or one
half plus a small random dither that breaks up the regular textures of low densities), and the
error (the value minus the decision) is passed on to the cells not yet visited with the
weights of the diffusion filter (Floyd & Steinberg, "An adaptive algorithm for spatial
greyscale", Proc. SID 17(2), 1976). Cells without a gene (NaN) are skipped: the weights of
the neighbours that have one are rescaled to keep the whole error, and an error with nowhere
to go is carried to the next cell of the scan, so that the total is kept up to the last
cell's error.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["diffuse"]


@njit(cache=True, nogil=True)
def diffuse(values, threshold, taps_dr, taps_dc, taps_w):
    """Binary error diffusion of a grid of values in [0, 1] (NaN: no cell).

    Parameters
    ----------
    values : (R, C) float64
    threshold : (R, C) float64   the decision threshold of each cell (one half, or one half
        plus a dither)
    taps_dr, taps_dc : (T,) int64   where each tap sends the error: rows ahead (0 or 1) and
        columns ahead in the direction of the current row's scan
    taps_w : (T,) float64   the tap weights (summing to 1)

    Returns
    -------
    (R, C) bool   the decisions (False where NaN)
    """
    nrow, ncol = values.shape
    err = np.zeros((nrow + 2, ncol + 4))
    out = np.zeros((nrow, ncol), dtype=np.bool_)
    carry = 0.0
    ntap = taps_w.size
    for r in range(nrow):
        forward = r % 2 == 0
        for k in range(ncol):
            c = k if forward else ncol - 1 - k
            p = values[r, c]
            if p != p:  # NaN: no cell
                continue
            v = p + err[r, c + 2] + carry
            carry = 0.0
            on = v >= threshold[r, c]
            out[r, c] = on
            e = v - (1.0 if on else 0.0)
            total = 0.0
            for t in range(ntap):
                rr = r + taps_dr[t]
                cc = c + (taps_dc[t] if forward else -taps_dc[t])
                if rr < nrow and 0 <= cc < ncol and values[rr, cc] == values[rr, cc]:
                    total += taps_w[t]
            if total <= 0.0:
                carry = e
                continue
            for t in range(ntap):
                rr = r + taps_dr[t]
                cc = c + (taps_dc[t] if forward else -taps_dc[t])
                if rr < nrow and 0 <= cc < ncol and values[rr, cc] == values[rr, cc]:
                    err[rr, cc + 2] += e * taps_w[t] / total
    return out
