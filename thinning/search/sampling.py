"""Exact-count sampling of on-probabilities: randomised systematic draws and error diffusion.

Both turn the per-gene on-probabilities of an envelope (:mod:`thinning.search.envelope`,
:mod:`thinning.search.density`) into genomes with exactly ``class_ones[c]`` genes on in every
symmetry class.

* :func:`systematic` draws at random with P(gene n on) = pₙ exactly, so the expected power
  pattern is that of references.md row 5 (up to the small negative covariances of sampling
  without replacement); its sidelobes scatter about the envelope's with the random floor
  Σ pₙ(1 − pₙ)/N².
* :func:`error_diffusion` decides the genes in a serpentine scan of the lattice, carrying each
  decision's error to the neighbours not yet decided (Floyd & Steinberg, Proc. SID 17(2), 1976;
  Ulichney, *Digital Halftoning*, MIT Press, 1987): deterministic, with the quantisation error
  shaped by the filter's noise transfer 1 − W(z). The Floyd–Steinberg filter pushes it to high
  spatial frequencies in every direction, i.e. away from the main beam and its near-in
  sidelobes (where the envelope's own sidelobes stand) out towards the edge of the u-v period;
  the "checkerboard" filter W = z_x⁻¹ + z_y⁻¹ − z_x⁻¹z_y⁻¹, noise transfer
  (1 − z_x⁻¹)(1 − z_y⁻¹), pushes it towards the corners (±Tu/2, ±Tv/2) of the period, the
  only part of it a half-wavelength lattice leaves outside a sidelobe disc of radius below √2.
  Eight scan orientations (the grid flipped and transposed) give eight distinct layouts. The
  count of each class is made exact afterwards by switching the few genes whose probability
  is nearest the decision they missed.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "systematic",
    "error_diffusion",
    "scale_to_count",
    "scale_to_classes",
    "DIFFUSION_FILTERS",
    "ORIENTATIONS",
    "CERTAIN",
]

#: Probabilities this close to 1 are treated as certain in :func:`systematic`.
CERTAIN = 1.0 - 1e-9
#: Diffusion filters: (rows ahead, columns ahead in the scan direction, weight) per tap.
DIFFUSION_FILTERS = {
    "floyd-steinberg": ((0, 1, 7 / 16), (1, -1, 3 / 16), (1, 0, 5 / 16), (1, 1, 1 / 16)),
    "checkerboard": ((0, 1, 1.0), (1, 0, 1.0), (1, 1, -1.0)),
    "jarvis": tuple(
        (dr, dc, w / 48)
        for dr, dc, w in (
            (0, 1, 7),
            (0, 2, 5),
            (1, -2, 3),
            (1, -1, 5),
            (1, 0, 7),
            (1, 1, 5),
            (1, 2, 3),
            (2, -2, 1),
            (2, -1, 3),
            (2, 0, 5),
            (2, 1, 3),
            (2, 2, 1),
        )
    ),
    "stucki": tuple(
        (dr, dc, w / 42)
        for dr, dc, w in (
            (0, 1, 8),
            (0, 2, 4),
            (1, -2, 2),
            (1, -1, 4),
            (1, 0, 8),
            (1, 1, 4),
            (1, 2, 2),
            (2, -2, 1),
            (2, -1, 2),
            (2, 0, 4),
            (2, 1, 2),
            (2, 2, 1),
        )
    ),
}
#: Scan orientations of :func:`error_diffusion`: (transpose, flip rows, flip columns).
ORIENTATIONS = tuple(
    (t, fr, fc) for t in (False, True) for fr in (False, True) for fc in (False, True)
)


def _check(problem, p) -> np.ndarray:
    p = np.asarray(p, dtype=float)
    g = problem.n_genes
    if p.shape != (g,):
        raise ValueError(f"p has shape {p.shape}; the problem has {g} genes")
    if np.any(~np.isfinite(p)) or np.any(p < -1e-12) or np.any(p > 1 + 1e-12):
        raise ValueError("on-probabilities must lie in [0, 1]")
    p = np.clip(p, 0.0, 1.0)
    for c, (idx, ones) in enumerate(zip(problem.class_members(), problem.class_ones, strict=True)):
        pc = p[idx]
        if not math.isclose(float(pc.sum()), int(ones), rel_tol=1e-9, abs_tol=1e-9):
            raise ValueError(
                f"on-probabilities of class {c} sum to {pc.sum():.6g}, not its {ones} genes on"
            )
    return p


def systematic(problem, p, rng: np.random.Generator, k: int) -> np.ndarray:
    """k genomes with exactly ``class_ones[c]`` genes on per class and P(gene n on) = pₙ.

    Randomised systematic sampling (Madow, "On the theory of systematic sampling, II",
    Ann. Math. Statist. 20, 1949), per class and vectorised over the draws: the class's genes
    are put in a random order, their probabilities laid end to end on [0, n) with cumulative
    sums Cₙ, and with one offset u ~ U[0, 1) the genes whose interval holds one of
    u, u + 1, …, u + n − 1 are switched on:

    .. math::  x_n = \\lceil C_n - u \\rceil - \\lceil C_{n-1} - u \\rceil \\in \\{0, 1\\}.

    The count is exactly n (the sum telescopes), and each gene is on with probability pₙ
    exactly, whatever the order; the random order spreads the joint inclusions. Genes with
    pₙ ≥ 1 − 10⁻⁹ are always on. With equal pₙ the draw is uniform over all n-subsets, i.e.
    random thinning.

    Parameters
    ----------
    problem : ThinningProblem
    p : (G,) array_like  [1]
        On-probabilities in [0, 1], summing to ``class_ones[c]`` over each class.
    rng : numpy.random.Generator
    k : int
        Number of genomes.

    Returns
    -------
    (k, G) bool array
    """
    p = _check(problem, p)
    out = np.zeros((k, problem.n_genes), dtype=bool)
    for idx, ones in zip(problem.class_members(), problem.class_ones, strict=True):
        ones = int(ones)
        pc = p[idx]
        sure = pc >= CERTAIN
        out[:, idx[sure]] = True
        rest = idx[~sure]
        n = ones - int(sure.sum())
        if n <= 0 or rest.size == 0:
            continue
        order = np.argsort(rng.random((k, rest.size)), axis=1)
        cum = np.minimum(np.cumsum(p[rest][order], axis=1), n)
        cum[:, -1] = n  # so that the count telescopes to exactly n
        u = rng.random((k, 1))
        hi = np.ceil(cum - u)
        lo = np.concatenate([np.zeros((k, 1)), hi[:, :-1]], axis=1)
        on = (hi - lo) > 0.5
        rows = np.repeat(np.arange(k), rest.size)
        out[rows, rest[order.ravel()]] = on.ravel()
    return out


def _exact_counts(problem, genome, p) -> np.ndarray:
    """Make every class's count exact: switch off the on-genes of lowest p (or on the
    off-genes of highest p) of a class that has too many (too few)."""
    g = genome.copy()
    for idx, ones in zip(problem.class_members(), problem.class_ones, strict=True):
        on = g[idx]
        extra = int(on.sum()) - int(ones)
        if extra > 0:
            cand = idx[on]
            g[cand[np.argsort(p[cand], kind="stable")[:extra]]] = False
        elif extra < 0:
            cand = idx[~on]
            g[cand[np.argsort(-p[cand], kind="stable")[:-extra]]] = True
    return g


def error_diffusion(
    problem, p, variant: int = 0, kernel: str = "floyd-steinberg", dither: float = 0.0, rng=None
) -> np.ndarray:
    """One deterministic genome by error diffusion of the gene probabilities on the lattice.

    Each gene stands at its first site's place on the index grid (a symmetric orbit once, so
    the layout keeps its symmetry); pinned, forbidden and partner sites are not cells. The
    decisions follow :func:`thinning.engine.fastpath.diffuse`; the count of each class is then
    made exact (see the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    p : (G,) array_like  [1]   on-probabilities, summing to ``class_ones[c]`` over each class
    variant : int   scan orientation, an index into :data:`ORIENTATIONS` (taken modulo 8)
    kernel : str    a key of :data:`DIFFUSION_FILTERS`
    dither : float  [1]   the threshold of each cell is 1/2 + dither·(U − 1/2), U ~ U[0, 1)
        from ``rng`` (0: no dither, deterministic)
    rng : numpy.random.Generator, optional   needed when ``dither`` > 0

    Returns
    -------
    (G,) bool
    """
    from ..engine import fastpath

    p = _check(problem, p)
    if kernel not in DIFFUSION_FILTERS:
        raise ValueError(f"kernel {kernel!r}: expected one of {', '.join(DIFFUSION_FILTERS)}")
    sites = problem.sites
    first = problem.gene_sites()[:, 0]
    r0, c0 = sites.grid_corner
    rows, cols = sites.row[first] - r0, sites.col[first] - c0
    values = np.full(sites.grid_shape, np.nan)
    values[rows, cols] = p
    transpose, flip_r, flip_c = ORIENTATIONS[variant % len(ORIENTATIONS)]
    if transpose and values.shape[0] > 1:
        values = values.T
    if flip_r:
        values = values[::-1]
    if flip_c:
        values = values[:, ::-1]
    taps = np.array(DIFFUSION_FILTERS[kernel], dtype=float)
    threshold = np.full(values.shape, 0.5)
    if dither > 0:
        threshold += dither * (rng.random(values.shape) - 0.5)
    out = fastpath.call(
        fastpath.diffuse,
        np.ascontiguousarray(values),
        threshold,
        taps[:, 0].astype(np.int64),
        taps[:, 1].astype(np.int64),
        np.ascontiguousarray(taps[:, 2]),
    )
    if flip_c:
        out = out[:, ::-1]
    if flip_r:
        out = out[::-1]
    if transpose and out.shape[1] != sites.grid_shape[1]:
        out = out.T
    genome = out[rows, cols].copy()
    return _exact_counts(problem, genome, p)


def scale_to_classes(problem, w: np.ndarray) -> np.ndarray:
    """Per-gene weights scaled within every class to its count (:func:`scale_to_count`)."""
    p = np.zeros(problem.n_genes)
    for idx, ones in zip(problem.class_members(), problem.class_ones, strict=True):
        p[idx] = scale_to_count(w[idx], int(ones))
    return p


def scale_to_count(w: np.ndarray, ones: int) -> np.ndarray:
    """p = min(1, s·w) with Σp = ones: cap at 1 and spread the excess over the rest."""
    p = np.zeros(w.size)
    if ones <= 0:
        return p
    if ones >= w.size:
        return np.ones(w.size)
    capped = np.zeros(w.size, dtype=bool)
    while True:
        free = ~capped
        left = ones - int(capped.sum())
        wf = w[free]
        total = float(wf.sum())
        scaled = left * (wf / total if total > 0 else np.full(wf.size, 1.0 / wf.size))
        over = scaled >= 1.0
        if not over.any():
            p[free] = scaled
            p[capped] = 1.0
            return p
        idx = np.flatnonzero(free)[over]
        capped[idx] = True
