"""Starting layouts, and restarts of the genetic search when it stalls with time left.

:func:`fresh_genomes` gives the first population of :mod:`thinning.search.genetic` (and the
fresh starts of its restarts): density-tapered draws, short iterative-Fourier trials and
uniform draws.

A population that has stopped improving for ``stall_generations`` generations has converged
on one basin. With time left, :mod:`thinning.search.genetic` polishes its best layout
(:mod:`thinning.search.anneal`) and starts a new population from

* the elites (the best layouts so far, unchanged: the best-so-far never gets worse),
* perturbed elites: each a copy of an elite with 1 … ``restart_swaps`` random swaps
  (``restart_perturbed_fraction`` of the population; the "kick" of iterated local search,
  Lourenço, Martin & Stützle, "Iterated local search", Handbook of Metaheuristics, 2003),
* fresh starts: density-tapered draws and short iterative-Fourier trials in the shares of the
  first population (``seed_density_fraction``, ``seed_ift_fraction``), the rest uniform.

Every draw comes from the search's ``rng`` and every swap keeps the per-class counts, so a
restarted population has the exact budget and the constraints, and the run stays
reproducible for a given seed and evaluation limit.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "IFT_SEED_FRACTION",
    "IFT_SEED_MAX_SITES",
    "fresh_genomes",
    "perturb",
    "restart_genomes",
]

#: Default share of iterative-Fourier starts in a genetic population. Measured with 60 s runs of
#: the genetic search with restarts (seeds 1-3, median, busy 2-core machine): the circular
#: 829-site case of benchmarks/bench_anytime.py −25.72 dB with them against −25.03 dB without,
#: the bundled octagon −24.21 against −23.78 dB, the 200-site linear case −23.96 against −23.96.
IFT_SEED_FRACTION = 0.25
#: Above this many sites the default is no iterative-Fourier starts: 16 trials took 0.3 s on
#: 829 sites but 14 s on 16,384 (busy 2-core machine), and on 16,384 sites the genetic search
#: alone did better than the iterative Fourier method in the same time (benchmarks/bench_ift.py).
IFT_SEED_MAX_SITES = 4096


def fresh_genomes(problem, rng, k, fraction, options, ift_fraction=0.0) -> np.ndarray:
    """k genomes: ``round(fraction·k)`` drawn from the density taper, ``round(ift_fraction·k)``
    from short iterative Fourier trials, the rest uniformly.

    Falls back to uniform draws if :mod:`thinning.search.density` is not available.
    """
    n_ift = int(round(ift_fraction * k))
    parts = []
    if n_ift > 0:
        from .ift import ift_genomes

        parts.append(np.asarray(ift_genomes(problem, rng, n_ift, options), dtype=bool))
    k -= n_ift
    n_density = int(round(fraction * k))
    if n_density > 0:
        try:
            from . import density
        except ImportError:
            density = None
        if density is not None:
            p = density.taper_probabilities(problem, options)
            parts.append(np.asarray(density.draw(problem, p, rng, n_density), dtype=bool))
        else:
            n_density = 0
    parts.append(problem.random_genomes(rng, k - n_density))
    return np.concatenate(parts, axis=0)


def perturb(problem, genome, rng: np.random.Generator, swaps: int) -> np.ndarray:
    """A copy of ``genome`` with ``swaps`` random swaps (an on gene with an off gene of the
    same class, no gene moved twice); fewer if the classes run out of genes to swap."""
    g = np.array(genome, dtype=bool)
    moved = np.zeros(g.size, dtype=bool)
    cls = problem.gene_class
    for _ in range(int(swaps)):
        on_free = g & ~moved
        off_free = ~g & ~moved
        n_on = np.bincount(cls[on_free], minlength=problem.class_sizes.size)
        n_off = np.bincount(cls[off_free], minlength=problem.class_sizes.size)
        pairs = n_on * n_off
        if pairs.sum() == 0:
            break
        c = int(rng.choice(pairs.size, p=pairs / pairs.sum()))
        on_c = np.flatnonzero(on_free & (cls == c))
        off_c = np.flatnonzero(off_free & (cls == c))
        i = on_c[rng.integers(on_c.size)]
        j = off_c[rng.integers(off_c.size)]
        g[i], g[j] = False, True
        moved[[i, j]] = True
    return g


def restart_genomes(problem, rng, elites, k, perturbed_fraction, max_swaps, fresh) -> np.ndarray:
    """k genomes for a restarted population (the elites themselves are not among them).

    Parameters
    ----------
    problem : ThinningProblem
    rng : numpy.random.Generator
    elites : list of (G,) bool arrays   best first
    k : int
    perturbed_fraction : float  [1]   share of perturbed elites (cycling through the elites)
    max_swaps : int   a perturbation makes 1 … max_swaps swaps (uniformly)
    fresh : callable(n) -> (n, G) bool   fresh starts

    Returns
    -------
    (k, G) bool array
    """
    n_pert = int(round(perturbed_fraction * k)) if elites else 0
    parts = []
    if n_pert:
        swaps = rng.integers(1, max(1, int(max_swaps)) + 1, size=n_pert)
        parts.append(
            np.stack(
                [perturb(problem, elites[i % len(elites)], rng, s) for i, s in enumerate(swaps)]
            )
        )
    if k - n_pert > 0:
        parts.append(np.asarray(fresh(k - n_pert), dtype=bool))
    return np.concatenate(parts, axis=0) if parts else np.zeros((0, problem.n_genes), bool)
