"""Statistical density tapering: on-probabilities that follow an amplitude taper.

Each gene is switched on with a probability proportional to the value of an amplitude taper at
its sites (Willey, "Space tapering of linear and planar arrays", IRE TAP AP-10, 1962; Skolnik,
Sherman & Ogg, "Statistically designed density-tapered arrays", IEEE TAP 12(4), 1964). The
*expected* array factor is then the pattern of the taper itself, and the draws scatter about it
with a mean sidelobe power (references.md row 5)

.. math::

    E|AF(u)|^2 = \\Bigl|\\sum_n p_n e^{j\\psi_n(u)}\\Bigr|^2 + \\sum_n p_n (1 - p_n).

Unlike the independent draws of those papers, every draw here has the exact element count: the
genes of each symmetry class are drawn by randomised systematic sampling (Madow, Ann. Math.
Statist. 20, 1949), which keeps each marginal P(gene on) = pₙ exactly. The search is the best
of K such draws.

Options
-------
taper : {"taylor", "uniform"}
    Amplitude taper (default "taylor"); "uniform" gives equal probabilities, which is random
    thinning.
taper_sll_db : float  [dB]
    Design sidelobe level of the Taylor taper, as a positive number of dB below the main lobe
    (default 30).
taper_nbar : int
    Number n̄ of nearly equal-level sidelobes of the Taylor taper (default 5).
batch, draws : int
    As for :mod:`thinning.search.random`.
"""

from __future__ import annotations

import math
import numbers

import numpy as np
from scipy.signal.windows import taylor

from ..errors import SpecError, where
from .random import best_of_draws

__all__ = ["TAPERS", "run", "taper_probabilities", "taper_values", "draw"]

TAPERS = ("taylor", "uniform")
#: Samples of the reference Taylor window that is interpolated at the sites.
TAPER_SAMPLES = 2001
#: Probabilities this close to 1 are treated as certain in :func:`draw`.
CERTAIN = 1.0 - 1e-9


def _taper_options(problem, options: dict) -> tuple[str, float, int]:
    src = getattr(problem, "source", None)
    kind = options.get("taper", "taylor")
    if kind not in TAPERS:
        raise SpecError(
            f"{where(src, 'search.taper')}{kind!r}: expected one of {', '.join(TAPERS)}"
        )
    sll = options.get("taper_sll_db", 30.0)
    if (
        isinstance(sll, bool)
        or not isinstance(sll, numbers.Real)
        or not math.isfinite(sll)
        or sll <= 0
    ):
        raise SpecError(
            f"{where(src, 'search.taper_sll_db')}{sll!r}: expected the design sidelobe level "
            "as a positive number of dB below the main lobe (e.g. 30 for -30 dB sidelobes)"
        )
    nbar = options.get("taper_nbar", 5)
    if isinstance(nbar, bool) or not isinstance(nbar, numbers.Integral) or nbar < 1:
        raise SpecError(
            f"{where(src, 'search.taper_nbar')}{nbar!r}: expected a whole number >= 1 "
            "(the number of nearly equal Taylor sidelobes)"
        )
    return kind, float(sll), int(nbar)


def taper_values(sites, kind: str = "taylor", sll_db: float = 30.0, nbar: int = 5) -> np.ndarray:
    """Amplitude taper at every site  [1, arbitrary scale, > 0].

    A linear lattice (``sites.lattice.kind == "linear"``) gets the Taylor window along x, from
    the centroid of the sites to their farthest end:

    .. math::  w(x) = T\\!\\left(\\frac{|x - \\bar x|}{\\max_m |x_m - \\bar x|}\\right)

    where T(t), 0 ≤ t ≤ 1, is the half of ``scipy.signal.windows.taylor`` (Taylor, IRE TAP
    AP-3, 1955; references.md row 9) from its centre to its edge, sampled at
    :data:`TAPER_SAMPLES` points and interpolated linearly. A planar aperture gets the same
    profile as a radial taper, w = T(r/R_max), with r the distance of a site from the centroid
    of the sites and R_max the largest such distance. This is an approximation of a circular
    Taylor distribution (Taylor, IRE TAP AP-8, 1960), which scipy does not provide: the
    sidelobe level of the continuous aperture it tapers is only near ``sll_db``, and a
    non-circular outline is tapered on circles all the same.

    Parameters
    ----------
    sites : thinning.geometry.lattice.Sites
    kind : {"taylor", "uniform"}
    sll_db : float  [dB]
        Taylor design sidelobe level, positive (dB below the main lobe).
    nbar : int
        Taylor n̄.

    Returns
    -------
    (M,) float array
    """
    m = len(sites)
    if kind == "uniform":
        return np.ones(m)
    if kind != "taylor":
        raise ValueError(f"taper {kind!r}: expected one of {', '.join(TAPERS)}")
    x, y = sites.x, sites.y
    if sites.lattice.kind == "linear":
        dist = np.abs(x - x.mean())
    else:
        dist = np.hypot(x - x.mean(), y - y.mean())
    reach = float(dist.max())
    t = dist / reach if reach > 0 else np.zeros(m)
    window = taylor(TAPER_SAMPLES, nbar, sll_db, norm=False)
    half = window[TAPER_SAMPLES // 2 :]
    return np.interp(t, np.linspace(0.0, 1.0, half.size), half)


def _scale_to_count(w: np.ndarray, ones: int) -> np.ndarray:
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


def taper_probabilities(problem, options: dict | None = None) -> np.ndarray:
    """On-probability of every gene, following an amplitude taper, with the exact budget.

    Each gene's weight is the mean taper value (:func:`taper_values`) over its sites, so a
    symmetric orbit is weighted by where its sites are, not by their mean position (which for
    a mirror pair lies on the mirror). Within each class c the weights are scaled to

    .. math::  p_n = \\min(1, s_c w_n), \\qquad \\sum_{n \\in c} p_n = \\text{class\\_ones}[c],

    capping at 1 and re-scaling the rest until no probability exceeds 1 (Skolnik, Sherman &
    Ogg 1964: density proportional to the amplitude taper).

    Parameters
    ----------
    problem : ThinningProblem
    options : dict, optional
        ``taper``, ``taper_sll_db`` [dB], ``taper_nbar`` (see the module docstring).

    Returns
    -------
    (G,) float array  [1]
        In [0, 1]; the sum over the genes of class c equals ``problem.class_ones[c]``.

    Raises
    ------
    thinning.errors.SpecError
        For an unknown taper or an out-of-range taper parameter.
    """
    kind, sll, nbar = _taper_options(problem, dict(options or {}))
    w_site = taper_values(problem.sites, kind, sll, nbar)
    g = problem.n_genes
    free = problem.site_gene >= 0
    sums = np.bincount(problem.site_gene[free], weights=w_site[free], minlength=g)
    counts = np.bincount(problem.site_gene[free], minlength=g)
    w = sums / np.maximum(counts, 1)
    p = np.zeros(g)
    for c, ones in enumerate(problem.class_ones):
        idx = np.flatnonzero(problem.gene_class == c)
        p[idx] = _scale_to_count(w[idx], int(ones))
    return p


def draw(problem, p, rng: np.random.Generator, k: int) -> np.ndarray:
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
    p = np.asarray(p, dtype=float)
    g = problem.n_genes
    if p.shape != (g,):
        raise ValueError(f"p has shape {p.shape}; the problem has {g} genes")
    if np.any(~np.isfinite(p)) or np.any(p < -1e-12) or np.any(p > 1 + 1e-12):
        raise ValueError("on-probabilities must lie in [0, 1]")
    p = np.clip(p, 0.0, 1.0)
    out = np.zeros((k, g), dtype=bool)
    for c, ones in enumerate(problem.class_ones):
        ones = int(ones)
        idx = np.flatnonzero(problem.gene_class == c)
        pc = p[idx]
        if not math.isclose(float(pc.sum()), ones, rel_tol=1e-9, abs_tol=1e-9):
            raise ValueError(
                f"on-probabilities of class {c} sum to {pc.sum():.6g}, not its {ones} genes on"
            )
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


def run(problem, tracker, rng: np.random.Generator, options: dict) -> str:
    """Best of K density-tapered draws (see the module docstring).

    Parameters
    ----------
    problem : ThinningProblem
    tracker : thinning.search.Tracker
    rng : numpy.random.Generator
    options : dict
        ``taper``, ``taper_sll_db`` [dB], ``taper_nbar``, ``batch``, ``draws``.

    Returns
    -------
    str
        Why the run stopped: ``"evaluations"``, ``"time"`` or ``"draws"``.
    """
    p = taper_probabilities(problem, options)
    return best_of_draws(problem, tracker, options, lambda k: draw(problem, p, rng, k))
