"""Sample weights of a sidelobe region given by its shape, and the limits of a mask on them.

Part of :class:`thinning.engine.region.SampledRegion` for a scan sector, a band or a mask
(:class:`thinning.engine.mask.RegionMap`): every sample of the grid stands for several
directions (its aliases on a periodic grid, and their mirror images (−u, −v) where the half
plane stores one column for two); its weight counts those in the region, as for the disc,
and its g is the largest 10^{−ℓ/10} among them (:mod:`thinning.engine.mask`).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["sample_directions", "shape_weights", "refine_terms"]


def sample_directions(region):
    """Every direction each sample of ``region``'s grid stands for within its reach: for each
    alias, ((nr, nc) u, (nr, nc) v, is it the sample's own direction, mirror), ``mirror``
    None for the stored direction and the columns that stand for their mirror image too
    for the mirrored one."""
    g = region.grid
    u = g.u[None, :] + 0.0 * g.v[:, None]
    v = g.v[:, None] + 0.0 * g.u[None, :]
    mirror = np.broadcast_to(g.col_mult[None, :] > 1, u.shape)
    offsets = [(0.0, 0.0)]
    if g.periodic:
        tu, tv = g.period
        reach = region.radius + math.hypot(*region.centre)
        n_u = int(math.ceil(reach / tu)) + 1
        n_v = 0 if tv is None else int(math.ceil(reach / tv)) + 1
        offsets = [
            (p * tu, 0.0 if tv is None else q * tv)
            for p in range(-n_u, n_u + 1)
            for q in range(-n_v, n_v + 1)
        ]
    for du, dv in offsets:
        own = du == 0.0 and dv == 0.0
        yield u + du, v + dv, own, None
        yield -u + du, -v + dv, own, mirror


def shape_weights(region, shape, counts: bool):
    """(weight, w0, gain, galias) of every sample: how many of its directions lie in the
    shape's region, how many of them are its own (the main beam's), the largest g among
    them, and the largest g without its own; weight and w0 None unless ``counts``.

    A line array's pattern depends on u alone, so on a grid of one row a direction counts
    when its u lies in the region's projection onto the u axis.
    """
    nr, nc = region.grid.nr, region.grid.nc
    count = np.zeros((nr, nc)) if counts else None
    principal = np.zeros((nr, nc)) if counts else None
    gain = np.zeros((nr, nc))
    galias = np.zeros((nr, nc))
    linear = region.grid.nr == 1 and region.grid.dv == 0
    for uu, vv, own, mirror in sample_directions(region):
        inside = np.array(shape.contains(uu, vv, linear))
        if mirror is not None:
            inside &= mirror
        if not inside.any():
            continue
        g = shape.weight(uu, vv, inside, linear)
        gain = np.maximum(gain, g)
        if counts:
            count += inside
            if own:
                principal += inside
        if not own:
            galias = np.maximum(galias, g)
    if counts:
        return count.ravel(), principal.ravel(), gain.ravel(), galias.ravel()
    return None, None, gain.ravel(), galias.ravel()


def refine_terms(region, red, b, flat):
    """For candidates (pattern ``b``, sample ``flat``) of ``region``: the g their refined
    peak is weighted by, and how far (in samples, each way) the refinement may move: 1, or ½
    (its own sample cell) where a neighbour lies outside a region that is not a disc, or in
    the region under another limit.

    Returns
    -------
    geff, box : (n,) arrays (None, None for the disc without a mask: 1 and 1)
    """
    if region.disc and not region.masked:
        return None, None
    b = np.asarray(b, dtype=np.int64)
    flat = np.asarray(flat, dtype=np.int64)
    g = region.grid
    geff = region._geff(red, b, flat) if region.masked else np.ones(flat.size)
    box = np.ones(flat.size)
    s, c = np.divmod(flat, g.nc)
    r = g.signed_rows[s]
    offsets = (
        [(0, -1), (0, 1)]
        if g.nr == 1
        else [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1) if dr or dc]
    )
    edge = np.zeros(flat.size, dtype=bool)
    for dr, dc in offsets:
        n = g.neighbour(r, c, dr, dc)
        n0 = np.maximum(n, 0)
        if not region.disc:
            edge |= (n < 0) | (region.weight[n0] <= 0)
        if region.masked:
            inside = (n >= 0) & region._eligible(red, b, n0)
            edge |= inside & (region._geff(red, b, n0) != geff)
    box[edge] = 0.5
    return geff, box
