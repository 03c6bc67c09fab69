"""The optimised density envelope: on-probabilities chosen by a linear programme.

A layout drawn with on-probabilities pₙ has the expected power pattern (references.md row 5;
Skolnik, Sherman & Ogg, IEEE TAP 12(4), 1964)

.. math::

    E|AF(u, v)|^2 = \\Bigl|\\sum_n p_n e^{j\\psi_n(u, v)}\\Bigr|^2 + \\sum_n p_n (1 - p_n),

whose first term is the pattern of the *envelope* p, and whose second term (the random floor)
falls as 1/N relative to the peak N². On large apertures the peak sidelobe of a drawn layout is
therefore set by the envelope's own sidelobes. A Taylor taper used as a density and capped at
p = 1 (:func:`thinning.search.density.taper_values`) cannot go below about −30 dB at 50 % fill;
this module chooses p instead by a linear programme (the minimax design of a tapered aperture
by linear programming, common practice since the 1970s; solved by HiGHS through
``scipy.optimize.linprog``):

.. math::

    \\min_{q,\\, s} s \\quad\\text{subject to}\\quad
    \\mathrm{Re}\\bigl(e^{-j\\theta}(B_k q + c_k)\\bigr) \\le s\\,N \\ \\ \\forall k, \\theta,
    \\qquad 0 \\le q \\le 1, \\qquad \\sum_{v \\in c} n_v q_v = \\text{class\\_ones}[c],

over the sidelobe region outside a main beam of radius β·u₀ (u₀ the first null of the
uniformly filled aperture of the same area, 1.2197 λ/(2a) for a disc of radius a; λ/L for a
line of length L).

The basis (q) is piecewise constant on cells *adapted to the real outline*: rings of the
normalised radius ρ = r / R(θ), R(θ) the outline's reach from the centroid of the usable sites
in the direction θ (read from the sites themselves, so every outline, hole and clearance is
followed), optionally cut into sectors of θ mod π (each cell symmetric about the centre); one
variable per cell and symmetry class. Pinned sites are fixed at p = 1, forbidden ones at 0.
``B[k, v]`` is the array factor of all the sites of cell v at point k, **computed exactly**
per basis function (a direct sum over its sites, :func:`thinning.engine.fastpath.group_patterns`,
or its 1-D projection along a lattice direction, which is exact for points on that ray);
holes and odd outlines are thus accounted for exactly. |z| ≤ s is imposed by cutting planes:
first |Re z| ≤ s on rays along eight lattice directions, then, after each solution, the
tangent half-plane at arg z for every lobe of the full transform of the envelope that exceeds
s (the transform covers the whole region, aliases included), until no lobe exceeds s by more
than 0.5 % in amplitude.

The main-beam factor β is *chosen by the method* among :data:`BEAM_FACTORS` (1.2 to 1.6): a
wider exclusion lowers the LP's optimum but leaves the first sidelobe unconstrained once the
envelope's real first null falls inside it, so each β is judged by the envelope bound with the
tool's own main-beam rule (along each ray to the first null), and the best is kept. The
**envelope bound** is the peak of E|AF|²/N² over the sidelobe region (refined on the exact
pattern of the envelope, plus the floor Σp(1 − p)/N²); the Taylor envelope's bound is computed
the same way and kept instead should it be lower, so the bound is never above it.

Not implemented: smooth (spline) bases; the expected pattern of independent draws differs from
that of exact-count draws by the small negative covariances of sampling without replacement.
"""

from __future__ import annotations

import math
import numbers
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import SpecError, where

__all__ = [
    "Envelope",
    "BEAM_FACTORS",
    "lp_envelope",
    "envelope_bound",
    "site_probabilities",
    "uniform_null",
]

#: Main-beam radii tried, in units of the uniform aperture's first null. Wider beams lower the
#: bound further at low fill (a denser core, a lower random floor) but cost beamwidth that a
#: thinned array is expected to keep (references.md row 15); ``envelope_beam`` asks for any
#: radius up to 4.
BEAM_FACTORS = (1.2, 1.3, 1.4, 1.5, 1.6)
#: Lattice directions (a, b) of the rays whose exact projections seed the programme.
RAYS = ((1, 0), (0, 1), (1, 1), (1, -1), (2, 1), (1, 2), (2, -1), (1, -2))
#: Radial step of the ray points, in units of the uniform first null: fine near the main beam,
#: where the pattern falls steeply, then a quarter of a lobe.
RAY_STEP_NEAR, RAY_NEAR, RAY_STEP = 1.0 / 12.0, 4.0, 1.0 / 5.0
#: Cutting-plane rounds and the amplitude excess that ends them.
CUT_ROUNDS = 8
CUT_TOLERANCE = 5e-3
#: Lobes added per cutting-plane round, at most.
CUT_POINTS = 600
#: Rows of the first programme (a sparse subset of the ray points), and the most rounds of
#: row generation.
START_ROWS, ROW_ROUNDS = 400, 12
#: A round of row generation that raises s by less than this (relative) ends it.
SETTLED = 1e-3
#: Rows kept before those far from binding are dropped.
MAX_ROWS = 6000
#: Below this many sites the main-beam radius is not searched (the middle factor is taken)
#: and the programme takes one cutting round only.
SEARCH_BEAM_SITES = 2048
#: Bounds of two main-beam radii this close are the same  [dB].
FLAT_DB = 0.01
#: Angular bins of the outline's reach R(θ).
REACH_BINS = 256


@dataclass
class Envelope:
    """An envelope (on-probabilities) and what it promises.

    Attributes
    ----------
    kind : str   "lp", "taylor" or "uniform"
    genes : (G,) float array  [1]   on-probability of each gene (input of the samplers)
    sites : (M,) float array  [1]   on-probability of each site (pinned 1, unavailable 0)
    bound_db : float  [dB]   peak of the expected pattern over the sidelobe region
    bound_uv : (float, float)  [1]   where it is
    beam_factor : float or None   main-beam radius of the programme / uniform first null
    beam_uv : float or None  [1]   that radius in direction cosines
    cells : int   basis functions (variables) of the programme
    rings, sectors : int
    seconds : float  [s]   time to compute it
    tried : list of dict   bound of each main-beam factor tried (LP only)
    """

    kind: str
    genes: np.ndarray
    sites: np.ndarray
    bound_db: float
    bound_uv: tuple = (math.nan, math.nan)
    beam_factor: float | None = None
    beam_uv: float | None = None
    cells: int = 0
    rings: int = 0
    sectors: int = 0
    seconds: float = 0.0
    tried: list = field(default_factory=list)
    taylor_bound_db: float | None = None

    def summary(self) -> dict:
        """The figures layout.json records (``envelope``)."""

        def r(x, d=4):
            return None if x is None or not math.isfinite(x) else round(float(x), d)

        return {
            "kind": self.kind,
            "bound_db": r(self.bound_db),
            "bound_uv": [r(self.bound_uv[0], 6), r(self.bound_uv[1], 6)],
            "beam_factor": r(self.beam_factor, 3) if self.beam_factor else None,
            "beam_uv": r(self.beam_uv, 6) if self.beam_uv else None,
            "cells": self.cells,
            "rings": self.rings,
            "sectors": self.sectors,
            "taylor_bound_db": r(self.taylor_bound_db) if self.taylor_bound_db else None,
            "seconds": r(self.seconds, 3),
        }


# -- options ---------------------------------------------------------------------------------
def _int_option(options, key, src, lo, hi):
    v = options.get(key)
    if v is None:
        return None
    if isinstance(v, bool) or not isinstance(v, numbers.Integral) or not lo <= v <= hi:
        raise SpecError(f"{where(src, f'search.{key}')}{v!r}: expected a whole number {lo}–{hi}")
    return int(v)


def _beam_option(options, src):
    v = options.get("envelope_beam")
    if v is None:
        return None
    if isinstance(v, bool) or not isinstance(v, numbers.Real) or not 0.5 <= v <= 4.0:
        raise SpecError(
            f"{where(src, 'search.envelope_beam')}{v!r}: expected the main-beam radius in "
            "units of the uniform aperture's first null, between 0.5 and 4"
        )
    return float(v)


# -- geometry --------------------------------------------------------------------------------
def uniform_null(problem) -> float:
    """First null of the uniformly filled aperture of the usable sites  [1, direction cosine].

    1.2197·λ/(2a) for the disc of the same area (a = √(M·A_cell/π)); λ/(M·d) for a line.
    """
    sites = problem.sites
    m = int(problem.available_sites.sum())
    lam = problem.wavelength
    if sites.lattice.kind == "linear":
        return lam / (max(m, 1) * sites.lattice.dx)
    a = math.sqrt(m * sites.lattice.cell_area / math.pi)
    return 1.2197 * lam / (2.0 * a)


def _normalised_radius(problem) -> tuple[np.ndarray, np.ndarray]:
    """ρ ∈ [0, 1] of every site (distance from the centroid of the usable sites over the
    outline's reach in that direction) and its angle θ  [rad]."""
    sites = problem.sites
    x, y = sites.x, sites.y
    use = problem.available_sites
    cx, cy = float(x[use].mean()), float(y[use].mean())
    dx, dy = x - cx, y - cy
    if sites.lattice.kind == "linear":
        r = np.abs(dx)
        reach = float(r[use].max()) or 1.0
        return np.minimum(r / reach, 1.0), np.where(dx < 0, math.pi, 0.0)
    r = np.hypot(dx, dy)
    th = np.arctan2(dy, dx)
    b = ((th + math.pi) / (2 * math.pi) * REACH_BINS).astype(np.int64) % REACH_BINS
    reach = np.zeros(REACH_BINS)
    np.maximum.at(reach, b[use], r[use])
    # a bin without sites (a narrow outline) takes its nearest neighbours' reach; a pitch of
    # slack on each side keeps the rim sites of a bin from reading above their neighbours'
    filled = reach > 0
    if not filled.all():
        idx = np.arange(REACH_BINS)
        reach = np.interp(idx, idx[filled], reach[filled], period=REACH_BINS)
    smooth = np.maximum(np.roll(reach, 1), np.maximum(reach, np.roll(reach, -1)))
    rho = r / np.maximum(smooth[b], 1e-30)
    return np.minimum(rho, 1.0), th


def _outline_is_round(problem) -> bool:
    """True when the outline's reach varies by under 3 % with direction and no site inside it
    is missing (no holes): rings alone then follow it."""
    sites = problem.sites
    if sites.lattice.kind == "linear":
        return True
    use = problem.available_sites
    x, y = sites.x[use], sites.y[use]
    r = np.hypot(x - x.mean(), y - y.mean())
    th = np.arctan2(y - y.mean(), x - x.mean())
    b = ((th + math.pi) / (2 * math.pi) * 64).astype(np.int64) % 64
    reach = np.zeros(64)
    np.maximum.at(reach, b, r)
    if reach.min() < 0.97 * reach.max():
        return False
    area = use.sum() * sites.lattice.cell_area
    return area >= 0.97 * math.pi * reach.mean() ** 2


@dataclass
class _Basis:
    """The programme's variables (knots × classes) and each site's weights on them.

    Each gene's on-probability is a convex combination of the variables at the knots around
    it: linear in the normalised radius between ring knots, and (with sectors) linear and
    periodic in θ mod π between sector knots. The envelope is therefore continuous, without the
    jagged density steps that piecewise-constant rings leave on a lattice.
    """

    gene_vars: np.ndarray  # (G, S) variables of each gene (−1: none)
    gene_weights: np.ndarray  # (G, S) and its weights on them (sum 1)
    genes_in_var: np.ndarray  # (V,) Σ of the weights of the genes on each variable
    class_of_var: np.ndarray  # (V,)
    group: np.ndarray  # (R, C, S) int32: variables of each grid site (V for pinned, −1 none)
    weight: np.ndarray  # (R, C, S) float64: its weights
    n_vars: int
    rings: int
    sectors: int


def _basis(problem, rings: int, sectors: int) -> _Basis:
    rho, th = _normalised_radius(problem)
    t = rho * rings
    k0 = np.minimum(t.astype(np.int64), rings - 1)
    f = t - k0
    ring_idx = np.stack([k0, k0 + 1], axis=1)
    ring_w = np.stack([1.0 - f, f], axis=1)
    if sectors > 1:
        ts = np.mod(th, math.pi) / (math.pi / sectors)
        l0 = np.minimum(ts.astype(np.int64), sectors - 1)
        g = ts - l0
        sec_idx = np.stack([l0, (l0 + 1) % sectors], axis=1)
        sec_w = np.stack([1.0 - g, g], axis=1)
    else:
        sec_idx = np.zeros((rho.size, 1), dtype=np.int64)
        sec_w = np.ones((rho.size, 1))
    cell = (ring_idx[:, :, None] * sectors + sec_idx[:, None, :]).reshape(rho.size, -1)
    w_site = (ring_w[:, :, None] * sec_w[:, None, :]).reshape(rho.size, -1)
    first = problem.gene_sites()[:, 0]
    n_cls = len(problem.class_sizes)
    g_cell = cell[first]
    g_w = w_site[first]
    key = g_cell * n_cls + problem.gene_class[:, None]
    used = g_w > 0
    uniq, inv = np.unique(key[used], return_inverse=True)
    n_vars = uniq.size
    gene_vars = np.full(key.shape, -1, dtype=np.int64)
    gene_vars[used] = inv
    gene_weights = np.where(used, g_w, 0.0)
    genes_in_var = np.bincount(gene_vars[used], weights=gene_weights[used], minlength=n_vars)
    class_of_var = uniq % n_cls
    m = len(problem.sites)
    s_ = key.shape[1]
    site_vars = np.full((m, s_), -1, dtype=np.int64)
    site_w = np.zeros((m, s_))
    free = problem.site_gene >= 0
    site_vars[free] = gene_vars[problem.site_gene[free]]
    site_w[free] = gene_weights[problem.site_gene[free]]
    site_vars[problem.pinned_sites] = -1
    site_vars[problem.pinned_sites, 0] = n_vars
    site_w[problem.pinned_sites] = 0.0
    site_w[problem.pinned_sites, 0] = 1.0
    # the grid: sites at their places, −1 elsewhere
    r0, c0 = problem.sites.grid_corner
    nr, nc = problem.sites.grid_shape
    group = np.full((nr, nc, s_), -1, dtype=np.int32)
    weight = np.zeros((nr, nc, s_))
    rr, cc = problem.sites.row - r0, problem.sites.col - c0
    group[rr, cc] = site_vars
    weight[rr, cc] = site_w
    # a site whose first slot is empty but others are not: move them up (the kernel skips
    # sites whose first slot is −1)
    empty_first = (group[..., 0] < 0) & (group.max(axis=-1) >= 0)
    if empty_first.any():
        order = np.argsort(group[empty_first] < 0, axis=-1, kind="stable")
        group[empty_first] = np.take_along_axis(group[empty_first], order, -1)
        weight[empty_first] = np.take_along_axis(weight[empty_first], order, -1)
    return _Basis(
        gene_vars, gene_weights, genes_in_var, class_of_var, group, weight, n_vars, rings, sectors
    )


def _alias_centres(problem) -> np.ndarray:
    """Replicas of the main beam (reciprocal lattice of the sites) near the region, (k, 2)."""
    from ..geometry.lattice import reciprocal_basis

    b = reciprocal_basis(problem.sites.lattice.basis, problem.wavelength)
    n = 3
    m1, m2 = np.meshgrid(np.arange(-n, n + 1), np.arange(-n, n + 1), indexing="ij")
    g = np.outer(m1.ravel(), b[:, 0]) + np.outer(m2.ravel(), b[:, 1])
    g = np.unique(np.round(g, 12), axis=0)
    radius = problem.engine.radius
    return g[np.hypot(g[:, 0], g[:, 1]) <= radius + 1.0]


def _beam_distance(u, v, centres) -> np.ndarray:
    """Distance of each point to its nearest main-beam replica (the beam itself included)."""
    d = np.full(np.shape(u), np.inf)
    for gu, gv in centres:
        d = np.minimum(d, np.hypot(u - gu, v - gv))
    return d


# -- the programme's rows ----------------------------------------------------------------------
def _ray_rows(problem, basis: _Basis, u0: float, rho_lo: float, radius: float):
    """Exact B (and pinned c) on rays along lattice directions, by 1-D projections.

    On the ray (u, v) = t·(a/gx, b/gy) the phase of grid site (i, j) is k·t·(a·i + b·j) in
    centred indices, so the array factor of each cell is the transform of its histogram over
    the integer s = a·i + b·j: exact, and O(V·S) per point instead of O(M).
    """
    sites = problem.sites
    r0, c0 = sites.grid_corner
    nr, nc = sites.grid_shape
    gx, gy = sites.lattice.grid_pitch
    linear = sites.lattice.kind == "linear"
    grp = basis.group
    jj, ii, slot = np.nonzero(grp >= 0)
    gid = grp[jj, ii, slot].astype(np.int64)
    wt = basis.weight[jj, ii, slot]
    ic = ii - (nc - 1) / 2
    jc = jj - (nr - 1) / 2
    k = 2 * math.pi / problem.wavelength
    rays = [(1, 0)] if linear else RAYS
    rho = np.concatenate(
        [
            np.arange(rho_lo, RAY_NEAR * u0, RAY_STEP_NEAR * u0),
            np.arange(max(rho_lo, RAY_NEAR * u0), radius, RAY_STEP * u0),
        ]
    )
    us, vs, blocks = [], [], []
    for a, b in rays:
        du = a / gx
        dv = 0.0 if linear else b / gy
        speed = math.hypot(du, dv)  # ρ per unit t
        t = rho / speed
        if t.size == 0:
            continue
        s2 = (2 * (a * ic + b * jc)).round().astype(np.int64)  # twice s (centred: halves)
        lo = int(s2.min())
        hist = np.zeros((basis.n_vars + 1, int(s2.max()) - lo + 1))
        np.add.at(hist, (gid, s2 - lo), wt)
        used = np.flatnonzero(hist.any(axis=0))
        ph = np.exp(1j * k * np.outer(t, (used + lo) / 2.0))  # (T, S)
        blocks.append(ph @ hist[:, used].T)  # (T, V + 1)
        us.append(t * du)
        vs.append(t * dv)
    return np.concatenate(us), np.concatenate(vs), np.concatenate(blocks)


def _point_rows(problem, basis: _Basis, u, v):
    """Exact B (and pinned c) at arbitrary points (direct sum over every site)."""
    from ..engine import fastpath

    kx, ky = problem.engine._phases()  # centred as in GridExact
    out = fastpath.call(
        fastpath.group_patterns,
        np.ascontiguousarray(u, dtype=np.float64),
        np.ascontiguousarray(v, dtype=np.float64),
        basis.group,
        basis.weight,
        kx,
        ky,
        basis.n_vars + 1,
    )
    return out[..., 0] + 1j * out[..., 1]


def _solve(rows_re, rhs, basis: _Basis, problem):
    """min s over the stacked half-plane rows  rows_re·q − s·N ≤ −rhs."""
    from scipy.optimize import linprog

    n = float(problem.elements)
    nv = basis.n_vars
    a_ub = np.hstack([rows_re, -n * np.ones((rows_re.shape[0], 1))])
    classes = problem.class_ones.size
    a_eq = np.zeros((classes, nv + 1))
    a_eq[basis.class_of_var, np.arange(nv)] = basis.genes_in_var
    cost = np.zeros(nv + 1)
    cost[-1] = 1.0
    b_ub = -rhs
    caps = getattr(problem, "_plan_caps", None)
    if caps is not None:  # per-tile limits on the expected count (the tile-count plan)
        rows, room = _cap_rows(basis, *caps)
        a_ub = np.vstack([a_ub, np.hstack([rows, np.zeros((rows.shape[0], 1))])])
        b_ub = np.concatenate([b_ub, room])
    res = linprog(
        cost,
        A_ub=a_ub,
        b_ub=b_ub,
        A_eq=a_eq,
        b_eq=problem.class_ones.astype(float),
        bounds=[(0.0, 1.0)] * nv + [(0.0, None)],
        method="highs-ipm",
    )
    if res.status != 0:
        return None, math.inf
    return res.x[:nv], float(res.x[-1])


def _cap_rows(basis: _Basis, tile_of_gene, room):
    """Rows Σ_v a[t, v]·q_v ≤ room[t]: the expected count of every tile (a gene's weight on
    each variable, summed over the tile's genes) within its room (limit less pins)."""
    rows = np.zeros((room.size, basis.n_vars))
    used = basis.gene_vars >= 0
    t = np.broadcast_to(tile_of_gene[:, None], basis.gene_vars.shape)
    np.add.at(rows, (t[used], basis.gene_vars[used]), basis.gene_weights[used])
    return rows, room.astype(float)


def _halfplanes(b, theta):
    """Rows Re(e^{−jθ}·B) and right-hand sides for points b (K, V + 1) and angles θ (K,)."""
    rot = b * np.exp(-1j * theta)[:, None]
    return rot[:, :-1].real, rot[:, -1].real


def _gene_probabilities(problem, basis: _Basis, q) -> np.ndarray:
    """Gene probabilities from the programme's variables, each class summing exactly."""
    from .sampling import scale_to_classes

    qq = np.clip(np.append(q, 0.0), 0.0, 1.0)  # index −1 reads the appended 0
    pg = np.clip((qq[basis.gene_vars] * basis.gene_weights).sum(axis=1), 0.0, 1.0)
    return scale_to_classes(problem, pg)


def site_probabilities(problem, genes) -> np.ndarray:
    """Per-site on-probability of gene probabilities: pinned sites 1, unavailable 0."""
    genes = np.asarray(genes, dtype=float)
    sg = problem.site_gene
    p = np.where(sg >= 0, genes[np.maximum(sg, 0)], 0.0)
    return np.where(problem.pinned_sites, 1.0, p)


def envelope_bound(problem, site_p) -> tuple[float, tuple[float, float]]:
    """Peak of the expected power pattern over the sidelobe region  [dB], and where.

    The envelope's pattern |Σ pₙ e^{jψₙ}|² is scored like any layout (the tool's main-beam rule,
    the candidate lobes refined on the exact pattern of the real weights p), normalised to the
    peak N², and the random floor Σ pₙ(1 − pₙ)/N² is added (references.md row 5).
    """
    site_p = np.asarray(site_p, dtype=float)
    n = float(site_p.sum())
    grid = problem.sites.to_grid(site_p, dtype=np.float64)
    d = problem.engine.detail(grid)
    floor = float(np.sum(site_p * (1.0 - site_p))) / (n * n)
    return 10 * math.log10(d.psl + floor), (float(d.psl_uv[0]), float(d.psl_uv[1]))


def _quick_bound(problem, site_p) -> float:
    """:func:`envelope_bound` by the search's compiled evaluation (its 10 highest lobes
    refined): to compare main-beam radii."""
    site_p = np.asarray(site_p, dtype=float)
    n = float(site_p.sum())
    grid = problem.sites.to_grid(site_p, dtype=np.float32)
    sc = problem.engine.evaluate(grid)
    floor = float(np.sum(site_p * (1.0 - site_p))) / (n * n)
    return 10 * math.log10(float(sc.psl[0]) + floor)


def _violations(problem, site_p, s, centres, beam):
    """Lobes of the envelope's full transform above s·N outside the programme's main beam:
    their (u, v) (the sample's own direction: every alias has the same value)."""
    eng = problem.engine
    g = eng.grid
    grid = problem.sites.to_grid(site_p, dtype=np.float32)
    f = eng.transform(grid)[0]
    amp = np.abs(f) / float(site_p.sum())
    cache = problem.__dict__.setdefault("_envelope_cache", {})
    if "beam_distance" not in cache:
        inside = eng.region.weight.reshape(g.nr, g.nc) > 0
        dist = _beam_distance(g.u[None, :], g.v[:, None], centres).astype(np.float32)
        cache["beam_distance"] = np.where(inside, dist, -1.0).astype(np.float32)
    keep = cache["beam_distance"] >= beam
    level = np.where(keep, amp, 0.0)
    over = level > s * (1.0 + CUT_TOLERANCE)
    if not over.any():
        return None, float(level.max())
    # local maxima among the samples (wrapping rows; the half plane's edge columns count their
    # in-grid neighbours only)
    peak = over.copy()
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr or dc:
                sh = np.roll(level, dr, axis=0)
                if dc:
                    sh = np.roll(sh, dc, axis=1)
                    if dc > 0:
                        sh[:, 0] = 0.0
                    else:
                        sh[:, -1] = 0.0
                peak &= level >= sh
    rr, cc = np.nonzero(peak)
    top = np.argsort(-level[rr, cc])[:CUT_POINTS]
    rr, cc = rr[top], cc[top]
    return (g.u[cc], g.v[rr]), float(level.max())


class _Programme:
    """The programme for one main-beam radius, solved by row generation.

    The pool of exact rows starts with the ray points; the programme is solved on a sparse
    subset of them, and each solution adds the tangent half-plane (at arg z) of the pool
    points that exceed s, a few hundred at a time, and drops rows that stand far from
    binding, until no pool point exceeds s; then (:meth:`cut`) the lobes of the envelope's
    full transform that exceed s join the pool. Every programme stays a few thousand rows,
    however large the aperture.
    """

    def __init__(self, problem, basis, beam, centres, ray_u, ray_v, ray_b):
        self.problem, self.basis, self.beam, self.centres = problem, basis, beam, centres
        radius = problem.engine.radius
        use = (np.hypot(ray_u, ray_v) <= radius) & (_beam_distance(ray_u, ray_v, centres) >= beam)
        self.pool = ray_b[use]
        self.n = float(problem.elements)
        self.q, self.s = None, math.inf
        self.rows = np.zeros((0, basis.n_vars))
        self.rhs = np.zeros(0)
        if self.pool.shape[0] == 0:
            return
        stride = max(1, self.pool.shape[0] // START_ROWS)
        start = self.pool[::stride]
        for th in (0.0, math.pi):
            self._add(start, np.full(start.shape[0], th))
        self._solve()

    @property
    def ok(self) -> bool:
        return self.q is not None

    def _add(self, b, theta):
        r_, c_ = _halfplanes(b, theta)
        self.rows = np.vstack([self.rows, r_])
        self.rhs = np.concatenate([self.rhs, c_])

    def _solve(self) -> bool:
        q, s = _solve(self.rows, self.rhs, self.basis, self.problem)
        if q is None:
            return False
        self.q, self.s = q, s
        if self.rows.shape[0] > MAX_ROWS:
            # drop rows far from binding (they rejoin from the pool if they come back)
            slack = self.n * s - (self.rows @ q + self.rhs)
            keep = slack <= 0.5 * self.n * s
            self.rows, self.rhs = self.rows[keep], self.rhs[keep]
        return True

    def _tangents(self, b):
        z = b[:, :-1] @ self.q + b[:, -1]
        self._add(b, np.angle(z))

    def settle(self) -> None:
        """Row generation over the pool until no pool point exceeds s (or s stops moving:
        the cuts then only polish the last 0.01 dB)."""
        for _ in range(ROW_ROUNDS):
            amp = np.abs(self.pool[:, :-1] @ self.q + self.pool[:, -1])
            over = np.flatnonzero(amp > self.s * self.n * (1.0 + CUT_TOLERANCE))
            if over.size == 0:
                return
            self._tangents(self.pool[over[np.argsort(-amp[over])[:CUT_POINTS]]])
            before = self.s
            if not self._solve() or self.s <= before * (1.0 + SETTLED):
                return

    def cut(self) -> bool:
        """Add the full transform's lobes above s to the pool; False when there are none."""
        site_p = site_probabilities(self.problem, self.genes())
        pts, _ = _violations(self.problem, site_p, self.s, self.centres, self.beam)
        if pts is None:
            return False
        bk = _point_rows(self.problem, self.basis, *pts)
        self.pool = np.vstack([self.pool, bk])
        self._tangents(bk)
        self._solve()
        return True

    def run(self, cut_rounds: int) -> None:
        self.settle()
        for _ in range(cut_rounds):
            before = self.s
            if not self.cut():
                break
            self.settle()
            if self.s <= before * (1.0 + SETTLED):
                break

    def genes(self) -> np.ndarray:
        return _gene_probabilities(self.problem, self.basis, self.q)


def lp_envelope(problem, options: dict | None = None, taylor_genes=None) -> Envelope:
    """The optimised envelope of a problem (see the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    options : dict, optional
        ``envelope_rings`` (basis rings, default about one per 3 pitches across, 12–96),
        ``envelope_sectors`` (sectors of θ mod π, default 1 for a round outline without
        holes, else 4), ``envelope_beam`` (main-beam radius in uniform first nulls; default:
        chosen among :data:`BEAM_FACTORS`).
    taylor_genes : (G,) array, optional
        The Taylor envelope it replaces: kept instead when its bound is lower.

    Returns
    -------
    Envelope
    """
    t0 = time.perf_counter()
    options = dict(options or {})
    src = getattr(problem, "source", None)
    sites = problem.sites
    nr, nc = sites.grid_shape
    across = max(nr, nc) if sites.lattice.kind != "linear" else nc
    rings = _int_option(options, "envelope_rings", src, 2, 512)
    if rings is None:
        rings = int(np.clip(round(across / 3), 12, 96))
    sectors = _int_option(options, "envelope_sectors", src, 1, 32)
    if sectors is None:
        sectors = 1 if _outline_is_round(problem) else 4
    if sites.lattice.kind == "linear":
        sectors = 1
    beam_opt = _beam_option(options, src)
    basis = _basis(problem, rings, sectors)
    u0 = uniform_null(problem)
    centres = _alias_centres(problem)
    factors = (beam_opt,) if beam_opt is not None else BEAM_FACTORS
    small = len(sites) < SEARCH_BEAM_SITES
    if small and beam_opt is None:
        # a small panel: its bound is mostly the random floor's; one radius, one cut round
        factors = (BEAM_FACTORS[len(BEAM_FACTORS) // 2],)
    radius = problem.engine.radius
    ray_u, ray_v, ray_b = _ray_rows(problem, basis, u0, min(factors) * u0, radius)
    tried = []
    # main-beam radii judged by their real bound (rays and one cutting round each), from
    # the middle of BEAM_FACTORS towards the better side; the best is then refined
    judged, progs = {}, {}

    def judge(i):
        if i in judged or not 0 <= i < len(factors):
            return judged.get(i, math.inf)
        beta = factors[i]
        prog = _Programme(problem, basis, beta * u0, centres, ray_u, ray_v, ray_b)
        bound = math.inf
        if prog.ok:
            prog.run(1)
            bound = _quick_bound(problem, site_probabilities(problem, prog.genes()))
            lp_db = 20 * math.log10(max(prog.s, 1e-300))
            tried.append({"beam_factor": beta, "lp_db": lp_db, "bound_db": bound})
        judged[i], progs[i] = bound, prog
        return bound

    # from the middle radius: wider while the bound does not get worse (a wider exclusion
    # relaxes the programme; on a tie the wider one's first null is still outside it), else
    # narrower while it gets better
    i = len(factors) // 2 if len(factors) > 1 else 0
    judge(i)
    if i + 1 < len(factors) and judge(i + 1) <= judged[i] + FLAT_DB:
        while i + 1 < len(factors) and judge(i + 1) <= judged[i] + FLAT_DB:
            i += 1
    else:
        while i > 0 and judge(i - 1) < judged[i] - FLAT_DB:
            i -= 1
    env = None
    if math.isfinite(judged[i]):
        beta, prog = factors[i], progs[i]
        prog.run(0 if small else CUT_ROUNDS)
        genes = prog.genes()
        site_p = site_probabilities(problem, genes)
        bound, at = envelope_bound(problem, site_p)
        env = Envelope(
            "lp",
            genes,
            site_p,
            bound,
            at,
            beta,
            beta * u0,
            basis.n_vars,
            rings,
            sectors,
            tried=tried,
        )
    if taylor_genes is not None:
        site_t = site_probabilities(problem, taylor_genes)
        t_bound, t_at = envelope_bound(problem, site_t)
        if env is None or t_bound < env.bound_db:
            genes = np.asarray(taylor_genes, float)
            env = Envelope("taylor", genes, site_t, t_bound, t_at, tried=tried)
        env.taylor_bound_db = t_bound
    if env is None:
        raise RuntimeError("the envelope programme found no solution")
    env.seconds = time.perf_counter() - t0
    return env
