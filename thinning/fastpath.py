"""Compiled (numba) loops for the search's evaluation of a stack of power patterns.

The search scores whole generations with :meth:`thinning.pattern.FFTPatternEngine.evaluate`.
After the FFT the numpy route takes a dozen passes over every pattern (main-beam chains,
masked maxima, weighted sums, a neighbour test for every candidate lobe, the alias of each
candidate, a vectorised Newton climb); each pass is cheap, but together they cost two to
twelve times the transform (benchmarks/bench_engine.py). This module does the same work in
one compiled loop per pattern, with the same rules, so that the figures agree with the numpy
route (checked in tests/test_fastpath.py):

1. the main beam, walking the window samples nearest first (every sample's parent on its ray
   comes before it): a sample is main beam when it is no higher than its parent and its
   parent is main beam (the pointer-jumping cut of :mod:`thinning.region`, resolved in one
   pass);
2. the sample PSL and its place, and the ASL as the region-weighted mean with the main beam
   taken out;
3. the candidate lobes: local maxima of the region within the margin of the highest sample,
   ranked by the parabolic (in dB) estimate of their peak along u and v, at most ``cap``;
4. each candidate moved to its alias nearest the centre of the disc and refined by the
   projected trust-region Newton iteration of :func:`thinning.exact.refine_peaks` on the exact
   pattern of the real excitation grid, whose array factor and its first and second
   derivatives are six dot products per grid row. Four differences save evaluations of the
   exact pattern: the climb starts at the parabolic peak estimate instead of the sample; it
   stops before a step whose predicted gain is below 1e-6 of the power (4e-6 dB) instead of
   1e-9 after it; it stops when the quadratic model leaves the lobe below one already
   refined; and a candidate whose estimate is 0.5 dB below the PSL found is not climbed at
   all (the estimate is within 0.1 dB of the exact peak). The PSL differs from the numpy
   route's by less than 1e-5 dB (tests/test_fastpath.py).

:func:`swap_scores` does steps 3 and 4 for K swap moves of one layout, whose samples differ
from the layout's only at a few stored places (:meth:`thinning.problem.ThinningProblem.
evaluate_swaps`). A main beam that reaches the rim of a window is cut again in the next one,
twice as wide, as the numpy route does. Everything runs on the CPU in the calling thread,
without the GIL (so that the thread feeding the worker processes keeps running meanwhile).
"""

from __future__ import annotations

import math
import signal
import threading

import numpy as np
from numba import njit

__all__ = ["call", "fast_scores", "swap_scores", "swap_asl_terms", "main_beam_cut", "exact_point"]


#: (kernel, dtype of its first argument) already compiled or loaded in this process
_READY: set = set()


def call(kernel, *args):
    """Run a compiled kernel.

    The first call of a kernel for a dtype compiles it (or loads it from the disk cache): a
    Ctrl-C in the middle of that leaves numba's half-built code behind, and the next call
    fails. SIGINT is therefore held back until that call returns (a handler that only notes
    it stands in meanwhile), and the interrupt then arrives at a clean point. A Ctrl-C that
    lands while a kernel boxes its results in Python comes out of numba as a SystemError; it
    is raised again as the KeyboardInterrupt it is. Either way a search stops with its best
    layout instead of failing.
    """
    key = (kernel, getattr(args[0], "dtype", None) if args else None)
    if key in _READY or threading.current_thread() is not threading.main_thread():
        return _unwrap(kernel, args)
    pending = []
    previous = signal.signal(signal.SIGINT, lambda signum, frame: pending.append(signum))
    try:
        out = _unwrap(kernel, args)
    finally:
        signal.signal(signal.SIGINT, previous)
    _READY.add(key)
    if pending:
        if callable(previous):
            previous(signal.SIGINT, None)  # the default handler raises KeyboardInterrupt
        elif previous == signal.SIG_DFL:
            raise KeyboardInterrupt
    return out


def _unwrap(kernel, args):
    try:
        return kernel(*args)
    except SystemError as exc:
        seen, cause = set(), exc
        while cause is not None and id(cause) not in seen:
            if isinstance(cause, KeyboardInterrupt):
                raise KeyboardInterrupt from exc
            seen.add(id(cause))
            cause = cause.__cause__ or cause.__context__
        raise


#: stopping tolerances of the Newton climb: step moved [samples], trust radius [samples],
#: predicted gain [relative to the power] (refine_peaks: the same, with 1e-9 for the gain)
_MOVED, _TRUST, _GAIN = 1e-4, 1e-4, 1e-6
#: A candidate whose parabolic peak estimate lies this far (natural log of power: 0.5 dB)
#: below the PSL already found is not refined. The estimate from samples 4× apart misses the
#: exact peak by less than 0.1 dB (measured over random layouts of 20 × 20 to 64 × 64: at
#: most 0.064 dB low); 0.5 dB leaves five times that.
_SKIP = 0.5 * math.log(10) / 10


@njit(cache=True, fastmath=True)
def _exact6(a, kx, ky, u, v, ws):
    """(AF, AF_u, AF_v, AF_uu, AF_vv, AF_uv) of the real grid ``a`` at (u, v), as 12 floats.

    ``kx``, ``ky`` are arithmetic progressions, so the phasors follow by recurrence.
    """
    nrow, ncol = a.shape
    exr, exi, e1r, e1i, e2r, e2i = ws[0], ws[1], ws[2], ws[3], ws[4], ws[5]
    dkx = kx[1] - kx[0] if ncol > 1 else 0.0
    cr, ci = math.cos(kx[0] * u), math.sin(kx[0] * u)
    qr, qi = math.cos(dkx * u), math.sin(dkx * u)
    for c in range(ncol):
        exr[c], exi[c] = cr, ci
        cr, ci = cr * qr - ci * qi, cr * qi + ci * qr
    for c in range(ncol):
        k = kx[c]
        e1r[c] = -k * exi[c]
        e1i[c] = k * exr[c]
        e2r[c] = -k * k * exr[c]
        e2i[c] = -k * k * exi[c]
    dky = ky[1] - ky[0] if nrow > 1 else 0.0
    yr, yi = math.cos(ky[0] * v), math.sin(ky[0] * v)
    pr, pi = math.cos(dky * v), math.sin(dky * v)
    f0r = f0i = fur = fui = fvr = fvi = fuur = fuui = fvvr = fvvi = fuvr = fuvi = 0.0
    for r in range(nrow):
        s0r = s0i = s1r = s1i = s2r = s2i = 0.0
        for c in range(ncol):
            w = a[r, c]
            s0r += w * exr[c]
            s0i += w * exi[c]
            s1r += w * e1r[c]
            s1i += w * e1i[c]
            s2r += w * e2r[c]
            s2i += w * e2i[c]
        k = ky[r]
        t0r, t0i = yr * s0r - yi * s0i, yr * s0i + yi * s0r
        t1r, t1i = yr * s1r - yi * s1i, yr * s1i + yi * s1r
        f0r += t0r
        f0i += t0i
        fur += t1r
        fui += t1i
        fuur += yr * s2r - yi * s2i
        fuui += yr * s2i + yi * s2r
        fvr -= k * t0i
        fvi += k * t0r
        fvvr -= k * k * t0r
        fvvi -= k * k * t0i
        fuvr -= k * t1i
        fuvi += k * t1r
        yr, yi = yr * pr - yi * pi, yr * pi + yi * pr
    return f0r, f0i, fur, fui, fvr, fvi, fuur, fuui, fvvr, fvvi, fuvr, fuvi


@njit(cache=True)
def _power6(a, kx, ky, u, v, norm, ws):
    """Normalised power, gradient (gu, gv) and Hessian (huu, hvv, huv) at (u, v)."""
    f0r, f0i, fur, fui, fvr, fvi, fuur, fuui, fvvr, fvvi, fuvr, fuvi = _exact6(a, kx, ky, u, v, ws)
    p = (f0r * f0r + f0i * f0i) / norm
    gu = 2.0 * (f0r * fur + f0i * fui) / norm
    gv = 2.0 * (f0r * fvr + f0i * fvi) / norm
    huu = 2.0 * (fur * fur + fui * fui + f0r * fuur + f0i * fuui) / norm
    hvv = 2.0 * (fvr * fvr + fvi * fvi + f0r * fvvr + f0i * fvvi) / norm
    huv = 2.0 * (fur * fvr + fui * fvi + f0r * fuvr + f0i * fuvi) / norm
    return p, gu, gv, huu, hvv, huv


def exact_point(a, kx, ky, u, v):
    """Normalised power, gradient and Hessian of the real grid ``a`` at one point (u, v)
    (the compiled evaluator; for checks against :class:`thinning.exact.GridExact`)."""
    a = np.ascontiguousarray(a, dtype=np.float64)
    ws = np.empty((6, a.shape[1]))
    norm = float(a.sum()) ** 2
    return _power6(a, np.asarray(kx, float), np.asarray(ky, float), float(u), float(v), norm, ws)


@njit(cache=True)
def _refine(
    a, kx, ky, norm, u0, v0, su0, sv0, du, dv, radius, cu, cv, linear, iterations, ws, floor
):
    """Trust-region Newton climb on the exact pattern from the sample at (u0, v0):
    :func:`thinning.exact.refine_peaks` for one point, started at the lobe's parabolic peak
    estimate (``su0``, ``sv0`` samples away) and stopped without evaluating a step whose
    predicted gain is below 1e-6 of the power (4e-6 dB), or when twice the predicted gain
    would leave it below ``floor`` (a lobe already found). Returns the best power and where."""
    if linear:
        dv = 1.0
        sv0 = 0.0
    su0 = min(0.5, max(-0.5, su0))
    sv0 = min(0.5, max(-0.5, sv0))
    bu, bv = u0 + su0 * du, v0 + sv0 * dv
    r = math.hypot(bu - cu, bv - cv)
    if r > radius:
        bu = cu + (bu - cu) * (radius / r)
        bv = cv + (bv - cv) * (radius / r)
    bp, gu, gv, huu, hvv, huv = _power6(a, kx, ky, bu, bv, norm, ws)
    trust = 0.5
    for _ in range(iterations):
        g0, g1 = gu * du, gv * dv
        h00, h01, h11 = huu * du * du, huv * du * dv, hvv * dv * dv
        if linear:
            g1 = 0.0
            h01 = 0.0
            h11 = -1.0
        det = h00 * h11 - h01 * h01
        negdef = h00 < 0.0 and det > 0.0
        n0 = n1 = np.nan
        if det != 0.0:
            n0 = -(h11 * g0 - h01 * g1) / det
            n1 = -(-h01 * g0 + h00 * g1) / det
        if negdef and np.isfinite(n0) and np.isfinite(n1):
            d0, d1 = n0, n1
        else:
            gnorm = math.hypot(g0, g1)
            s = trust / gnorm if gnorm > 0 else trust
            d0, d1 = g0 * s, g1 * s
        n = math.hypot(d0, d1)
        f = min(1.0, trust / n) if n > 0 else min(1.0, trust)
        d0 *= f
        d1 *= f
        gain = g0 * d0 + g1 * d1 + 0.5 * (h00 * d0 * d0 + 2.0 * h01 * d0 * d1 + h11 * d1 * d1)
        if negdef and gain < _GAIN * bp:
            break  # at the maximum as far as any printed figure can tell
        if negdef and bp + 2.0 * gain < floor:
            break  # this lobe stays below one already found: its exact peak does not matter
        su = min(1.0, max(-1.0, (bu - u0) / du + d0))
        tu = u0 + su * du
        if linear:
            tv = v0
        else:
            sv = min(1.0, max(-1.0, (bv - v0) / dv + d1))
            tv = v0 + sv * dv
        r = math.hypot(tu - cu, tv - cv)
        if r > radius:
            shrink = radius / r
            tu = cu + (tu - cu) * shrink
            tv = cv + (tv - cv) * shrink
        tp, tgu, tgv, thuu, thvv, thuv = _power6(a, kx, ky, tu, tv, norm, ws)
        better = tp > bp
        moved = math.hypot((tu - bu) / du, (tv - bv) / dv)
        if better:
            bu, bv, bp = tu, tv, tp
            gu, gv, huu, hvv, huv = tgu, tgv, thuu, thvv, thuv
            trust = min(1.0, trust * 1.5)
        else:
            trust *= 0.5
        if (better and moved < _MOVED) or trust < _TRUST:
            break
    return bp, bu, bv


@njit(cache=True)
def _climb(a, kx, ky, norm, k, cand, est, floor, w_pos, removed, srows, scols, geom, linear, ws):
    """Step 4 for candidates 0..k−1 of one pattern (best estimate first): each moved to its
    alias in the disc and climbed on the exact pattern of the real grid ``a`` (|Σa|² =
    ``norm``), skipping those whose estimate cannot reach the highest power found. Returns
    that power (``floor`` if no candidate beat it) and where (NaN then)."""
    du, dv = geom[1], geom[2]
    radius, cu, cv = geom[7], geom[8], geom[9]
    iterations = int(geom[10])
    best, bu, bv = floor, np.nan, np.nan
    for i in range(k):
        if est[i, 0] < math.log(best) - _SKIP:
            break  # this and the later (lower) lobes cannot reach the PSL found
        j = cand[i]
        u0, v0 = _alias(j, _removed_at(j, w_pos, removed), srows, scols, geom)
        p, u, v = _refine(
            a,
            kx,
            ky,
            norm,
            u0,
            v0,
            est[i, 1],
            est[i, 2],
            du,
            dv,
            radius,
            cu,
            cv,
            linear,
            iterations,
            ws,
            best,
        )
        if p > best:
            best, bu, bv = p, u, v
    return best, bu, bv


@njit(cache=True)
def _alias(flat, removed, srows, scols, geom):
    """The direction in the disc that sample ``flat`` stands for, nearest the disc's centre
    (:meth:`thinning.region.SampledRegion.alias_points`); ``removed`` > 0 where the main
    beam took the sample's own alias."""
    nc, du, dv, periodic = int(geom[0]), geom[1], geom[2], geom[3] > 0
    tu, tv, nqv = geom[4], geom[5], int(geom[6])
    radius, cu, cv = geom[7], geom[8], geom[9]
    s, c = flat // nc, flat % nc
    u0 = scols[c] * du
    v0 = srows[s] * dv
    if not periodic:
        return u0, v0
    reach = radius + math.hypot(cu, cv)
    npu = int(math.ceil(reach / tu)) + 1
    lim = radius * (1 + 1e-12)
    best = np.inf
    bu, bv = u0, v0
    for p in range(-npu, npu + 1):
        for q in range(-nqv, nqv + 1):
            if p == 0 and q == 0 and removed > 0:
                continue
            uu = u0 + p * tu
            vv = v0 + q * tv
            rr = math.hypot(uu - cu, vv - cv)
            if rr <= lim and rr < best:
                best, bu, bv = rr, uu, vv
    return bu, bv


@njit(cache=True, fastmath=True)
def _above(p, thr, out):
    """Indices of the samples of ``p`` at or above ``thr`` into ``out``; how many."""
    k = 0
    for j in range(p.size):
        if p[j] >= thr:
            out[k] = j
            k += 1
    return k


@njit(cache=True, fastmath=True)
def _total(x):
    s = 0.0
    for j in range(x.size):
        s += x[j]
    return s


@njit(cache=True)
def _removed_at(flat, w_pos, removed):
    q = w_pos[flat]
    return removed[q] if q >= 0 else 0.0


@njit(cache=True)
def _candidates(p, scan, thr, peak, weight, w_pos, removed, nbr, linear, cap, out_flat, out_est):
    """Local maxima of pattern ``p`` among the samples ``scan`` worth refining, best first
    (:meth:`thinning.region.SampledRegion.candidates`), into ``out_flat`` and ``out_est``
    (log of the parabolic peak estimate over the beam peak, and the vertex's offset in
    samples along u and v). Returns how many were found."""
    n_found = 0
    for t in range(scan.size):
        j = scan[t]
        here = p[j]
        if here < thr or weight[j] - _removed_at(j, w_pos, removed) <= 0:
            continue
        is_max = True
        for o in range(8):
            m = nbr[j, o]
            if m >= 0 and p[m] > here and weight[m] - _removed_at(m, w_pos, removed) > 0:
                is_max = False
                break
        if not is_max:
            continue
        logc = math.log(max(float(here), 1e-300))
        est = logc
        off_u = off_v = 0.0
        for axis in range(1 if linear else 2):
            lo_n = nbr[j, 3] if axis == 0 else nbr[j, 1]
            hi_n = nbr[j, 4] if axis == 0 else nbr[j, 6]
            lo = math.log(max(float(p[lo_n] if lo_n >= 0 else here), 1e-300))
            hi = math.log(max(float(p[hi_n] if hi_n >= 0 else here), 1e-300))
            den = lo - 2 * logc + hi
            if den < 0:
                delta = 0.5 * (lo - hi) / den  # the vertex, in samples
                est += -0.25 * (lo - hi) * delta
                if axis == 0:
                    off_u = delta
                else:
                    off_v = delta
        est -= math.log(peak)
        # insert into the sorted short list (ties keep the earlier sample)
        if n_found < cap:
            k = n_found
            n_found += 1
        elif est > out_est[cap - 1, 0]:
            k = cap - 1
        else:
            continue
        while k > 0 and est > out_est[k - 1, 0]:
            out_est[k] = out_est[k - 1]
            out_flat[k] = out_flat[k - 1]
            k -= 1
        out_est[k, 0] = est
        out_est[k, 1] = off_u
        out_est[k, 2] = off_v
        out_flat[k] = j
    return n_found


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
    the grid (:meth:`thinning.region.SampledRegion.fast_tables` stacks them until one does),
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
    weight, nbr, srows, scols, geom    the region (:class:`thinning.region.FastTables`;
                                 the weights in f's precision)
    outer_all, w_*               its main-beam windows, each twice the last, one after the
                                 other (:attr:`thinning.region.FastTables.levels`)
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
    est = np.zeros((max(cap, 1), 3))
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
            pj = float(p[w_flat[a0 + i]])
            total -= r * pj
            rsum += r
            if w_weight[a0 + i] - r > 0 and pj > w_max:
                w_max, w_arg = pj, i
        top = max(o_max, w_max)
        # the samples within the margin of the top (candidates, and the top's own place)
        n_above = _above(p, top * margin if refine else top, above)
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
    """Sample and refined PSL of K swap moves of one layout.

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
    est = np.zeros((max(cap, 1), 3))
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
            if inside[e] and v > top:
                top = v
        sampled[m] = top / peak
        psl[m] = sampled[m]
        if top > 0 and cap > 0:
            k = _candidates(
                p, ext, top * margin, peak, weight, w_pos, removed, nbr, linear, cap, cand, est
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
