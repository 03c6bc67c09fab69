"""Exact patterns of weighted groups of sites at given directions.

Part of :mod:`thinning.engine.fastpath`. The optimised density envelope
(:mod:`thinning.search.envelope`) needs the array factor of every basis function (a weighted
set of lattice sites) at many directions (u, v): a K × V complex matrix for K points and V
basis functions. :func:`group_patterns` sums it directly, O(K·M·S) for M sites that each
belong to at most S basis functions, with the phasor of each point separated into a row and a
column factor (one complex product per site).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["group_patterns"]


@njit(cache=True, nogil=True)
def group_patterns(u, v, group, weight, kx, ky, n_groups):
    """Array factor of each weighted group of sites at each point.

    .. math::  B_{k, g} = \\sum_{(j, i, s):\\ \\mathrm{group}[j, i, s] = g}
               \\mathrm{weight}[j, i, s]\\; e^{\\,j (k_{x,i} u_k + k_{y,j} v_k)}

    Parameters
    ----------
    u, v : (K,) float64   directions  [1]
    group : (R, C, S) int32   the groups of each grid site (−1: none)
    weight : (R, C, S) float64   its weight in each
    kx, ky : (C,), (R,) float64   phase per unit u (v) of each grid column (row)  [rad]
    n_groups : int

    Returns
    -------
    (K, n_groups, 2) float64   real and imaginary parts
    """
    nrow, ncol, ns = group.shape
    out = np.zeros((u.size, n_groups, 2))
    exr = np.empty(ncol)
    exi = np.empty(ncol)
    for k in range(u.size):
        for c in range(ncol):
            ph = kx[c] * u[k]
            exr[c] = math.cos(ph)
            exi[c] = math.sin(ph)
        acc = out[k]
        for r in range(nrow):
            ph = ky[r] * v[k]
            yr = math.cos(ph)
            yi = math.sin(ph)
            for c in range(ncol):
                if group[r, c, 0] < 0:
                    continue
                er = yr * exr[c] - yi * exi[c]
                ei = yr * exi[c] + yi * exr[c]
                for s in range(ns):
                    g = group[r, c, s]
                    if g >= 0:
                        w = weight[r, c, s]
                        acc[g, 0] += w * er
                        acc[g, 1] += w * ei
    return out
