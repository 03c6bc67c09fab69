"""Candidate lobes of a sampled power pattern: local maxima, aliases, estimates (compiled).

Part of :mod:`thinning.engine.fastpath`, whose docstring gives the rules these loops follow.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit


@njit(cache=True)
def _alias(flat, removed, srows, scols, geom):
    """The direction in the disc that sample ``flat`` stands for, nearest the disc's centre
    (:meth:`thinning.engine.region.SampledRegion.alias_points`); ``removed`` > 0 where the main
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
def _above_g(p, g, thr, out):
    """Indices of the samples with p·g at or above ``thr`` into ``out``; how many."""
    k = 0
    for j in range(p.size):
        if p[j] * g[j] >= thr:
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
def _geff(j, gain, galias, w_pos, removed):
    """g of sample j with the main beam's own direction taken out where it removed weight."""
    return galias[j] if _removed_at(j, w_pos, removed) > 0 else gain[j]


@njit(cache=True)
def _candidates(
    p,
    scan,
    thr,
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
    out_flat,
    out_est,
):
    """Local maxima of pattern ``p`` (of p·g under a mask) among the samples ``scan`` worth
    refining, best first (:meth:`thinning.engine.region.SampledRegion.candidates`), into
    ``out_flat`` and ``out_est`` (log of the parabolic peak estimate over the beam peak, with
    log g under a mask; the vertex's offset in samples along u and v; g; and how far the
    refinement may move, :meth:`thinning.engine.region.SampledRegion.refine_terms`).
    ``flags``: 1 masked, 2 a region that is not a disc. Returns how many were found."""
    masked = (flags & 1) != 0
    sampled_edge = (flags & 2) != 0
    n_found = 0
    for t in range(scan.size):
        j = scan[t]
        here = p[j]
        if weight[j] - _removed_at(j, w_pos, removed) <= 0:
            continue
        gj = _geff(j, gain, galias, w_pos, removed) if masked else 1.0
        val = here * gj if masked else here
        if val < thr:
            continue
        is_max = True
        box = 1.0
        for o in range(8):
            m = nbr[j, o]
            if m < 0:
                if sampled_edge and (not linear or o == 3 or o == 4):
                    box = 0.5
                continue
            inside = weight[m] - _removed_at(m, w_pos, removed) > 0
            if sampled_edge and weight[m] <= 0:
                box = 0.5
            if not inside:
                continue
            if masked:
                gm = _geff(m, gain, galias, w_pos, removed)
                if p[m] * gm > val:
                    is_max = False
                    break
                if gm != gj:
                    box = 0.5
            elif p[m] > here:
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
        if masked:
            est += math.log(max(float(gj), 1e-300))
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
        out_est[k, 3] = gj
        out_est[k, 4] = box
        out_flat[k] = j
    return n_found
