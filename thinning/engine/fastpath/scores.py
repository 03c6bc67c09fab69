"""Whole evaluations of a stack of power patterns from their transforms (compiled).

Part of :mod:`thinning.engine.fastpath`, whose docstring gives the rules these loops follow.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .exact import _climb
from .lobes import _above, _above_g, _alias, _candidates, _removed_at, _total

#: lanes of the blocked sums and maxima (lets the compiler use vector registers)
_LANES = 16


@njit(cache=True, fastmath=True)
def _power_pass(f, out, weight, outer):
    """|f|² of one transform (real and imaginary parts interleaved) into ``out``, with
    Σ |f|²·weight and max |f|²·outer. Plain loops over flat arrays, and the maximum kept in
    lanes, so that the compiler keeps all three in vector registers."""
    n = out.size
    for j in range(n):
        out[j] = f[2 * j] * f[2 * j] + f[2 * j + 1] * f[2 * j + 1]
    total = 0.0
    for j in range(n):
        total += out[j] * weight[j]
    top = np.zeros(_LANES, dtype=out.dtype)
    m = n - n % _LANES
    for j0 in range(0, m, _LANES):
        for lane in range(_LANES):
            x = out[j0 + lane] * outer[j0 + lane]
            top[lane] = x if x > top[lane] else top[lane]
    o_max = 0.0
    for lane in range(_LANES):
        o_max = max(o_max, float(top[lane]))
    for j in range(m, n):
        o_max = max(o_max, float(out[j] * outer[j]))
    return total, o_max


@njit(cache=True)
def _window_cut(p, w_flat, w_parent, w_rim, w_capped, w_start, ok):
    """Main-beam membership ``ok`` of the samples of the first window (of those stacked) that
    holds the main beam of pattern ``p``; returns that window's index. The last window spans
    the grid (:meth:`thinning.engine.region.SampledRegion.fast_tables` stacks them until one does),
    so some window always holds the beam."""
    nlev = w_capped.size
    for lev in range(nlev):
        a0, nw = w_start[lev], w_start[lev + 1] - w_start[lev]
        ok[0] = True
        for i in range(1, nw):
            q = w_parent[a0 + i]
            ok[i] = ok[q] and p[w_flat[a0 + i]] <= p[w_flat[a0 + q]]
        if w_capped[lev]:
            return lev
        over = False
        for i in range(nw):
            if ok[i] and w_rim[a0 + i]:
                over = True
                break
        if not over:
            return lev
    return nlev - 1


@njit(cache=True, nogil=True)
def fast_scores(
    f,
    grids,
    refine,
    cap,
    margin,
    weight,
    gain,
    galias,
    nbr,
    srows,
    scols,
    geom,
    outer_all,
    w_flat,
    w_parent,
    w_rim,
    w_weight,
    w_w0,
    w_pos_all,
    w_capped,
    w_start,
    kx,
    ky,
    linear,
    work_p,
    work_i,
):
    """PSL, ASL and the PSL's direction of a stack of patterns from their transforms.

    Parameters
    ----------
    f : (B, 2N) float array      the stored transform samples, real and imaginary parts
                                 interleaved (sample 0 at the beam peak)
    grids : (B, R, C) float64    the real excitation grids (read only when ``refine``)
    refine : bool                refine the candidate lobes on the exact pattern
    cap : int                    candidates refined per pattern
    margin : float  [1]          candidates within this power ratio of the highest sample
    weight, gain, galias, nbr, srows, scols, geom    the region
                                 (:class:`thinning.engine.region.FastTables`; the weights in
                                 f's precision); under a mask the sidelobe figure is max p·g
    outer_all, w_*               its main-beam windows, each twice the last, one after the
                                 other (:attr:`thinning.engine.region.FastTables.levels`)
    kx, ky : float arrays  [rad]  the exact pattern's phase per unit u (v) of each column (row)
    linear : bool                one row along x: refine along u only
    work_p, work_i : (≥ N,) arrays of f's dtype and int64   work space

    Returns
    -------
    psl, asl : (B,) float  [1]   normalised to the beam peak
    uv : (B, 2) float  [1]
    """
    nb, n = f.shape[0], f.shape[1] // 2
    nlev = w_capped.size
    wmax = 0
    for lev in range(nlev):
        wmax = max(wmax, w_start[lev + 1] - w_start[lev])
    psl = np.zeros(nb)
    asl = np.zeros(nb)
    uv = np.zeros((nb, 2))
    ok = np.zeros(wmax, dtype=np.bool_)
    removed_all = np.zeros(wmax)
    cand = np.zeros(max(cap, 1), dtype=np.int64)
    est = np.zeros((max(cap, 1), 5))
    masked = geom[13] > 0
    flags = (1 if masked else 0) + (2 if geom[14] > 0 else 0)
    ws = np.empty((6, grids.shape[2]))
    # buffers kept by the caller: fresh ones of this size would cost page faults per call
    p = work_p[:n]  # the current pattern's |f|²
    above = work_i[:n]  # the samples within the margin of its top
    weight_sum = geom[11]
    for b in range(nb):
        total, o_max = _power_pass(f[b], p, weight, outer_all[0])
        peak = float(p[0])
        # 1. main beam: one pass, parents first, in the first window that holds it
        lev = _window_cut(p, w_flat, w_parent, w_rim, w_capped, w_start, ok)
        a0, nw = w_start[lev], w_start[lev + 1] - w_start[lev]
        outer = outer_all[lev]
        w_pos = w_pos_all[lev]
        removed = removed_all[:nw]
        if lev > 0:  # a wider window: the highest sample outside it, again
            o_max = 0.0
            for j in range(n):
                o_max = max(o_max, float(p[j] * outer[j]))
        # 2. sample PSL and ASL
        w_max, w_arg = 0.0, 0
        rsum = 0.0
        for i in range(nw):
            r = w_w0[a0 + i] if ok[i] else 0.0
            removed[i] = r
            j = w_flat[a0 + i]
            pj = float(p[j])
            total -= r * pj
            rsum += r
            if masked:
                pj = float(p[j] * (galias[j] if r > 0 else gain[j]))
            if w_weight[a0 + i] - r > 0 and pj > w_max:
                w_max, w_arg = pj, i
        top = max(o_max, w_max)
        # the samples within the margin of the top (candidates, and the top's own place)
        thr = top * margin if refine else top
        n_above = _above_g(p, gain, thr, above) if masked else _above(p, thr, above)
        if o_max >= w_max:
            arg = 0
            for t in range(n_above):
                j = above[t]
                if p[j] * outer[j] == o_max:
                    arg = j
                    break
        else:
            arg = w_flat[a0 + w_arg]
        wsum = weight_sum - rsum
        asl[b] = total / wsum / peak if wsum > 0 else 0.0
        psl[b] = top / peak
        ua, va = _alias(arg, _removed_at(arg, w_pos, removed), srows, scols, geom)
        uv[b, 0], uv[b, 1] = ua, va
        if not refine or cap <= 0 or top <= 0:
            continue
        # 3. candidates: the samples above the margin first, then their neighbour tests
        k = _candidates(
            p,
            above[:n_above],
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
        # 4. refinement on the exact pattern
        a = grids[b]
        best, ub, vb = _climb(
            a,
            kx,
            ky,
            _total(a.ravel()) ** 2,
            k,
            cand,
            est,
            psl[b],
            w_pos,
            removed,
            srows,
            scols,
            geom,
            linear,
            ws,
        )
        if best > psl[b]:
            psl[b] = best
            uv[b, 0], uv[b, 1] = ub, vb
    return psl, asl, uv


@njit(cache=True)
def main_beam_cut(p, w_flat, w_parent, w_rim, w_w0, w_capped, w_start):
    """Step 1 of the module docstring for one pattern: the window that holds its main beam,
    and the weight the main beam takes from each of that window's samples."""
    wmax = 0
    for lev in range(w_capped.size):
        wmax = max(wmax, w_start[lev + 1] - w_start[lev])
    ok = np.zeros(wmax, dtype=np.bool_)
    lev = _window_cut(p, w_flat, w_parent, w_rim, w_capped, w_start, ok)
    a0, nw = w_start[lev], w_start[lev + 1] - w_start[lev]
    removed = np.zeros(nw)
    for i in range(nw):
        if ok[i]:
            removed[i] = w_w0[a0 + i]
    return lev, removed
