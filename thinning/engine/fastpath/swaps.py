"""Swap moves of one layout scored from its stored transform; their exact ASL terms.

Part of :mod:`thinning.engine.fastpath`, whose docstring gives the rules these loops follow.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .exact import _climb
from .lobes import _candidates


@njit(cache=True, nogil=True)
def swap_scores(
    base,
    ext,
    f_ext,
    ext_row,
    ext_col,
    inside,
    tw_r,
    tw_c,
    grid,
    rows,
    cols,
    signs,
    peak,
    cap,
    margin,
    weight,
    gain,
    galias,
    g_ext,
    w_pos,
    removed,
    nbr,
    srows,
    scols,
    geom,
    kx,
    ky,
    linear,
):
    """Sample and refined PSL (max p·g under a mask) of K swap moves of one layout.

    Switching grid site (j, i) adds ±exp(−2πi(s·j/Pr + c·i/Pc)) to stored sample (s, c);
    each move's samples are updated at the few places ``ext`` where its highest or candidate
    lobes can be (the caller's bound), then steps 3 and 4 of the module docstring run on them.

    Parameters
    ----------
    base : (N,) float64      |AF|² of the layout (changed during the call, then restored)
    ext : (E,) int           the stored samples to update
    f_ext : (E, 2) float64   the layout's transform there (real, imaginary)
    ext_row, ext_col : (E,) int   their storage row and column
    inside : (E,) bool       in the layout's sidelobe region
    gain, galias : (N,)       g of each sample, and without its own direction
    g_ext : (E,) float        g of the samples ``ext`` (with the layout's main beam; read
                              under a mask)
    tw_r, tw_c : (Pr, 2), (Pc, 2) float64   exp(−2πi t/P) for t < P (real, imaginary)
    grid : (R, C) float64    the layout's excitation grid (changed in place and restored)
    rows, cols, signs : (K, S)   each move's switched grid indices and ±1 (0: padding)
    peak : float             the beam peak |Σa|² (a swap keeps it)
    removed : (W,) float     the layout's main-beam weights in its window (w_pos: its places)

    Returns
    -------
    psl : (K,) float  [1]    refined PSL of each move (at least its highest sample)
    sampled : (K,) float  [1]   highest sample of each move's sidelobe region
    """
    nmove = rows.shape[0]
    nsw = rows.shape[1]
    pr, pc = tw_r.shape[0], tw_c.shape[0]
    p = base  # changed at ext for each move and restored
    saved = np.empty(ext.size)
    for e in range(ext.size):
        saved[e] = p[ext[e]]
    psl = np.zeros(nmove)
    sampled = np.zeros(nmove)
    cand = np.zeros(max(cap, 1), dtype=np.int64)
    est = np.zeros((max(cap, 1), 5))
    masked = geom[13] > 0
    flags = (1 if masked else 0) + (2 if geom[14] > 0 else 0)
    ws = np.empty((6, grid.shape[1]))
    nrow = 0
    ncol = 0
    for e in range(ext.size):
        nrow = max(nrow, ext_row[e] + 1)
        ncol = max(ncol, ext_col[e] + 1)
    # each switched site's phase along the storage rows (±, its sign) and columns
    ey = np.zeros((nsw, nrow, 2))
    ex = np.zeros((nsw, ncol, 2))
    for m in range(nmove):
        for s in range(nsw):
            sg = signs[m, s]
            j, i = rows[m, s], cols[m, s]
            t = 0
            for r in range(nrow):  # exp(−2πi r·j/Pr), the index kept mod Pr without division
                ey[s, r, 0] = sg * tw_r[t, 0]
                ey[s, r, 1] = sg * tw_r[t, 1]
                t += j
                t -= pr if t >= pr else 0
            t = 0
            for c in range(ncol):
                ex[s, c, 0] = tw_c[t, 0]
                ex[s, c, 1] = tw_c[t, 1]
                t += i
                t -= pc if t >= pc else 0
        top = 0.0
        for e in range(ext.size):
            re, im = f_ext[e, 0], f_ext[e, 1]
            r, c = ext_row[e], ext_col[e]
            for s in range(nsw):
                ar, ai = ey[s, r, 0], ey[s, r, 1]
                br, bi = ex[s, c, 0], ex[s, c, 1]
                re += ar * br - ai * bi
                im += ar * bi + ai * br
            v = re * re + im * im
            p[ext[e]] = v
            if masked:
                if inside[e] and v * g_ext[e] > top:
                    top = v * g_ext[e]
            elif inside[e] and v > top:
                top = v
        sampled[m] = top / peak
        psl[m] = sampled[m]
        if top > 0 and cap > 0:
            k = _candidates(
                p,
                ext,
                top * margin,
                peak,
                weight,
                gain,
                galias,
                flags,
                w_pos,
                removed,
                nbr,
                linear,
                cap,
                cand,
                est,
            )
            for s in range(nsw):
                grid[rows[m, s], cols[m, s]] += signs[m, s]
            psl[m], _, _ = _climb(
                grid,
                kx,
                ky,
                peak,
                k,
                cand,
                est,
                psl[m],
                w_pos,
                removed,
                srows,
                scols,
                geom,
                linear,
                ws,
            )
            for s in range(nsw):
                grid[rows[m, s], cols[m, s]] -= signs[m, s]
        for e in range(ext.size):
            p[ext[e]] = saved[e]
    return psl, sampled


@njit(cache=True)
def _h_at(xj, xi, on_r, on_c, on_w, w_region, mb_row, mb_col, mb_w, mb_f, tw_r, tw_c):
    """H(x) = Σ_n w_n·conj(F_n)·exp(−2πi n·x/P) at grid index x = (xj, xi), as
    Σ_m a_m·Ŵ(x − m) (Ŵ: the transform of the region weights) less the main beam's samples."""
    pr, pc = w_region.shape[0], w_region.shape[1]
    hr = hi = 0.0
    for t in range(on_r.size):
        dj = xj - on_r[t]  # |dj| < Pr: a conditional add, not a division, wraps it
        dj += pr if dj < 0 else 0
        di = xi - on_c[t]
        di += pc if di < 0 else 0
        hr += on_w[t] * w_region[dj, di, 0]
        hi += on_w[t] * w_region[dj, di, 1]
    for q in range(mb_row.size):
        tr = (mb_row[q] * xj) % pr
        tc = (mb_col[q] * xi) % pc
        er = tw_r[tr, 0] * tw_c[tc, 0] - tw_r[tr, 1] * tw_c[tc, 1]
        ei = tw_r[tr, 0] * tw_c[tc, 1] + tw_r[tr, 1] * tw_c[tc, 0]
        fr, fi = mb_f[q, 0], -mb_f[q, 1]  # conj(F_n)
        hr -= mb_w[q] * (fr * er - fi * ei)
        hi -= mb_w[q] * (fr * ei + fi * er)
    return hr, hi


@njit(cache=True)
def _w_at(dj, di, w_region, mb_row, mb_col, mb_w, tw_r, tw_c):
    """Re W(Δ) = Re Σ_n w_n·exp(−2πi n·Δ/P) with the main beam's weights taken out."""
    pr, pc = w_region.shape[0], w_region.shape[1]
    dj = (dj + pr) % pr
    di = (di + pc) % pc
    wr = w_region[dj, di, 0]
    for q in range(mb_row.size):
        tr = (mb_row[q] * dj) % pr
        tc = (mb_col[q] * di) % pc
        wr -= mb_w[q] * (tw_r[tr, 0] * tw_c[tc, 0] - tw_r[tr, 1] * tw_c[tc, 1])
    return wr


@njit(cache=True, nogil=True)
def swap_asl_terms(
    on_r,
    on_c,
    on_w,
    w_region,
    mb_row,
    mb_col,
    mb_w,
    mb_f,
    tw_r,
    tw_c,
    rows,
    cols,
    signs,
    h_cache,
    h_have,
):
    """The exact change of Σ w|F|² over the region for K swap moves:

    .. math::

        Σ_n w_n |F_n + Δ_n|² − Σ_n w_n |F_n|²
            = 2 Re Σ_s σ_s H(x_s) + Σ_{s,t} σ_s σ_t Re W(x_s − x_t),

    Δ_n = Σ_s σ_s exp(−2πi n·x_s/P) for the switched grid sites x_s. H and W are read at the
    switched sites only, from the transform Ŵ of the region weights (one per problem) and the
    few main-beam samples, so no transform of the layout is needed.

    Parameters
    ----------
    on_r, on_c, on_w : (N_on,)   grid indices and weights of the layout's elements
    w_region : (Pr, Pc, 2) float64   Ŵ = fft2(region weights), real and imaginary parts
    mb_row, mb_col, mb_w, mb_f   storage row, column, removed weight and transform (real,
                                 imaginary) of the main-beam samples
    rows, cols, signs : (K, S)   each move's switched grid indices and ±1 (0: padding)
    h_cache, h_have : (R, C, 2), (R, C)   H of the layout at grid sites, filled on demand

    Returns
    -------
    cross, quad : (K,) float
    """
    nmove, nsw = rows.shape
    cross = np.zeros(nmove)
    quad = np.zeros(nmove)
    for m in range(nmove):
        for s in range(nsw):
            sg = signs[m, s]
            if sg == 0:
                continue
            xj, xi = rows[m, s], cols[m, s]
            if not h_have[xj, xi]:
                hr, hi = _h_at(
                    xj, xi, on_r, on_c, on_w, w_region, mb_row, mb_col, mb_w, mb_f, tw_r, tw_c
                )
                h_cache[xj, xi, 0], h_cache[xj, xi, 1] = hr, hi
                h_have[xj, xi] = True
            cross[m] += 2.0 * sg * h_cache[xj, xi, 0]
            for t in range(nsw):
                st = signs[m, t]
                if st == 0:
                    continue
                quad[m] += (
                    sg
                    * st
                    * _w_at(
                        rows[m, s] - rows[m, t],
                        cols[m, s] - cols[m, t],
                        w_region,
                        mb_row,
                        mb_col,
                        mb_w,
                        tw_r,
                        tw_c,
                    )
                )
    return cross, quad
