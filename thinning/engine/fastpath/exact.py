"""The exact pattern of a real excitation grid and the Newton climb of its lobes (compiled).

Part of :mod:`thinning.engine.fastpath`, whose docstring gives the rules these loops follow.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from .lobes import _alias, _removed_at

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
    (the compiled evaluator; for checks against :class:`thinning.engine.exact.GridExact`)."""
    a = np.ascontiguousarray(a, dtype=np.float64)
    ws = np.empty((6, a.shape[1]))
    norm = float(a.sum()) ** 2
    return _power6(a, np.asarray(kx, float), np.asarray(ky, float), float(u), float(v), norm, ws)


@njit(cache=True)
def _refine(
    a,
    kx,
    ky,
    norm,
    u0,
    v0,
    su0,
    sv0,
    du,
    dv,
    radius,
    cu,
    cv,
    linear,
    iterations,
    ws,
    floor,
    box,
    project,
):
    """Trust-region Newton climb on the exact pattern from the sample at (u0, v0):
    :func:`thinning.engine.exact.refine_peaks` for one point, started at the lobe's parabolic peak
    estimate (``su0``, ``sv0`` samples away) and stopped without evaluating a step whose
    predicted gain is below 1e-6 of the power (4e-6 dB), or when twice the predicted gain
    would leave it below ``floor`` (a lobe already found). The point stays within ``box``
    samples of its start and, when ``project``, inside the disc. Returns the best power and
    where."""
    if linear:
        dv = 1.0
        sv0 = 0.0
    su0 = min(0.5, max(-0.5, su0))
    sv0 = min(0.5, max(-0.5, sv0))
    bu, bv = u0 + su0 * du, v0 + sv0 * dv
    r = math.hypot(bu - cu, bv - cv)
    if project and r > radius:
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
        su = min(box, max(-box, (bu - u0) / du + d0))
        tu = u0 + su * du
        if linear:
            tv = v0
        else:
            sv = min(box, max(-box, (bv - v0) / dv + d1))
            tv = v0 + sv * dv
        r = math.hypot(tu - cu, tv - cv)
        if project and r > radius:
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
    ``norm``), skipping those whose estimate cannot reach the highest power found. Under a
    mask the power is weighed by each candidate's g (``est[i, 3]``); each climb stays within
    ``est[i, 4]`` samples of its start. Returns that power (``floor`` if no candidate beat
    it) and where (NaN then)."""
    du, dv = geom[1], geom[2]
    radius, cu, cv = geom[7], geom[8], geom[9]
    iterations = int(geom[10])
    project = geom[12] > 0
    masked = geom[13] > 0
    best, bu, bv = floor, np.nan, np.nan
    for i in range(k):
        if est[i, 0] < math.log(best) - _SKIP:
            break  # this and the later (lower) lobes cannot reach the PSL found
        j = cand[i]
        u0, v0 = _alias(j, _removed_at(j, w_pos, removed), srows, scols, geom)
        g = est[i, 3] if masked else 1.0
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
            best / g if masked else best,
            est[i, 4],
            project,
        )
        if masked:
            p *= g
        if p > best:
            best, bu, bv = p, u, v
    return best, bu, bv
